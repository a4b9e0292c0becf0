"""Conditioning: baseline removal, hum fit, signal band, between-pulse mask."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import signal as sps

from readchan.frontend.condition import baseline, condition, fit_hum, signal_band_hz
from readchan.frontend.head import between_pulses_mask
from readchan.frontend.detect import detect_head

RATE = 48_000.0


def _t(n):
    return np.arange(n) / RATE


def test_block_baseline_matches_the_direct_zero_phase_butterworth():
    # reference: scipy.signal.sosfiltfilt with a 2nd-order Butterworth low-pass at 20 Hz
    rng = np.random.default_rng(0)
    t = _t(200_000)
    y = 0.3 * np.sin(2 * np.pi * 2 * t) + 0.05 * rng.normal(size=t.size) + 0.2 * np.sin(2 * np.pi * 3000 * t)
    sos = sps.butter(2, 20.0, btype="lowpass", fs=RATE, output="sos")
    direct = sps.sosfiltfilt(sos, y)
    fast = baseline(y, RATE, 20.0)
    assert np.max(np.abs(fast - direct)[2000:-2000]) < 0.005 * 0.3


def test_condition_removes_dc_and_slow_wander_but_keeps_pulses():
    t = _t(96_000)
    pulses = 0.5 * np.sin(2 * np.pi * 1500 * t)
    x = pulses + 0.3 + 0.4 * np.sin(2 * np.pi * 1.5 * t)
    c = condition(x, RATE)
    inner = slice(10_000, -10_000)
    assert abs(c.dc_offset - 0.3) < 0.05
    assert np.max(np.abs(c.signal[inner] - pulses[inner])) < 0.01


@pytest.mark.parametrize("mains", [50.0, 60.0])
def test_hum_fitted_on_quiet_samples_has_the_mains_frequency_and_amplitude(mains):
    rng = np.random.default_rng(1)
    t = _t(48_000)
    x = 0.1 * np.sin(2 * np.pi * mains * t + 0.7) + 0.01 * rng.normal(size=t.size)
    quiet = np.ones(t.size, bool)
    quiet[10_000:30_000] = False          # a swipe would be here
    x[~quiet] += rng.normal(0.0, 0.3, np.count_nonzero(~quiet))
    fit = fit_hum(x, RATE, quiet)
    assert fit is not None
    assert abs(fit.freq_hz - mains) <= 0.04
    assert fit.amplitude == pytest.approx(0.1, rel=0.03)


def test_no_hum_is_reported_in_plain_noise():
    x = np.random.default_rng(2).normal(0.0, 0.01, 48_000)
    assert fit_hum(x, RATE, np.ones(x.size, bool)) is None


def test_signal_band_ends_where_a_band_limited_signal_meets_white_noise():
    rng = np.random.default_rng(3)
    sos = sps.butter(8, 3000.0, fs=RATE, output="sos")
    x = sps.sosfilt(sos, rng.normal(size=200_000)) + 0.01 * rng.normal(size=200_000)
    edge = signal_band_hz(x, RATE)
    assert edge is not None and 2500.0 < edge < 6000.0


def test_between_pulses_mask_keeps_away_from_every_transition():
    x = np.zeros(48_000)
    idx = np.arange(1000, 47_000, 200)
    x[idx] = np.where(np.arange(idx.size) % 2 == 0, 1.0, -1.0)
    tr = detect_head(sps.sosfiltfilt(sps.butter(2, 4000.0, fs=RATE, output="sos"), x), RATE)
    mask = between_pulses_mask(x.size, RATE, tr, guard=0.3)
    assert not mask[tr.index].any()
    assert not mask[tr.index + 50].any() and mask[tr.index[:-1] + 100].all()
