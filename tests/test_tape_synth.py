"""The tape synthesizers and the biphase-mark line code, checked against the physics and the
standards they model rather than against the decoders.

Sources: biphase mark = F2F (a transition at every cell boundary, one more mid-cell for a 1;
ISO/IEC 7811-2, SMPTE ST 12-1); Faraday's law for an inductive head (amplitude ∝ speed,
REFERENCE.md); rise times 25 µs (SMPTE) and 50 µs (EBU), from memory; Kansas City tones
2400/1200 Hz (BYTE, Feb. 1976).
"""

from __future__ import annotations

import numpy as np
import pytest

from readchan.errors import ParameterError
from readchan.linecode.biphase import biphase_positions, bits_from_transitions, period_anchors
from readchan.formats.ltc.word import WORD_BITS
from readchan.synth.playback import Playback, PlaySpeed
from readchan.synth.kcs import KcsSpec, synthesize_kcs
from readchan.synth.ltc import LtcEdit, LtcSpec, synthesize_ltc


def test_biphase_positions_have_a_boundary_per_cell_and_a_mid_cell_per_one():
    pos, _ = biphase_positions(np.array([0, 1, 1, 0], np.uint8))
    assert list(pos) == [0, 1, 1.5, 2, 2.5, 3, 4]


def test_biphase_bits_survive_a_fivefold_speed_ramp_in_both_directions():
    rng = np.random.default_rng(4)
    bits = rng.integers(0, 2, 600).astype(np.uint8)
    bits[::9] = 0                        # F2F cells in LTC always include zeros (the sync word's)
    pos, _ = biphase_positions(bits)
    speed = 0.2 + 0.8 * pos / pos[-1]                          # relative speed along the tape
    dt = np.diff(pos) / 2400.0 / (0.5 * (speed[1:] + speed[:-1]))
    t = 0.01 + np.concatenate(([0.0], np.cumsum(dt)))
    assert np.array_equal(bits_from_transitions(t).bits, bits)
    back = bits_from_transitions(t[-1] + 0.01 - t[::-1])
    assert np.array_equal(back.bits, bits[::-1])


def test_biphase_bits_are_read_whole_when_the_signal_is_cut_inside_a_cell_of_a_one():
    # the capture opens after the mid-cell transition of a 1 and closes after the mid-cell
    # transition of another: the cells in between read as recorded, the two cut cells not at all
    rng = np.random.default_rng(7)
    bits = rng.integers(0, 2, 200).astype(np.uint8)
    bits[::9] = 0
    bits[-3:] = (0, 1, 1)                # 1s before the cut: a shifted parse would end on a boundary
    bits[:2] = (1, 1)
    pos, _ = biphase_positions(bits)
    cut = np.concatenate(([-0.5], pos, [pos[-1] + 0.5]))
    assert np.array_equal(bits_from_transitions(0.01 + (cut + 0.5) / 2400.0).bits, bits)


def test_a_steady_tone_has_no_period_anchors():
    t = np.arange(500) / 2000.0
    at, _ = period_anchors(t)
    assert at.size == 0 and len(bits_from_transitions(t)) == 0


def test_same_spec_and_seed_give_the_same_capture():
    spec = LtcSpec(duration_s=0.3, playback=Playback(snr_db=20), seed=11)
    a, b = synthesize_ltc(spec), synthesize_ltc(spec)
    assert np.array_equal(a.samples, b.samples)
    c = synthesize_ltc(LtcSpec(duration_s=0.3, playback=Playback(snr_db=20), seed=12))
    assert not np.array_equal(a.samples, c.samples)


def test_ltc_transitions_follow_the_bit_rate_of_the_frame_rate():
    s = synthesize_ltc(LtcSpec(duration_s=1.0, rate_fps=25.0))
    d = np.diff(s.transition_times_s)
    # 80 × 25 = 2000 bit/s: intervals are 500 µs (a 0) or 250 µs (half of a 1)
    assert set(np.round(d * 4000).astype(int)) == {1, 2}


