"""The forward model: pulse shapes, F2F positions, speed scaling, impairments, reproducibility."""

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from readchan.errors import ParameterError
from readchan.synth import Impairments, SpeedProfile, SynthSpec, TrackContent, synthesize
from readchan.linecode.f2f import f2f_positions
from readchan.synth.head import KarlqvistPulse, LorentzianPulse, PulseModel, gap_loss, spacing_loss_db


def _half_width(shape, guess):
    right = brentq(lambda x: shape(np.array([x]))[0] - 0.5, 0.0, 50 * guess)
    return 2 * right


@pytest.mark.parametrize("g,d,a", [(12e-6, 5e-6, 15e-6), (25e-6, 2e-6, 8e-6), (5e-6, 10e-6, 30e-6)])
def test_karlqvist_arctan_pulse_pw50_matches_closed_form(g, d, a):
    # Closed form PW50 = sqrt(g² + 4(d+a)²) for a Karlqvist head over an arctan transition
    # (standard magnetic-recording textbook result; Bertram, Theory of Magnetic Recording, ch. 5).
    pulse = KarlqvistPulse(g, d, a)
    measured = _half_width(pulse.shape, pulse.pw50_m)
    assert measured == pytest.approx(math.sqrt(g**2 + 4 * (d + a) ** 2), rel=1e-9)
    assert pulse.pw50_m == pytest.approx(math.sqrt(g**2 + 4 * (d + a) ** 2), rel=1e-12)


def wavelength_response(pulse: PulseModel, wavelength_m: np.ndarray) -> np.ndarray:
    """Magnitude of the spatial Fourier transform of ``pulse`` at wavelengths λ (metres).

    Computed numerically from the pulse shape, normalised to 1 at long wavelengths; for the
    Karlqvist/arctan pulse this is the product of the gap loss and exp(−2π(d+a)/λ), which
    the test below checks against the closed forms (a test instrument, not library code).
    """
    lam = np.atleast_1d(np.asarray(wavelength_m, dtype=float))
    width = getattr(pulse, "pw50_m")
    span = 4000.0 * width
    n = 1 << 20
    x = np.linspace(-span / 2, span / 2, n, endpoint=False)
    dx = x[1] - x[0]
    p = pulse.shape(x)
    k = 2.0 * np.pi / lam
    out = np.empty_like(lam)
    dc = p.sum() * dx
    for i, kk in enumerate(k):
        out[i] = abs(np.sum(p * np.cos(kk * x)) * dx) / dc
    return out



def f2f_bits_from_positions(positions_m: np.ndarray, cell_m: float) -> np.ndarray:
    """Inverse of :func:`f2f_positions` for ideal positions (a test instrument, not library code)."""
    cells = np.round(np.diff(np.asarray(positions_m)) / cell_m * 2).astype(int)
    bits = []
    i = 0
    while i < cells.size:
        if cells[i] == 2:
            bits.append(0)
            i += 1
        else:
            bits.append(1)
            i += 2
    return np.asarray(bits, dtype=np.uint8)



def test_lorentzian_pulse_is_half_height_at_half_pw50():
    # Lorentzian V0/(1 + (2x/PW50)²): V = V0/2 at x = PW50/2 (standard approximation).
    p = LorentzianPulse(40e-6)
    assert p.shape(np.array([20e-6]))[0] == pytest.approx(0.5)
    assert p.shape(np.array([0.0]))[0] == pytest.approx(1.0)


def test_karlqvist_pulse_tends_to_lorentzian_for_a_vanishing_gap():
    # g → 0: PW50 → 2(d+a), the Lorentzian limit (Bertram ch. 5).
    k = KarlqvistPulse(1e-9, 5e-6, 15e-6)
    lor = LorentzianPulse(2 * 20e-6)
    x = np.linspace(-200e-6, 200e-6, 101)
    assert np.allclose(k.shape(x), lor.shape(x), atol=1e-4)


