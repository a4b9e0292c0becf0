"""The hum search's batch least squares (:func:`readchan.frontend.condition._fundamental_residuals`)
against numpy's solver (``numpy.linalg.lstsq``) frequency by frequency, and the fit it leads to."""

from __future__ import annotations

import numpy as np
import pytest

from readchan.frontend.condition import _fundamental_residuals, _hum_basis, fit_hum


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_batch_residuals_are_those_of_numpys_least_squares(seed):
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(0, 0.4, 2500))
    y = 0.1 * np.cos(2 * np.pi * 59.93 * t + rng.uniform(0, 6)) + rng.normal(0, 0.05, t.size)
    freqs = np.arange(59.4, 60.6001, 0.1)
    want = []
    for f in freqs:
        a = _hum_basis(t, f, harmonics=1)
        coef, *_ = np.linalg.lstsq(a, y, rcond=None)
        want.append(float(np.sum((y - a @ coef) ** 2)))
    assert np.allclose(_fundamental_residuals(t, y, freqs), want, rtol=1e-10, atol=0)


def test_hum_between_grid_points_is_found_to_the_fine_step():
    # 50.37 Hz hum at 5 % of full scale in a quiet reader (white noise 1 %, invented)
    rate = 48_000.0
    rng = np.random.default_rng(8)
    n = int(2.0 * rate)
    x = 0.05 * np.sin(2 * np.pi * 50.37 * np.arange(n) / rate + 1.0) + rng.normal(0, 0.01, n)
    fit = fit_hum(x, rate, np.ones(n, bool))
    assert fit is not None and abs(fit.freq_hz - 50.37) <= 0.011


def test_a_frequency_decided_for_the_capture_is_fitted_as_given():
    rate = 48_000.0
    rng = np.random.default_rng(9)
    n = int(1.0 * rate)
    x = 0.05 * np.sin(2 * np.pi * 59.9 * np.arange(n) / rate) + rng.normal(0, 0.01, n)
    fit = fit_hum(x, rate, np.ones(n, bool), freq_hz=59.9)
    assert fit is not None and fit.freq_hz == 59.9 and fit.amplitude == pytest.approx(0.05, rel=0.05)


@pytest.mark.parametrize("field, value", [("hum_hz", 30.0), ("hum_hz", float("nan")), ("band_hz", -1.0),
                                          ("band_hz", float("inf")), ("quant_step", -1e-5), ("quant_step", "x")])
def test_per_capture_decisions_out_of_range_are_parameter_errors(field, value):
    from readchan.channel import DecodeSettings
    from readchan.errors import ParameterError

    with pytest.raises(ParameterError, match=field):
        DecodeSettings(**{field: value})
