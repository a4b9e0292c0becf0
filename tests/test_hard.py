"""Hard captures: the decoding targets for real swipes, segmentation, and recovery.

Targets (each alone and mixed): speed 10–150 cm/s changing by up to ±50 % along the swipe;
jitter up to ±8 % of a cell; density ±5 %; SNR down to 16 dB; PW50 up to 0.6 of a cell on
210 bpi tracks; hum at 50/60 Hz up to a third of the pulse amplitude; baseline wander;
clipping at 70 % of the peak; inverted polarity; reverse swipes.  Hypothesis draws scenarios
from these ranges (a small sample here; READCHAN_HYPOTHESIS=thorough for more).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from readchan.io.capture import Capture
from readchan.channel import decode_channel
from readchan.formats.iso7811.charset import TRACKS
from readchan.formats.iso7811.framing import frame
from readchan.formats.iso7811.recover import confirm_correction, recover
from readchan.synth import Impairments, SpeedProfile
from readchan.synth.card import track_content
from readchan.synth.head import LorentzianPulse

from conftest import decode_reads, synth_capture
from test_roundtrip import track_text


def _rate_for(speed_cm_s: float, variation: float, density_bpi: float) -> float:
    """The lowest of 48/96/192/384 kHz giving 12 samples per bit cell at the fastest point."""
    bit_rate = speed_cm_s * (1 + abs(variation)) / 2.54 * density_bpi
    return next(r for r in (48e3, 96e3, 192e3, 384e3, 768e3) if r >= 12 * bit_rate)


@st.composite
def hard_scenario(draw):
    track = draw(st.sampled_from([1, 2, 3]))
    text = draw(track_text(track))
    speed = draw(st.floats(10.0, 150.0))
    variation = draw(st.floats(0.0, 0.5))
    profile = draw(st.sampled_from(["ramp", "swipe"]))
    density = TRACKS[track].density_bpi
    # one or two impairments pushed to their target, the rest mild
    hard = draw(st.sets(st.sampled_from(["jitter", "density", "snr", "pw50", "hum", "wander", "clip"]),
                        min_size=1, max_size=2))
    imp = dict(jitter=0.08 if "jitter" in hard else 0.02,
               density_error=draw(st.sampled_from([-0.05, 0.05])) if "density" in hard else 0.0,
               snr_db=16.0 if "snr" in hard else 30.0,
               hum_level=0.33 if "hum" in hard else 0.0, hum_hz=draw(st.sampled_from([50.0, 60.0])),
               wander_level=0.5 if "wander" in hard else 0.0,
               clip=0.7 if "clip" in hard else None,
               invert=draw(st.booleans()), reverse=draw(st.booleans()))
    pw50_cell = 0.6 if "pw50" in hard and density == 210.0 else 0.35
    pulse = LorentzianPulse(pw50_cell * 0.0254 / max(density, 210.0) if density == 210.0 else 42e-6)
    return (track, text, SpeedProfile(speed, profile, variation), Impairments(**imp), pulse,
            _rate_for(speed, variation, density), draw(st.integers(0, 2**31)), sorted(hard))


@settings(max_examples=30)
@given(hard_scenario())
def test_hard_swipes_decode_to_the_exact_text_valid_and_in_the_right_direction(sc):
    track, text, speed, imp, pulse, rate, seed, _ = sc
    cap, _ = synth_capture({track: text}, rate_hz=rate, speed=speed, imp=imp, pulse=pulse, seed=seed)
    reads = decode_reads(cap, field_check=False)  # random content: no 7813 layout
    assert len(reads) == 1
    (r,) = reads
    assert r.valid and r.frame.text == text
    assert r.frame.direction == ("reverse" if imp.reverse else "forward")


def _clip_and_wander(speed_cm_s: float, seed: int):
    """``%5?`` on track 1, clipped at 0.7 of the peak after a 2 Hz baseline wander of 0.5 of it
    (clipping acts on the sum, as a front end's rail does), at 12 samples per cell or more."""
    rate = next(r for r in (48e3, 96e3, 192e3) if r >= 12 * speed_cm_s / 2.54 * 210)
    return synth_capture({1: "%5?"}, rate_hz=rate, speed=SpeedProfile(speed_cm_s),
                         imp=Impairments(clip=0.7, wander_level=0.5), seed=seed)


@pytest.mark.parametrize("seed", [2, 3])
def test_clipping_after_wander_leaves_half_the_pulses_a_fifth_of_their_height(seed):
    # The figure behind the case below: with the wander at its extreme (−0.5 of the peak) all
    # through the short swipe, the pulses towards that rail keep 0.7 − 0.5 = 0.2 of their height,
    # flat-topped, and the others are whole.  (The sample nearest each transition, measured from
    # the wander, over the clean pulse there.)
    cap, res = _clip_and_wander(30.0, seed)
    clean, _ = synth_capture({1: "%5?"}, rate_hz=cap.rate_hz, speed=SpeedProfile(30.0), seed=seed)
    wander, _ = synth_capture({1: "%5?"}, rate_hz=cap.rate_hz, speed=SpeedProfile(30.0),
                              imp=Impairments(wander_level=0.5), seed=seed)
    k = np.round(res.transition_times_s[0] * cap.rate_hz).astype(int)
    base = wander.channel(0)[k] - clean.channel(0)[k]
    left = np.abs(cap.channel(0)[k] - base) / np.abs(clean.channel(0)[k])
    assert np.mean(left < 0.3) == pytest.approx(0.5, abs=0.05)
    assert left.min() == pytest.approx(0.2, abs=0.03)


@pytest.mark.parametrize("speed_cm_s", [30.0, 80.0, 150.0])
@pytest.mark.parametrize("seed", range(6))
def test_a_short_track_1_read_clipped_after_baseline_wander_decodes(speed_cm_s, seed):
    # Found by a full run: 2 of 6 seeds gave "no framed data" (the wander's phase puts the whole
    # short swipe at its extreme).  The clipped rail was missed by a symmetric clipping test, so
    # the flat crests were timed by their edges; and the crest's timing search stopped half-way
    # to the neighbour, inside the crest.
    cap, _ = _clip_and_wander(speed_cm_s, seed)
    reads = decode_reads(cap)
    assert [(r.frame.text, r.valid) for r in reads] == [("%5?", True)]


def test_three_swipes_in_one_capture_are_three_reads_in_time_order(demo_texts):
    cap, res = synth_capture({1: demo_texts[1]}, imp=Impairments(snr_db=25, jitter=0.03), swipes=3,
                             gap_s=0.15, speed=SpeedProfile(35.0, "swipe", 0.3), seed=9)
    reads = decode_reads(cap, field_check=False)  # random content: no 7813 layout
    assert [r.frame.text for r in reads] == [demo_texts[1]] * 3
    for r, (t0, t1) in zip(reads, res.swipe_windows_s):
        assert t0 <= r.start_s < r.end_s <= t1


def test_a_forward_and_a_reverse_swipe_back_to_back_are_read_each_in_its_direction(demo_texts):
    fwd, _ = synth_capture({2: demo_texts[2]}, imp=Impairments(snr_db=28), seed=1)
    rev, _ = synth_capture({2: demo_texts[2]}, imp=Impairments(snr_db=28, reverse=True), seed=2)
    both = Capture(np.concatenate((fwd.samples, rev.samples)), fwd.rate_hz, source="<two swipes>", units="FS")
    reads = decode_reads(both)
    assert [(r.frame.direction, r.valid, r.frame.text) for r in reads] == [
        ("forward", True, demo_texts[2]), ("reverse", True, demo_texts[2])]


def test_multichannel_capture_reads_each_track_from_one_swipe(demo_texts):
    cap, _ = synth_capture(demo_texts, rate_hz=192_000.0, speed=SpeedProfile(90.0, "swipe", 0.5),
                           imp=Impairments(snr_db=20, jitter=0.05, reverse=True), seed=11)
    reads = decode_reads(cap, field_check=False)  # random content: no 7813 layout
    assert [(r.channel, r.frame.text, r.valid) for r in reads] == [
        (0, demo_texts[1], True), (1, demo_texts[2], True), (2, demo_texts[3], True)]


# --- recovery guided by parity and LRC -------------------------------------------------------

def _damaged(text: str, track: int, flips: list[int]):
    """Bits of ``text`` with the data bits at ``flips`` (offsets from the start sentinel) flipped."""
    tc = track_content(text, track=track)
    bits = tc.bits.copy()
    lead = TRACKS[track].leading_zeros
    where = [lead + f for f in flips]
    bits[where] ^= 1
    return bits, where


def test_recovery_revises_exactly_the_low_margin_bits_it_reports():
    text = ";9912345678901239=29121010000000000?"
    bits, where = _damaged(text, 2, [5 * 7 + 0, 5 * 7 + 1, 5 * 7 + 3])   # three bits of character 7
    margin = np.ones(bits.size)
    margin[where] = [0.05, 0.1, 0.02]
    fmt = TRACKS[2].fmt
    base = frame(bits, fmt)
    assert not base.valid
    rec = recover(bits, margin, base, fmt)
    assert rec.frame is not None and rec.frame.valid and rec.frame.text == text
    assert sorted(rec.frame.revised_bits) == sorted(where)
    assert rec.frame.corrected == (7,)
    repaired = bits.copy()
    repaired[list(rec.frame.revised_bits)] ^= 1
    again = frame(repaired, fmt)
    assert again.valid and again.corrected == () and again.text == text


def test_recovery_does_not_touch_confident_bits():
    text = ";9912345678901239=29121010000000000?"
    bits, where = _damaged(text, 2, [5 * 7 + 0, 5 * 7 + 1, 5 * 7 + 3])
    margin = np.ones(bits.size)
    margin[where] = 0.9                        # the damaged bits look sure...
    margin[TRACKS[2].leading_zeros + 5 * 12: TRACKS[2].leading_zeros + 5 * 12 + 8] = 0.01   # ...others not
    fmt = TRACKS[2].fmt
    rec = recover(bits, margin, frame(bits, fmt), fmt)
    assert rec.frame is None


def test_a_correction_that_revises_a_confident_bit_is_not_believed():
    # Three errors the ISO code miscorrects (ISO/IEC 7811-2 parity + LRC, minimum distance 4):
    # two bits of character 3 (its parity survives) and one bit of character 9 in a shared column.
    text = ";9912345678901239=29121010000000000?"
    bits, where = _damaged(text, 2, [5 * 3 + 0, 5 * 3 + 1, 5 * 9 + 0])
    fmt = TRACKS[2].fmt
    naive = frame(bits, fmt)
    assert naive.valid and naive.text != text            # what plain correction would say
    margin = np.ones(bits.size)
    margin[where] = 0.05                                 # the timing doubted the damaged bits
    checked = confirm_correction(naive, bits, margin, fmt)
    assert not checked.valid and checked.corrected == ()


def _one_doubtful_error():
    """A track-1 read with one flipped data bit (character 10), that bit doubted by the timing."""
    text = "%B9912345678901239^QUILL/ODESSA M^2912101000000000000?"
    bits, where = _damaged(text, 1, [7 * 10 + 2])
    fmt = TRACKS[1].fmt
    margin = np.ones(bits.size)
    margin[where] = 0.1
    return text, bits, where, fmt, frame(bits, fmt), margin


def test_a_correction_of_a_doubtful_bit_is_kept():
    text, bits, where, fmt, fr, margin = _one_doubtful_error()
    kept = confirm_correction(fr, bits, margin, fmt)
    assert kept.valid and kept.text == text and kept.revised_bits == tuple(where)


# --- false accepts ------------------------------------------------------------------------------

CORRUPTIONS = ["flips2", "flips3", "burst", "dropout", "extra", "noise10"]


@pytest.mark.parametrize("case", range(48))
def test_corrupted_captures_never_read_valid_with_wrong_text(case):
    kind = CORRUPTIONS[case % len(CORRUPTIONS)]
    rng = np.random.default_rng(1000 + case)
    track = 1 + case % 3
    fmt = TRACKS[track].fmt
    alphabet = [chr(c + fmt.offset) for c in range(2 ** fmt.data_bits) if c not in (fmt.start_code, fmt.end_code)]
    text = fmt.start_char + "".join(rng.choice(alphabet, int(rng.integers(8, 30)))) + fmt.end_char
    tc = track_content(text, track=track)
    bits = tc.bits.copy()
    lead = TRACKS[track].leading_zeros
    data = np.arange(lead + fmt.bits_per_char, bits.size - TRACKS[track].trailing_zeros - fmt.bits_per_char)
    snr = 30.0
    if kind.startswith("flips"):
        bits[rng.choice(data, int(kind[-1]), replace=False)] ^= 1
    elif kind == "burst":
        i = rng.choice(data[:-3])
        bits[i:i + 3] ^= 1
    elif kind == "noise10":
        snr = 10.0
    from readchan.synth import SynthSpec, TrackContent, synthesize
    spec = SynthSpec(tracks=(TrackContent(bits, tc.density_bpi),), rate_hz=96_000.0,
                     impairments=Impairments(snr_db=snr, jitter=0.03), seed=case)
    res = synthesize(spec)
    x = res.samples[:, 0].copy()
    t = res.transition_times_s[0]
    if kind == "dropout":            # the head loses contact for a few cells
        mid = t[t.size // 2]
        x[int(mid * res.rate_hz): int((mid + 4 * 0.0254 / tc.density_bpi / 0.3) * res.rate_hz)] *= 0.05
    elif kind == "extra":            # a spike where no transition is
        k = int(rng.integers(t.size // 4, 3 * t.size // 4))
        i = int(0.5 * (t[k] + t[k + 1]) * res.rate_hz)
        x[i - 3:i + 3] += 0.8 * np.sign(x[int(t[k] * res.rate_hz)])
    result = decode_channel(x, res.rate_hz)
    wrong = [r.frame.text for r in result.reads if r.valid and r.frame.text != text]
    assert wrong == []


def test_a_correction_is_not_believed_when_the_detector_guessed_at_a_pulse_elsewhere():
    # a guessed pulse (rescued, dropped or missing) can change two bits of a character and keep
    # its parity; the one parity failure then points at the wrong character
    text, bits, where, fmt, fr, margin = _one_doubtful_error()
    elsewhere = [TRACKS[1].leading_zeros + 7 * 20 + 3]
    assert confirm_correction(fr, bits, margin, fmt).valid
    refused = confirm_correction(fr, bits, margin, fmt, suspect_bits=elsewhere)
    assert not refused.valid and refused.corrected == ()
    inside = [where[0] + 1]
    assert confirm_correction(fr, bits, margin, fmt, suspect_bits=inside).valid
