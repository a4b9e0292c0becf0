"""Round-trip properties of the tape formats over random content, rates, speeds and impairments
(profiles in tests/conftest.py).  The truth is the synthesizer's, whose labels follow
SMPTE ST 12-1 and whose bytes follow the Kansas City standard (BYTE, Feb. 1976)."""

from __future__ import annotations

import numpy as np
from hypothesis import example, given
from hypothesis import strategies as st

from readchan.synth.head import LorentzianPulse
from readchan.formats.kcs.read import decode_kcs
from readchan.formats.ltc import decode_ltc
from readchan.formats.ltc.word import count_to_label, frames_per_day, labels_per_second
from readchan.synth.playback import Playback, PlaySpeed
from readchan.synth.kcs import KcsSpec, synthesize_kcs
from readchan.synth.ltc import LtcSpec, UserBits, synthesize_ltc


def peak_jitter_s(spec: LtcSpec, speed: float) -> float:
    """RMS timing error (s) that white noise gives a head pulse peak timed by a parabola through
    three samples (readchan.frontend.detect._parabolic_times), for a frame played at ``speed``.

    The peak is where V' = 0; the parabola's offset 0.5·(x₋ − x₊)/(x₋ − 2x₀ + x₊) is the
    central-difference slope over the curvature, so noise of RMS σ_n moves it by
    σ_t = σ_V' / |V''| = σ_n / (√2 · |V''(t_p)| · Δ), Δ the sample period: the noise-over-slope
    estimate of timing jitter applied to the zero crossing of V' (common practice; the three-sample
    form derived here).  The pulse is Lorentzian, V = P / (1 + (2t/T50)²) (../shared/REFERENCE.md),
    so |V''(0)| = 8P / T50², with P = amplitude × speed (Faraday) and T50 = PW50 / tape speed.
    σ_n = P · 10^(−SNR/20) bounds the playback's noise from above (its reference, the median
    peak, is lowered by the overlap of opposite-polarity neighbours), and the isolated pulse's
    curvature bounds |V''| from below (those neighbours, more than 0.29 PW50 away, add to it)."""
    if spec.signal != "head" or spec.playback.snr_db is None:
        return 0.0
    peak = spec.amplitude * speed
    t50_s = spec.pulse.pw50_m / (speed * spec.tape_speed_cm_s * 0.01)
    sigma_n = peak * 10 ** (-spec.playback.snr_db / 20)
    return sigma_n / (np.sqrt(2) * (8 * peak / t50_s ** 2) / spec.rate_hz)


@st.composite
def ltc_specs(draw):
    rate = draw(st.sampled_from([24.0, 25.0, 29.97, 30.0]))
    df = rate == 29.97 and draw(st.booleans())
    per_s = labels_per_second(rate)
    start = count_to_label(draw(st.integers(0, frames_per_day(per_s, df) - 1)), per_s, df).text(df)
    speed = draw(st.floats(0.3, 4.0))
    return LtcSpec(start=start, rate_fps=rate, drop_frame=df, duration_s=max(0.5, 8 / (rate * speed)),
                   user_bits=UserBits("counting", value=draw(st.integers(0, (1 << 32) - 1))),
                   speed=PlaySpeed.constant(speed, flutter_depth=draw(st.floats(0, 0.02)), flutter_hz=9.0),
                   direction=draw(st.sampled_from(["forward", "reverse"])),
                   signal=draw(st.sampled_from(["line", "head"])), start_cell=draw(st.floats(0, 79.9)),
                   playback=Playback(snr_db=draw(st.floats(30, 60)), invert=draw(st.booleans())),
                   rate_hz=96_000.0 if speed > 2 else 48_000.0, seed=draw(st.integers(0, 1000)))


@given(ltc_specs())
# reverse play at 3x whose capture stops just after the mid-cell transition of the 1 that
# follows the last whole frame: its last cells (1s) were shifted to end the parse on a boundary
@example(spec=LtcSpec(start="00:00:00:00", rate_fps=24.0, drop_frame=False, duration_s=0.5,
                      user_bits=UserBits("counting", value=0),
                      speed=PlaySpeed(((0.0, 3.0),), flutter_depth=0.0078125, flutter_hz=9.0),
                      direction="reverse", signal="line", pulse=LorentzianPulse(pw50_m=3e-05),
                      start_cell=0.0, playback=Playback(snr_db=30.0), rate_hz=96_000.0, seed=0))
# raw head at half speed, 30 dB: a last frame's opening peak 4.19e-5 s late, 3.1 σ of the
# noise's peak-timing jitter (1.33e-5 s; measured over 280 frames of 40 seeds: 1.37e-5 s)
@example(spec=LtcSpec(start="00:00:00:00", rate_fps=29.97, drop_frame=False, duration_s=0.5338672005338673,
                      user_bits=UserBits("counting", value=0), speed=PlaySpeed(((0.0, 0.5),), flutter_hz=9.0),
                      direction="reverse", signal="head", pulse=LorentzianPulse(pw50_m=3e-05),
                      start_cell=30.0, playback=Playback(snr_db=30.0), rate_hz=48_000.0, seed=670))
