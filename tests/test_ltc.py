"""LTC read: round trips through the synthesizer, events, frame-rate inference, JSON contract.

The checks compare the decoder with the synthesizer's ground truth, whose labels follow
SMPTE ST 12-1 (checked against the ``timecode`` package in test_ltc_word.py); positions and
speeds are those the issue's JSON contract defines.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from readchan.errors import CaptureError, ParameterError
from readchan.formats.ltc import decode_ltc, ltc_json
from readchan.linecode.biphase import bits_from_transitions, biphase_positions
from readchan.formats.ltc.read import read_from_bits
from readchan.formats.ltc.word import FrameWord, Label, encode_word
from readchan.synth.playback import Playback, PlaySpeed
from readchan.synth.ltc import LtcEdit, LtcSpec, UserBits, synthesize_ltc


def roundtrip(**kw):
    s = synthesize_ltc(LtcSpec(**kw))
    return s, decode_ltc(s.samples, s.rate_hz)


def assert_matches_truth(s, r, *, pos_tol_s=None, speed_tol=2e-3):
    """Every frame the head met is read, none other, at the true position and speed (relative to
    the first candidate rate when the capture does not decide the rate, as documented)."""
    pos_tol_s = pos_tol_s if pos_tol_s is not None else 1.5 / s.rate_hz
    assert [f.timecode for f in r.frames] == [f.timecode for f in s.frames]
    used = r.rate_fps if r.rate_fps is not None else r.rate_fps_candidates[0]
    for got, want in zip(r.frames, s.frames):
        assert abs(got.position_s - want.position_s) < pos_tol_s
        assert got.speed == pytest.approx(want.speed * s.rate_fps / used, rel=speed_tol)
        assert got.direction == want.direction


def test_forward_line_level_reads_every_frame_at_its_position():
    s, r = roundtrip(duration_s=1.0, start="10:20:30:05")
    assert len(s.frames) >= 20
    assert_matches_truth(s, r)
    assert r.valid and r.direction == "forward" and r.signal_kind == "line"


def test_reverse_play_reads_frames_backwards_with_reverse_direction():
    s, r = roundtrip(duration_s=1.0, direction="reverse", rate_fps=30.0)
    assert_matches_truth(s, r)
    assert r.direction == "reverse"
    counts = [f.label.frames + 30 * f.label.seconds for f in r.frames]
    assert np.all(np.diff(counts) == -1)


def test_spin_up_from_a_fifth_of_nominal_on_the_raw_head():
    s, r = roundtrip(duration_s=1.5, signal="head", speed=PlaySpeed.ramp(0.2, 1.0, 1.0),
                     playback=Playback(snr_db=35))
    assert r.signal_kind == "head"
    assert_matches_truth(s, r, pos_tol_s=4 / s.rate_hz, speed_tol=1e-2)


def test_shuttle_to_eight_times_and_back_reads_every_frame():
    s, r = roundtrip(duration_s=1.0, speed=PlaySpeed.shuttle(1.0, 8.0, 0.3, 0.2), rate_hz=192_000.0,
                     playback=Playback(snr_db=30))
    assert_matches_truth(s, r)
    assert max(f.speed for f in r.frames) == pytest.approx(8.0, rel=5e-3)


def test_reverse_shuttle_on_the_raw_head_reads_every_frame():
    s, r = roundtrip(duration_s=1.0, signal="head", direction="reverse", rate_hz=192_000.0,
                     speed=PlaySpeed.shuttle(1.0, 8.0, 0.3, 0.2), playback=Playback(snr_db=40))
    # head pulses crowd at 8×, so intersymbol interference shifts their peaks a little
    assert_matches_truth(s, r, pos_tol_s=2.5e-5, speed_tol=5e-3)


def test_ten_times_nominal_reads_every_frame():
    s, r = roundtrip(duration_s=0.4, speed=PlaySpeed.constant(10.0), rate_hz=192_000.0,
                     playback=Playback(snr_db=30))
    assert len(s.frames) > 40
    assert_matches_truth(s, r)


def test_crawl_at_a_tenth_through_ac_coupling():
    # the AC-coupling corner at 10 Hz tilts each 5 ms cell of a 0.1× square wave; the tilt moves
    # the mid-level crossing within the 250 µs edge, so positions hold to a fifth of the edge
    s, r = roundtrip(duration_s=2.5, speed=PlaySpeed.constant(0.1), playback=Playback(highpass_hz=10.0, snr_db=30))
    assert len(s.frames) >= 4
    assert_matches_truth(s, r, pos_tol_s=5e-5)


def test_wow_flutter_noise_and_a_narrow_band_still_read_every_frame():
    s, r = roundtrip(duration_s=2.0, speed=PlaySpeed.constant(1.0, wow_depth=0.05, wow_hz=1.0,
                                                              flutter_depth=0.02, flutter_hz=12.0),
                     playback=Playback(snr_db=20, band_hz=(100.0, 8000.0), hum_level=0.2))
    # the playback band's causal filter delays every edge by its group delay (about 20 µs)
    assert_matches_truth(s, r, pos_tol_s=5e-5, speed_tol=5e-3)


def test_dropout_is_a_gap_event_and_frames_around_it_are_read():
    s, r = roundtrip(duration_s=2.0, playback=Playback(snr_db=30, dropouts=((0.5, 0.1, 40.0),)))
    truth = {f.timecode for f in s.frames}
    got = [f.timecode for f in r.frames]
    assert set(got) <= truth and len(got) >= len(truth) - 5
    gaps = [e for e in r.events if e.kind == "gap"]
    assert len(gaps) == 1 and 0.49 < gaps[0].position_s < 0.6


def test_frame_accurate_edit_is_a_jump_with_both_timecodes():
    s, r = roundtrip(duration_s=1.0, edits=(LtcEdit(10, "jump", to="02:00:00:00"),))
    assert_matches_truth(s, r)
    (e,) = r.events
    assert (e.kind, e.from_timecode, e.to_timecode) == ("jump", "01:00:00:09", "02:00:00:00")
    assert e.position_s == pytest.approx(s.edit_times_s[0], abs=1e-4)


def test_repeated_and_missing_frames_are_told_apart():
    s, r = roundtrip(duration_s=1.5, edits=(LtcEdit(8, "repeat"), LtcEdit(20, "skip", frames=3)))
    kinds = [(e.kind, e.frames) for e in r.events]
    assert kinds == [("repeated_frame", None), ("missing_frames", 3)]
    assert r.events[0].position_s == pytest.approx(s.edit_times_s[0], abs=1e-4)


def test_unsynchronised_splice_is_one_event_between_the_frames_around_it():
    s, r = roundtrip(duration_s=1.5, edits=(LtcEdit(12, "splice", to="05:00:00:00", cut_cells=33.0,
                                                     into_cells=51.5),))
    (e,) = r.events
    assert e.kind == "splice" and e.from_timecode == "01:00:00:10"
    before = [f for f in r.frames if f.timecode == "01:00:00:10"][0]
    after = [f for f in r.frames if f.timecode == e.to_timecode][0]
    assert before.position_s < e.position_s <= s.edit_times_s[0] + 1e-4 < after.position_s
    assert e.to_timecode.startswith("05:00:00:")


def test_24_hour_rollover_is_continuous_not_a_jump():
    s, r = roundtrip(duration_s=1.0, start="23:59:59:12", rate_fps=24.0)
    assert "00:00:00:00" in [f.timecode for f in r.frames]
    assert r.events == ()
    assert r.rate_fps == 24.0                    # the wrap 23 → 00 decides it


def test_drop_frame_rollover_and_flag():
    s, r = roundtrip(duration_s=1.0, start="23:59:59;15", rate_fps=29.97)
    assert_matches_truth(s, r)
    assert "00:00:00;00" in [f.timecode for f in r.frames] and r.events == ()
    assert r.rate_fps == 29.97 and all(f.drop_frame for f in r.frames)


def test_drop_frame_minute_boundary_skips_two_labels_without_an_event():
    s, r = roundtrip(duration_s=1.0, start="00:00:59;20", rate_fps=29.97)
    labels = [f.timecode for f in r.frames]
    i = labels.index("00:00:59;29")
    assert labels[i + 1] == "00:01:00;02" and r.events == ()


def test_wrap_at_24_frames_decides_24_fps():
    s, r = roundtrip(duration_s=1.0, start="01:00:00:10", rate_fps=24.0)
    assert r.rate_fps == 24.0


def test_largest_frame_number_alone_leaves_the_30_frame_family_undecided():
    s, r = roundtrip(duration_s=1.5, start="01:00:00:00", rate_fps=30.0)
    assert r.rate_fps is None and set(r.rate_fps_candidates) == {29.97, 30.0}


@pytest.mark.parametrize("rate", [29.97, 30.0])
def test_bit_rate_at_nominal_speed_tells_29_97_from_30(rate):
    s = synthesize_ltc(LtcSpec(duration_s=1.5, rate_fps=rate, drop_frame=False))
    r = decode_ltc(s.samples, s.rate_hz, nominal_speed=True)
    assert r.rate_fps == rate


def test_short_capture_without_wrap_reports_candidates():
    s, r = roundtrip(duration_s=0.3, start="01:00:00:02", rate_fps=25.0)
    assert r.rate_fps is None and 25.0 in r.rate_fps_candidates and len(r.rate_fps_candidates) >= 2


def test_counting_and_text_user_bits_are_read():
    s, r = roundtrip(duration_s=0.5, user_bits=UserBits("counting", value=0x100))
    assert [f.user_bits for f in r.frames] == [f.user_bits for f in s.frames]
    assert len({f.user_bits for f in r.frames}) == len(r.frames)
    s, r = roundtrip(duration_s=0.5, user_bits=UserBits("text", text="TAPE"))
    # "TAPE" = 54 41 50 45 (hex): each character low nibble first, so 4 5 1 4 0 5 5 4
    assert r.frames[0].user_bits == "45140554"


def test_word_with_odd_zeros_is_not_a_frame():
    words = [encode_word(FrameWord(Label(2, 0, 0, k)), 25.0) for k in range(10)]
    for w in words:
        w[59] ^= 1                                     # the polarity bit now wrong
    pos, _ = biphase_positions(np.concatenate(words))
    r = read_from_bits(bits_from_transitions(0.01 + pos / 2000.0))
    assert r.frames == () and not r.valid


def test_json_follows_the_contract():
    s, r = roundtrip(duration_s=1.0, start="00:10:00;00", rate_fps=29.97)
    d = json.loads(json.dumps(ltc_json(r)))
    assert {"channel", "format", "direction", "valid", "start_s", "end_s", "frames", "rate_fps",
            "rate_fps_candidates", "events"} <= set(d)
    assert d["format"] == "ltc" and d["valid"] is True and d["rate_fps"] == 29.97
    f = d["frames"][0]
    assert set(f) == {"timecode", "position_s", "speed", "direction", "user_bits", "drop_frame", "color_frame"}
    assert f["timecode"][8] == ";" and len(f["user_bits"]) == 8
    assert [x["position_s"] for x in d["frames"]] == sorted(x["position_s"] for x in d["frames"])
    assert d["start_s"] == pytest.approx(d["frames"][0]["position_s"])


def test_stereo_capture_reads_the_chosen_channel():
    s = synthesize_ltc(LtcSpec(duration_s=0.5))
    two = np.column_stack((np.zeros_like(s.samples), s.samples))
    assert decode_ltc(two, s.rate_hz, channel=1).frames
    assert not decode_ltc(two, s.rate_hz, channel=0).frames


@pytest.mark.parametrize("samples, rate, error", [
    (np.zeros(0), 48_000.0, CaptureError),
    (np.array([0.0, np.nan, 1.0] * 100), 48_000.0, CaptureError),
    (np.zeros(1000), 0.0, ParameterError),
    (np.zeros((10, 2, 2)), 48_000.0, CaptureError),
])
def test_bad_input_is_a_clear_error(samples, rate, error):
    with pytest.raises(error):
        decode_ltc(samples, rate)


def _ideal_read(words, bit_rate=2000.0):
    pos, _ = biphase_positions(np.concatenate(words))
    return read_from_bits(bits_from_transitions(0.01 + pos / bit_rate))


def test_frame_failing_its_parity_is_a_damaged_event_where_it_lies():
    words = [encode_word(FrameWord(Label(2, 0, 0, k)), 25.0) for k in range(12)]
    words[5][20] ^= 1                                  # a user bit: the zero count turns odd
    r = _ideal_read(words)
    assert "02:00:00:05" not in [f.timecode for f in r.frames] and len(r.frames) == 11
    (e,) = r.events
    assert (e.kind, e.frames, e.from_timecode, e.to_timecode) == ("damaged", 1, "02:00:00:04", "02:00:00:06")
    assert e.position_s == pytest.approx(0.01 + 5 * 80 / 2000.0, abs=1e-9)


def test_skipped_drop_frame_label_is_an_invalid_label_event():
    labels = [Label(0, 0, 59, 28), Label(0, 0, 59, 29), Label(0, 1, 0, 0), Label(0, 1, 0, 2), Label(0, 1, 0, 3)]
    words = [encode_word(FrameWord(lab, drop_frame=True), 29.97) for lab in labels]
    r = _ideal_read(words, bit_rate=2397.6)
    assert "00:01:00;00" not in [f.timecode for f in r.frames]
    assert [e.kind for e in r.events if e.kind == "invalid_label"] == ["invalid_label"]


def test_play_reversing_without_a_stop_is_a_direction_change():
    fwd = [encode_word(FrameWord(Label(3, 0, 0, k)), 25.0) for k in range(6)]
    back = [w[::-1] for w in fwd[::-1]]               # the same frames met backwards
    r = _ideal_read(fwd + back)
    assert [f.direction for f in r.frames] == ["forward"] * 6 + ["reverse"] * 6
    assert [e.kind for e in r.events] == ["direction_change"]
