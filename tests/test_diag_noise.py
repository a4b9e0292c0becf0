"""Noise and hum diagnostics on captures that went through an analog front end.

The captures come from the synthesizer's front-end stage (readchan.synth.chain: first-order AC
coupling, a causal Butterworth preamp low-pass, audio or 8-bit scope quantisation), with the
card-edge pulses on.  Truth: the synthesizer's ``output_snr_db``, 20·log10(median |peak| after
the front end / RMS of its noise after the front end), quantisation noise step/√12 included in
quadrature (uniform-error model, Widrow & Kollár, *Quantization Noise*, 2008).  Hum truth: the
synthesized amplitude times the AC coupling's gain f/√(f² + fc²) (first-order high-pass) and the
Butterworth preamp's 1/√(1 + (f/fc)^2n).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from readchan.io.capture import Capture
from readchan.measure.diagnose import inspect_capture
from readchan.measure.noise import robust_noise
from readchan.synth import Impairments, SpeedProfile, SynthSpec, synthesize
from readchan.synth.card import track_content
from readchan.synth.chain import FrontEnd
from readchan.synth.head import KarlqvistPulse

T1 = "%B9912345678901239^QUILL/ODESSA M^2912101000000000000?"   # invented
T2 = ";9912345678901239=29121010000000000?"
HUM_HZ_TOL = 0.05
"""Hz; the fit's own grid is 0.02 Hz before refinement (observed within 0.03 Hz at 6 % hum)."""
HEAD = KarlqvistPulse(14.5e-6, 2.15e-6, 12.4e-6)
BAND_DB = 10 * math.log10(24_000 / 7_900)
"""The 7.9 kHz preamp passes about this much less white noise than the 24 kHz output band."""


def front_end_capture(track, text, *, snr_db, ac_hz=20.0, lp_hz=7900.0, order=2, rate_hz=48_000.0,
                      speed_cm_s=30.0, hum_level=0.0, hum_hz=50.0, scope_v_div=None, scope_offset_v=0.0, lead_s=0.06,
                      seed=0, edge_pulses=True):
    """(Capture, true output SNR dB, true hum amplitude) of one swipe through a front end;
    ``snr_db`` is the SNR wanted at the output (the head SNR is set lower by the preamp's band)."""
    fe = FrontEnd(ac_coupling_hz=ac_hz, preamp_lowpass_hz=lp_hz, preamp_order=order,
                  scope_volts_per_div=scope_v_div, scope_offset_v=scope_offset_v)
    imp = Impairments(snr_db=snr_db - BAND_DB, hum_hz=hum_hz, hum_level=hum_level, edge_pulses=edge_pulses)
    spec = SynthSpec(tracks=(track_content(text, track=track),), speed=SpeedProfile(speed_cm_s), pulse=HEAD,
                     impairments=imp, rate_hz=rate_hz, seed=seed, lead_s=lead_s, front_end=fe)
    res = synthesize(spec)
    gain = hum_hz / math.hypot(hum_hz, ac_hz) / math.sqrt(1 + (hum_hz / lp_hz) ** (2 * order))
    cap = Capture(res.samples, rate_hz, source="<front end>", units="V" if scope_v_div else "FS")
    return cap, res.output_snr_db[0], hum_level * res.median_peak[0] * gain


def _read(cap):
    reports = inspect_capture(cap)
    reads = [r for ch in reports for r in ch.reads]
    assert len(reads) == 1 and reads[0].read.valid
    return reports[0].front_end, reads[0]


@pytest.mark.parametrize("snr_db,track,seed", [(15.0, 1, 0), (25.0, 2, 1), (35.0, 1, 2), (35.0, 2, 3),
                                               (45.0, 1, 4), (45.0, 2, 5)])
def test_snr_within_1_db_with_edge_pulses(snr_db, track, seed):
    cap, truth, _ = front_end_capture(track, T1 if track == 1 else T2, snr_db=snr_db, seed=seed)
    _, r = _read(cap)
    assert r.noise.snr_db == pytest.approx(truth, abs=1.0)


def test_edge_pulses_are_left_out_of_the_noise():
    cap, truth, _ = front_end_capture(1, T1, snr_db=45.0)
    fe, r = _read(cap)
    assert fe.noise_pulses_excluded >= 1
    assert r.noise.snr_db == pytest.approx(truth, abs=1.0)


@pytest.mark.parametrize("ac_hz", [5.0, 50.0])
def test_ac_coupling_recovery_does_not_count_as_noise(ac_hz):
    cap, truth, _ = front_end_capture(2, T2, snr_db=45.0, ac_hz=ac_hz, seed=7)
    _, r = _read(cap)
    assert r.noise.snr_db == pytest.approx(truth, abs=1.0)


def test_eight_bit_scope_capture_with_a_pre_trigger_stretch():
    # 0.2 V/div: a 0.5 V peak spans 2.5 of the 4 divisions above the centre line
    cap, truth, _ = front_end_capture(2, T2, snr_db=35.0, scope_v_div=0.2, lead_s=0.03, seed=8)
    fe, r = _read(cap)
    assert fe.quant_step == pytest.approx(0.2 * 8 / 256)
    assert r.noise.snr_db == pytest.approx(truth, abs=1.0)