def test_every_ltc_frame_met_is_read_with_its_label_position_and_bits(spec):
    s = synthesize_ltc(spec)
    r = decode_ltc(s.samples, s.rate_hz)
    # the truth leaves out frames within half a cell of the capture's ends; the decoder may see them
    truth = {f.timecode for f in s.frames}
    end_s = s.samples.size / s.rate_hz
    edge = [2 * f.duration_s / 80 for f in r.frames]            # two cells at the frame's speed
    extra = [f for f, e in zip(r.frames, edge) if f.timecode not in truth]
    assert all(f.position_s < e or f.position_s + f.duration_s > end_s - e
               for f, e in zip(r.frames, edge) if f in extra)
    frames = [f for f in r.frames if f.timecode in truth]
    assert [f.timecode for f in frames] == [f.timecode for f in s.frames]
    assert [f.user_bits for f in frames] == [f.user_bits for f in s.frames]
    # head pulses at slow play are wide against the cell, and their overlap shifts the peaks:
    # positions hold to 5 % of a cell at the frame's speed (noise-free: under 5e-6 s), plus five
    # σ of the noise's peak-timing jitter (peak_jitter_s; a Gaussian passes 5 σ once in 1.7e6)
    for got, want in zip(frames, s.frames):
        cell_s = 1.0 / (80 * spec.rate_fps * want.speed)
        allowed_s = max(3e-5, 0.05 * cell_s) + 5 * peak_jitter_s(spec, want.speed)
        assert abs(got.position_s - want.position_s) < allowed_s
        assert got.direction == want.direction
    assert all(e.kind not in ("jump", "splice", "damaged") for e in r.events)


@st.composite
def kcs_specs(draw):
    baud = draw(st.sampled_from([300, 1200]))
    n = draw(st.integers(1, 12 if baud == 300 else 40))
    return KcsSpec(data=bytes(draw(st.lists(st.integers(0, 255), min_size=n, max_size=n))), baud=baud,
                   shape=draw(st.sampled_from(["sine", "square"])), bit_phase_deg=draw(st.floats(0, 360)),
                   idle_bits=tuple(draw(st.lists(st.floats(0, 4), min_size=1, max_size=3))),
                   leader_s=0.1, speed=PlaySpeed.constant(draw(st.floats(0.9, 1.1)),
                                                          wow_depth=draw(st.floats(0, 0.02)), wow_hz=1.3),
                   playback=Playback(snr_db=draw(st.floats(20, 60)), hum_level=draw(st.floats(0, 1)),
                                     band_hz=draw(st.sampled_from([None, (300.0, 3500.0)]))),
                   seed=draw(st.integers(0, 1000)))


@given(kcs_specs())
# band-limited noise just after the trailer, counted as tone by the window that reaches back
# into the trailer, faked a start edge: an extra byte c3 with a framing error at index 9
@example(spec=KcsSpec(data=b"\x00" * 9, baud=1200, shape="sine", bit_phase_deg=0.0, idle_bits=(0.0, 0.0, 1.0),
                      leader_s=0.1, speed=PlaySpeed(((0.0, 1.0625),), wow_hz=1.3),
                      playback=Playback(snr_db=20.0, band_hz=(300.0, 3500.0)), rate_hz=48_000.0, seed=203))
# 1200 baud 00 00 with one idle bit frames cleanly at 300 too (as f2): judged per quarter cell,
# that read shows the 1200-baud cells of the other tone and 1200 wins the tie
@example(spec=KcsSpec(data=b"\x00\x00", baud=1200, shape="sine", bit_phase_deg=0.0, idle_bits=(1.0,),
                      leader_s=0.1, speed=PlaySpeed(((0.0, 1.0),), wow_hz=1.3),
                      playback=Playback(snr_db=20.0), rate_hz=48_000.0, seed=0))
# a start edge placed 0.1 bit late: the mark before it is judged set back from the edge
@example(spec=KcsSpec(data=b"\x00" * 4, baud=1200, shape="sine", bit_phase_deg=1.0, idle_bits=(0.900390625,),
                      leader_s=0.1, speed=PlaySpeed(((0.0, 0.9),), wow_hz=1.3),
                      playback=Playback(snr_db=20.0), rate_hz=48_000.0, seed=1))
# the same late edge cut the leader's last step to 0.896 mark: the byte was not read at 1200
@example(spec=KcsSpec(data=b"\x00", baud=1200, shape="sine", bit_phase_deg=146.0, idle_bits=(0.0,), leader_s=0.1,
                      speed=PlaySpeed(((0.0, 1.0288720545717418),), wow_depth=0.012712399950278924, wow_hz=1.3),
                      playback=Playback(snr_db=20.0), rate_hz=48_000.0, seed=109))
def test_every_kcs_byte_is_read_at_its_time(spec):
    s = synthesize_kcs(spec)
    r = decode_kcs(s.samples, s.rate_hz)
    assert r.data == s.data and r.framing_errors == () and r.valid
    # the playback band delays the tones (its group delay, about 0.1 ms): start edges to 0.3 bit
    assert np.max(np.abs(r.byte_times_s - s.byte_times_s)) < 0.3 / spec.baud
