"""The synthesizer's front end: AC coupling, causal preamp, anti-alias decimation, quantisation."""

import math

import numpy as np
import pytest
from scipy import signal as sps

from readchan.errors import ParameterError
from readchan.synth import Impairments, SpeedProfile, SynthSpec, TrackContent, synthesize
from readchan.synth.chain import FrontEnd, filter_chain, quantise
from readchan.synth.head import LorentzianPulse

FS_OUT = 48_000.0


def _gain(fe: FrontEnd, f_hz: float, rate_hz: float = FS_OUT) -> float:
    """Steady-state amplitude gain of the chain for a sine at ``f_hz`` (measured, not computed)."""
    k = fe.internal_factor
    fs = rate_hz * k
    n = int(fs * max(0.2, 40 / f_hz))
    t = np.arange(n) / fs
    y = filter_chain(np.sin(2 * np.pi * f_hz * t)[:, None], fs, fe)[:, 0]
    tail = y[y.size // 2:]
    return float(np.sqrt(2) * np.std(tail))


@pytest.mark.parametrize("order", [1, 2, 3, 4])
def test_butterworth_preamp_is_3_db_down_at_its_corner(order):
    # Butterworth |H|² = 1/(1 + (f/fc)^(2n)): exactly −3.01 dB at fc for every order
    # (Zverev, Handbook of Filter Synthesis, 1967).
    fe = FrontEnd(preamp_lowpass_hz=7900.0, preamp_order=order)
    assert 20 * math.log10(_gain(fe, 7900.0)) == pytest.approx(-3.01, abs=0.1)


@pytest.mark.parametrize("order", [2, 4])
def test_butterworth_preamp_follows_the_maximally_flat_magnitude_below_the_output_nyquist(order):
    # |H|² = 1/(1 + (f/fc)^(2n)) (Zverev 1967); the 8x-oversampled bilinear image stays within
    # 0.3 dB of the analog response up to 1.5 fc.
    fe = FrontEnd(preamp_lowpass_hz=6000.0, preamp_order=order)
    for f in (3000.0, 9000.0):
        analog_db = -10 * math.log10(1 + (f / 6000.0) ** (2 * order))
        assert 20 * math.log10(_gain(fe, f)) == pytest.approx(analog_db, abs=0.3)


@pytest.mark.parametrize("order", [1, 2, 3, 4])
def test_bessel_preamp_is_3_db_down_at_its_corner(order):
    # Bessel normalised to −3 dB at the corner (norm="mag", scipy.signal.bessel docs).
    fe = FrontEnd(preamp_lowpass_hz=5000.0, preamp_order=order, preamp_family="bessel")
    assert 20 * math.log10(_gain(fe, 5000.0)) == pytest.approx(-3.01, abs=0.1)


def test_ac_coupling_is_a_first_order_high_pass():
    # First-order high-pass |H| = f / sqrt(f² + fc²): −3 dB at fc, 1/sqrt(5) at fc/2
    # (textbook RC high-pass).
    fe = FrontEnd(ac_coupling_hz=20.0)
    assert _gain(fe, 20.0) == pytest.approx(1 / math.sqrt(2), rel=0.01)
    assert _gain(fe, 10.0) == pytest.approx(1 / math.sqrt(5), rel=0.01)
    assert _gain(fe, 2000.0) == pytest.approx(1.0, rel=0.01)


def _step_overshoot(fe: FrontEnd) -> float:
    fs = FS_OUT * fe.internal_factor
    x = np.ones((int(fs * 0.01), 1))
    x[:100] = 0.0
    y = filter_chain(x, fs, fe)[:, 0]
    return float(y.max() - 1.0)


def test_second_order_butterworth_step_overshoots_by_exp_minus_pi():
    # A second-order system with damping ζ = 1/√2 overshoots exp(−πζ/√(1−ζ²)) = e^−π = 4.32 %
    # (control-systems handbook formula; REFERENCE: ≈ 4 % at order 2).
    fe = FrontEnd(preamp_lowpass_hz=5000.0, preamp_order=2, antialias=False)
    assert _step_overshoot(fe) == pytest.approx(math.exp(-math.pi), abs=0.002)


def test_fourth_order_butterworth_overshoots_more_than_bessel():
    # Butterworth order 4 ≈ 11 % overshoot, Bessel near zero (filter handbooks, e.g. Zverev 1967;
    # figures from memory, medium confidence).
    butter = _step_overshoot(FrontEnd(preamp_lowpass_hz=5000.0, preamp_order=4, antialias=False))
    bessel = _step_overshoot(FrontEnd(preamp_lowpass_hz=5000.0, preamp_order=4, preamp_family="bessel",
                                      antialias=False))
    assert butter == pytest.approx(0.11, abs=0.02)
    assert bessel < 0.01


def test_antialias_decimation_removes_a_tone_above_the_output_nyquist_and_plain_sampling_aliases_it():
    # A sound card's decimation filter stops what lies above fs/2; sampling without one folds it
    # into the band (sampling theorem).
    fs_out, k = FS_OUT, 8
    fe_aa = FrontEnd(preamp_lowpass_hz=150_000.0, preamp_order=1, oversample=k)
    fe_raw = FrontEnd(preamp_lowpass_hz=150_000.0, preamp_order=1, oversample=k, antialias=False)
    t = np.arange(int(fs_out * k * 0.05)) / (fs_out * k)
    tone = np.sin(2 * np.pi * 40_000.0 * t)[:, None]     # folds to 8 kHz at 48 kHz
    assert np.std(filter_chain(tone, fs_out * k, fe_aa)[1000:-1000]) < 0.01
    assert np.std(filter_chain(tone, fs_out * k, fe_raw)[1000:-1000]) > 0.3


def test_eight_bit_scope_step_is_volts_per_division_times_divisions_over_256():
    # 8-bit scope export: 256 levels over 8 (or 10) divisions (REFERENCE, common practice).
    assert FrontEnd(scope_volts_per_div=0.1).step == pytest.approx(0.1 * 8 / 256)
    assert FrontEnd(scope_volts_per_div=0.05, scope_divisions=10).step == pytest.approx(0.05 * 10 / 256)


def test_scope_quantisation_puts_every_sample_on_a_level_and_saturates_at_the_screen_edge():
    fe = FrontEnd(scope_volts_per_div=0.1, scope_offset_v=0.05)
    x = np.linspace(-1.0, 1.0, 10_001)
    q = quantise(x, fe)
    codes = (q - 0.05) / fe.step
    assert np.allclose(codes, np.round(codes))
    assert codes.min() == -128 and codes.max() == 127
    assert q.max() == pytest.approx(0.05 + 127 * 0.1 * 8 / 256)


def test_quantisation_error_rms_is_the_step_over_root_12():
    # Uniform-error model: rounding error RMS = step/√12 (Widrow & Kollár, Quantization Noise, 2008).
    rng = np.random.default_rng(1)
    x = rng.uniform(-0.9, 0.9, 200_000)
    for fe in (FrontEnd(quantize_bits=8), FrontEnd(scope_volts_per_div=0.25)):
        err = quantise(x, fe) - x
        assert np.std(err) == pytest.approx(fe.step / math.sqrt(12), rel=0.02)
        assert fe.quantisation_noise_rms == pytest.approx(fe.step / math.sqrt(12))


def test_audio_quantiser_uses_two_over_two_to_the_n_and_saturates_at_full_scale():
    # N-bit two's-complement PCM over ±1 full scale: step 2/2^N, range −1 .. 1 − step (common practice).
    fe = FrontEnd(quantize_bits=16)
    q = quantise(np.array([-2.0, 0.3, 2.0]), fe)
    assert q[0] == -1.0 and q[2] == pytest.approx(1 - 2 / 65536)
    assert q[1] * 32768 == pytest.approx(round(0.3 * 32768))


def _isolated(fe: FrontEnd, speed_cm_s: float = 30.0, **kw):
    # two transitions 25.4 mm apart (1 bpi): isolated pulses of PW50 40 µm (133 µs at 30 cm/s)
    spec = SynthSpec(tracks=(TrackContent(np.array([0], np.uint8), 1.0),), rate_hz=FS_OUT,
                     speed=SpeedProfile(speed_cm_s), pulse=LorentzianPulse(40e-6), lead_s=0.01, front_end=fe, **kw)
    return synthesize(spec)


def test_causal_preamp_delays_the_pulse_and_leaves_an_opposite_lobe_after_it():
    # a 40 µs pulse (100 cm/s) through a 4 kHz 2nd-order Butterworth: the filter's ringing
    # outlasts the pulse, so an opposite lobe follows it
    fe = FrontEnd(preamp_lowpass_hz=4000.0, preamp_order=2)
    r = _isolated(fe, speed_cm_s=100.0)
    x = r.samples[:, 0]
    t0 = r.transition_times_s[0][0]
    i_peak = int(np.argmax(x[: int((t0 + 0.005) * FS_OUT)]))
    assert i_peak / FS_OUT - t0 == pytest.approx(r.chain_delay_s, abs=1.5 / FS_OUT)
    after = x[i_peak: i_peak + int(0.002 * FS_OUT)]
    before = x[i_peak - int(0.002 * FS_OUT): i_peak]
    assert after.min() < -0.005 * x[i_peak]             # the overshoot of opposite sign
    assert after.min() < 3 * before.min() - 1e-6        # and it comes after the pulse, not before


def test_chain_delay_is_the_preamp_group_delay():
    # A 2nd-order Butterworth low-pass has a DC group delay of √2 / (2π fc) (from H(s) = 1/(s² + √2 s + 1)).
    fe = FrontEnd(preamp_lowpass_hz=5000.0)
    assert fe.delay_s() == pytest.approx(math.sqrt(2) / (2 * math.pi * 5000.0), rel=0.01)


def test_output_noise_rms_is_what_the_quiet_samples_hold():
    fe = FrontEnd(preamp_lowpass_hz=8000.0, ac_coupling_hz=20.0, quantize_bits=10)
    r = _isolated(fe, impairments=Impairments(snr_db=30.0), seed=2)
    quiet = r.samples[int(0.002 * FS_OUT): int(0.009 * FS_OUT), 0]
    assert np.std(quiet) == pytest.approx(r.output_noise_rms[0], rel=0.1)
    assert r.output_noise_rms[0] < r.noise_rms[0]       # the preamp band is narrower than Nyquist


def test_without_a_preamp_the_chain_renders_at_the_output_rate_and_keeps_the_head_figures():
    r = _isolated(FrontEnd(ac_coupling_hz=10.0), impairments=Impairments(snr_db=30.0))
    assert r.samples.shape[0] == _isolated(FrontEnd()).samples.shape[0]
    assert r.output_median_peak[0] == pytest.approx(r.median_peak[0], rel=0.02)


@pytest.mark.parametrize("fe,name", [
    (dict(ac_coupling_hz=24_000.0), "ac_coupling_hz"),
    (dict(ac_coupling_hz=0.0), "ac_coupling_hz"),
    (dict(ac_coupling_hz=5e-324), "ac_coupling_hz"),
    (dict(preamp_lowpass_hz=1e-308), "preamp_lowpass_hz"),
    (dict(scope_volts_per_div=5e-324), "scope_volts_per_div"),
    (dict(preamp_lowpass_hz=float("nan")), "preamp_lowpass_hz"),
    (dict(preamp_lowpass_hz=200_000.0), "preamp_lowpass_hz"),
    (dict(preamp_order=5), "preamp_order"),
    (dict(preamp_family="chebyshev"), "preamp_family"),
    (dict(quantize_bits=1), "quantize_bits"),
    (dict(scope_volts_per_div=-0.1), "scope_volts_per_div"),
    (dict(scope_divisions=9), "scope_divisions"),
])
def test_absurd_front_end_parameters_are_refused_naming_the_parameter(fe, name):
    with pytest.raises(ParameterError, match=name) as e:
        SynthSpec(tracks=(TrackContent(np.zeros(4, np.uint8), 210.0),), rate_hz=FS_OUT, front_end=FrontEnd(**fe))
    assert "\n" not in str(e.value)


def test_synth_command_writes_a_scope_csv_on_the_8_bit_levels_that_decodes(monkeypatch, capsys, tmp_path):
    from conftest import run_cli
    from readchan.io.capture import load_capture

    out = tmp_path / "scope.csv"
    code, _, err = run_cli(monkeypatch, capsys, "synth", out, "--track2", ";1234567890?", "--snr-db", "35",
                           "--preamp-lowpass-hz", "6000", "--preamp-family", "bessel", "--preamp-order", "3",
                           "--ac-coupling-hz", "10", "--scope-volts-per-div", "0.1", "--no-antialias",
                           "--file-type", "csv", "--rate-hz", "50000")
    assert code == 0, err
    cap = load_capture(out)
    codes = cap.channel(0) / (0.1 * 8 / 256)
    assert np.allclose(codes, np.round(codes), atol=1e-3)
    code, stdout, _ = run_cli(monkeypatch, capsys, "decode", "--no-field-check", out)
    assert code == 0 and "valid" in stdout


@pytest.mark.parametrize("corner_hz", ["30000", "5e-324"])
def test_synth_command_refuses_an_ac_coupling_corner_off_its_range_in_one_line(monkeypatch, capsys, tmp_path,
                                                                                 corner_hz):
    from conftest import run_cli

    code, _, err = run_cli(monkeypatch, capsys, "synth", tmp_path / "x.wav", "--track2", ";1?",
                           "--ac-coupling-hz", corner_hz)
    assert code == 2 and "ac_coupling_hz" in err and err.count("\n") == 1
    assert not (tmp_path / "x.wav").exists()