def test_head_pulse_amplitude_grows_in_proportion_to_speed():
    peaks = []
    for speed in (1.0, 2.0):
        s = synthesize_ltc(LtcSpec(duration_s=0.3, signal="head", speed=PlaySpeed.constant(speed),
                                   rate_hz=192_000.0))
        peaks.append(np.percentile(np.abs(s.samples), 99))
    assert peaks[1] / peaks[0] == pytest.approx(2.0, rel=0.05)


@pytest.mark.parametrize("rise, speed, expected_s", [("smpte", 1.0, 25e-6), ("ebu", 1.0, 50e-6),
                                                     ("smpte", 0.2, 125e-6)])
def test_line_edge_rise_time_is_the_standard_one_stretched_by_slow_play(rise, speed, expected_s):
    rate = 1e6
    s = synthesize_ltc(LtcSpec(duration_s=0.05 / speed, rise=rise, speed=PlaySpeed.constant(speed),
                               rate_hz=rate, amplitude=1.0))
    edge = s.transition_times_s[5]
    i = int(edge * rate)
    seg = s.samples[i - 400:i + 400]
    seg = seg if seg[-1] > seg[0] else -seg
    t10 = np.flatnonzero(seg > -0.8)[0]
    t90 = np.flatnonzero(seg > 0.8)[0]
    assert (t90 - t10) / rate == pytest.approx(expected_s, rel=0.05)


def test_reverse_play_meets_frames_in_decreasing_label_order():
    s = synthesize_ltc(LtcSpec(duration_s=0.5, direction="reverse", start="01:00:00:00"))
    labels = [f.timecode for f in s.frames]
    assert labels == sorted(labels, reverse=True)


def test_frame_truth_speed_is_nominal_frames_over_capture_duration():
    s = synthesize_ltc(LtcSpec(duration_s=0.5, speed=PlaySpeed.constant(3.0)))
    assert all(f.speed == pytest.approx(3.0) for f in s.frames)
    p = [f.position_s for f in s.frames]
    assert np.diff(p) == pytest.approx(1 / 25 / 3.0)


def test_edit_time_is_where_the_head_meets_it():
    s = synthesize_ltc(LtcSpec(duration_s=1.0, start_cell=0.0, edits=(LtcEdit(5, "jump", to="03:00:00:00"),)))
    assert s.edit_times_s[0] == pytest.approx(5 * WORD_BITS / 2000.0, abs=1e-9)


def test_kcs_leader_is_2400_hz_and_scales_with_speed():
    for speed in (1.0, 1.1):
        s = synthesize_kcs(KcsSpec(data=b"", leader_s=0.5, speed=PlaySpeed.constant(speed), quiet_s=0.0,
                                   trailer_s=0.0))
        x = s.samples[: int(0.4 * s.rate_hz)]
        crossings = np.count_nonzero(np.signbit(x[1:]) != np.signbit(x[:-1]))
        assert crossings / (2 * 0.4) == pytest.approx(2400 * speed, rel=0.01)


def test_kcs_byte_lasts_eleven_bits():
    s = synthesize_kcs(KcsSpec(data=b"\x00\x00\x00", baud=300))
    assert np.diff(s.byte_times_s) == pytest.approx(11 / 300)


def test_kcs_fractional_idle_spaces_bytes_apart():
    s = synthesize_kcs(KcsSpec(data=b"\x00\x00\x00", baud=1200, idle_bits=(0.5, 3.0)))
    assert np.diff(s.byte_times_s) == pytest.approx([11.5 / 1200, 14 / 1200])


@pytest.mark.parametrize("make", [
    lambda: LtcSpec(rate_fps=23.0),
    lambda: LtcSpec(rate_fps=25.0, drop_frame=True),
    lambda: LtcSpec(direction="sideways"),
    lambda: LtcSpec(speed=PlaySpeed.constant(0.0)),
    lambda: LtcEdit(0, "jump", to="01:00:00:00"),
    lambda: LtcEdit(3, "jump"),
    lambda: KcsSpec(baud=110),
    lambda: KcsSpec(idle_bits=-1.0),
    lambda: Playback(band_hz=(3000.0, 300.0)),
])
def test_absurd_synth_parameters_are_refused(make):
    with pytest.raises(ParameterError):
        make()