def test_quiet_samples_on_one_level_count_the_quantisation_noise():
    # noise far below the step: the quiet samples sit on one level, yet every pulse carries
    # the quantisation error, step/√12
    cap, truth, _ = front_end_capture(1, T1, snr_db=60.0, scope_v_div=0.2, seed=9)
    fe, r = _read(cap)
    assert fe.noise_floored
    assert r.noise.snr_db == pytest.approx(truth, abs=1.0)


@pytest.mark.parametrize("offset_steps", [0.0, 0.5, 0.3])
def test_eight_bit_scope_noise_narrower_than_a_step(offset_steps):
    # 45 dB wanted at 0.2 V/div: σ ≈ 0.3 step, so the truth is ruled by step/√12 (42.5 dB); the
    # baseline sits on a level, between two, or in between
    step = 0.2 * 8 / 256
    cap, truth, _ = front_end_capture(1, T1, snr_db=45.0, scope_v_div=0.2, scope_offset_v=offset_steps * step,
                                      lead_s=0.03, seed=12)
    fe, r = _read(cap)
    assert r.noise.snr_db == pytest.approx(truth, abs=1.0)


def test_short_lead_in_with_strong_hum():
    # one swipe, 24 ms before the card, hum at 0.2 of the peak
    cap, truth, hum = front_end_capture(1, T1, snr_db=38.0, hum_level=0.2, lead_s=0.024, seed=10)
    fe, r = _read(cap)
    assert fe.mains_hz == 50.0
    assert fe.hum_hz == pytest.approx(50.0, abs=HUM_HZ_TOL)
    assert fe.hum_amplitude == pytest.approx(hum, rel=0.2)
    assert r.noise.snr_db == pytest.approx(truth, abs=1.0)


@pytest.mark.parametrize("seed", [0, 1])
def test_strong_hum_and_ac_recovery_around_a_short_lead_in_at_44_db(seed):
    # 20 ms before the card: the AC coupling's recovery and the hum fit's few-per-cent error
    # would each count as noise at this level
    cap, truth, _ = front_end_capture(2, T2, snr_db=44.0, hum_level=0.5, lead_s=0.02, seed=seed)
    _, r = _read(cap)
    assert r.noise.snr_db == pytest.approx(truth, abs=1.0)


@pytest.mark.parametrize("hum_hz,level,track", [(60.0, 0.06, 2), (50.0, 0.3, 2), (60.0, 0.1, 1)])
def test_hum_level_within_20_percent_above_5_percent_of_the_peak(hum_hz, level, track):
    cap, _, hum = front_end_capture(track, T1 if track == 1 else T2, snr_db=35.0, hum_hz=hum_hz,
                                       hum_level=level, lead_s=0.024, seed=11)
    fe, _ = _read(cap)
    assert fe.mains_hz == hum_hz
    assert fe.hum_hz == pytest.approx(hum_hz, abs=HUM_HZ_TOL)
    assert fe.hum_amplitude == pytest.approx(hum, rel=0.2)


def test_robust_noise_ignores_isolated_pulses_and_a_slow_step():
    rng = np.random.default_rng(0)
    rate = 48_000.0
    w = 0.01 * rng.standard_normal(48_000)
    w[10_000:10_010] += 0.5                          # an isolated pulse
    w[30_000:] += 0.02 * np.exp(-np.arange(18_000) / 150.0)  # a recovery tail, 3 ms
    est = robust_noise(w, rate, np.ones(w.size, bool), cell_s=4e-4)
    assert est.pulses_excluded == 1
    assert est.rms == pytest.approx(0.01, rel=0.03)   # a plain RMS reads 0.0124


def test_card_edge_pulse_is_half_a_transition():
    # Superposition: the edge steps the magnetisation by Mr, a transition by 2·Mr.
    spec = SynthSpec(tracks=(track_content(T2, track=2),), speed=SpeedProfile(30.0), pulse=HEAD,
                     impairments=Impairments(edge_pulses=True), lead_s=0.02)
    res = synthesize(spec)
    y = res.samples[:, 0]
    t0 = res.swipe_windows_s[0][0]
    i0 = int(round(t0 * res.rate_hz))
    edge = np.abs(y[i0 - 50:i0 + 50]).max()
    assert edge == pytest.approx(0.5 * spec.amplitude, rel=0.05)


def test_eight_bit_scope_csv_file_with_a_pre_trigger_stretch(tmp_path):
    # the same through a CSV file (volts as the scope exported them, a time column)
    from readchan.io.capture import load_capture
    from readchan.io.write import write_capture
    cap, truth, _ = front_end_capture(2, T2, snr_db=40.0, scope_v_div=0.2, lead_s=0.03, seed=13)
    path = write_capture(tmp_path / "scope.csv", cap.samples, cap.rate_hz, kind="csv")
    fe, r = _read(load_capture(path))
    assert fe.quant_step == pytest.approx(0.2 * 8 / 256, rel=1e-3)
    assert r.noise.snr_db == pytest.approx(truth, abs=1.0)