def test_wavelength_response_follows_gap_and_spacing_losses():
    # Karlqvist head over an arctan transition: response = |sin(πg/λ)/(πg/λ)|·exp(−2π(d+a)/λ)
    # (gap loss: Mee & Daniel; spacing loss exp(−2πd/λ): Wallace, BSTJ 1951).
    g, d, a = 12e-6, 5e-6, 15e-6
    lam = np.array([60e-6, 121e-6, 400e-6])
    expected = np.abs(gap_loss(g, lam)) * 10 ** (spacing_loss_db(d + a, lam) / 20)
    assert np.allclose(wavelength_response(KarlqvistPulse(g, d, a), lam), expected, rtol=2e-3)


def test_spacing_loss_is_54_6_db_per_wavelength_of_spacing():
    # Wallace (BSTJ 30(4), 1951): exp(−2πd/λ) = −54.6·d/λ dB.
    assert spacing_loss_db(1e-6, np.array([1e-6]))[0] == pytest.approx(-54.575, abs=0.01)
    assert spacing_loss_db(0.5e-6, np.array([10e-6]))[0] == pytest.approx(-54.575 * 0.05, abs=1e-3)


def test_gap_loss_has_its_first_null_at_wavelength_equal_to_gap():
    # Gap loss sin(πg/λ)/(πg/λ), first null at λ = g (Mee & Daniel).
    assert gap_loss(10e-6, np.array([10e-6]))[0] == pytest.approx(0.0, abs=1e-12)
    assert gap_loss(10e-6, np.array([20e-6]))[0] == pytest.approx(2 / np.pi)


def test_f2f_puts_a_transition_at_every_boundary_and_one_mid_cell_per_one():
    # ISO/IEC 7811-2 F2F: boundary transitions plus a mid-cell transition for each 1.
    pos = f2f_positions(np.array([0, 1, 1, 0], np.uint8), 1.0)
    assert np.allclose(pos, [0, 1, 1.5, 2, 2.5, 3, 4])
    assert np.array_equal(f2f_bits_from_positions(pos, 1.0), [0, 1, 1, 0])


def _isolated(speed_cm_s, rate_hz=192_000):
    # two transitions 25.4 mm apart (1 bpi, one zero bit): isolated pulses
    spec = SynthSpec(tracks=(TrackContent(np.array([0], np.uint8), 1.0),), rate_hz=rate_hz,
                     speed=SpeedProfile(speed_cm_s), reference_cm_s=30.0, pulse=LorentzianPulse(100e-6), lead_s=0.01)
    return synthesize(spec)


def test_head_voltage_scales_with_speed_and_its_time_integral_does_not():
    # Faraday: V = N·v·dΦ/dx, so amplitude ∝ v, duration ∝ 1/v, ∫V dt independent of v.
    slow, fast = _isolated(20.0), _isolated(60.0)
    peak_slow, peak_fast = np.abs(slow.samples).max(), np.abs(fast.samples).max()
    assert peak_fast / peak_slow == pytest.approx(3.0, rel=0.01)
    def first_pulse_area(r):
        x = r.samples[:, 0]
        t_mid = r.transition_times_s[0].mean()
        return np.abs(x[: int(t_mid * r.rate_hz)]).sum() / r.rate_hz
    assert first_pulse_area(fast) == pytest.approx(first_pulse_area(slow), rel=0.02)


def test_pulse_duration_is_pw50_over_speed():
    r = _isolated(50.0)
    x = np.abs(r.samples[:, 0])
    first = x[: int(r.transition_times_s[0].mean() * r.rate_hz)]
    width_s = np.count_nonzero(first >= first.max() / 2) / r.rate_hz
    assert width_s == pytest.approx(100e-6 / 0.5, rel=0.02)


def test_successive_pulses_alternate_in_polarity():
    bits = np.array([0, 0, 1, 0, 1, 1, 0], np.uint8)
    r = synthesize(SynthSpec(tracks=(TrackContent(bits, 20.0),), rate_hz=96_000))
    idx = np.round(r.transition_times_s[0] * r.rate_hz).astype(int)
    signs = np.sign(r.samples[idx, 0])
    assert np.all(signs[1:] == -signs[:-1])


def test_same_seed_gives_the_same_samples_and_another_seed_does_not():
    bits = np.array([0] * 10 + [1, 0] * 10 + [0] * 10, np.uint8)
    imp = Impairments(snr_db=20, jitter=0.05)
    a = synthesize(SynthSpec(tracks=(TrackContent(bits, 210.0),), impairments=imp, seed=7))
    b = synthesize(SynthSpec(tracks=(TrackContent(bits, 210.0),), impairments=imp, seed=7))
    c = synthesize(SynthSpec(tracks=(TrackContent(bits, 210.0),), impairments=imp, seed=8))
    assert np.array_equal(a.samples, b.samples)
    assert not np.array_equal(a.samples, c.samples)


def test_noise_is_added_at_the_stated_snr():
    bits = np.array([0] * 30 + [1, 0, 1, 1] * 40 + [0] * 30, np.uint8)
    r = synthesize(SynthSpec(tracks=(TrackContent(bits, 75.0),), impairments=Impairments(snr_db=20.0), seed=3))
    assert 20 * np.log10(r.median_peak[0] / r.noise_rms[0]) == pytest.approx(20.0)
    quiet = r.samples[: int(0.015 * r.rate_hz), 0]
    assert np.std(quiet) == pytest.approx(r.noise_rms[0], rel=0.1)


def test_reverse_swipe_plays_the_transitions_in_mirrored_order():
    bits = np.array([0] * 8 + [1, 1, 0, 1] + [0] * 8, np.uint8)
    fwd = synthesize(SynthSpec(tracks=(TrackContent(bits, 210.0),)))
    rev = synthesize(SynthSpec(tracks=(TrackContent(bits, 210.0),), impairments=Impairments(reverse=True)))
    gaps_f = np.diff(fwd.transition_times_s[0])
    gaps_r = np.diff(rev.transition_times_s[0])
    assert np.allclose(gaps_r, gaps_f[::-1], rtol=1e-6)


def test_flux_output_is_a_two_level_square_wave_toggling_at_each_transition():
    bits = np.array([0] * 8 + [1, 0, 1] + [0] * 8, np.uint8)
    r = synthesize(SynthSpec(tracks=(TrackContent(bits, 75.0),), output="flux", amplitude=0.8))
    x = r.samples[:, 0]
    assert set(np.unique(x)) == {-0.8, 0.8}
    assert np.count_nonzero(np.diff(x)) == r.transition_times_s[0].size


def test_clipping_limits_the_signal_to_the_stated_fraction_of_the_median_peak():
    bits = np.array([0] * 20 + [1, 0] * 20 + [0] * 20, np.uint8)
    r = synthesize(SynthSpec(tracks=(TrackContent(bits, 210.0),), impairments=Impairments(clip=0.7)))
    assert np.abs(r.samples).max() == pytest.approx(0.7 * r.median_peak[0])


@pytest.mark.parametrize("kw", [dict(rate_hz=0.0), dict(rate_hz=float("nan")), dict(swipes=0), dict(amplitude=-1.0)])
def test_absurd_synth_parameters_are_refused(kw):
    with pytest.raises(ParameterError):
        SynthSpec(tracks=(TrackContent(np.zeros(4, np.uint8), 210.0),), **kw)


def test_speed_profile_swipe_speeds_up_then_slows_down():
    p = SpeedProfile(40.0, "swipe", 0.3)
    v = p.speed_cm_s(np.array([0.0, 0.5, 1.0]))
    assert v[1] > v[0] and v[1] > v[2]
    assert v[1] == pytest.approx(52.0) and v[0] == pytest.approx(28.0)
    assert np.mean(p.speed_cm_s(np.linspace(0, 1, 10001))) == pytest.approx(40.0, rel=1e-3)
