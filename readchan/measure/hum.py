"""Mains hum fitted on the baseline of a channel: the quiet stretches and the gaps between pulses.

Input: the raw channel (numpy array, capture units), its conditioned signal
(:class:`readchan.frontend.condition.Conditioned`), the sample rate in Hz, boolean masks of
the quiet and the between-pulse samples and the baseline high-pass corner in Hz.  Output: a
:class:`readchan.frontend.condition.HumFit` (fundamental in Hz, peak amplitude in capture
units, harmonic coefficients) or None, and where it was fitted.
"""

from __future__ import annotations

import math

import numpy as np

from readchan.frontend.condition import ConditionSettings, HumFit, condition, fit_hum


EDGE_S = 0.05
"""The hum is fitted on quiet samples at least this far from the capture's ends (seconds)."""

HUM_MIN_LEVEL = 0.02
"""Least hum amplitude, as a fraction of the capture's peak, that counts as hum when the quiet
time holds at least :data:`HUM_MIN_CYCLES` cycles of 50 Hz (the default of
:func:`readchan.frontend.condition.fit_hum`)."""

HUM_MIN_LEVEL_SHORT = 0.05
"""The same with less quiet time: a short fit mistakes more of the noise for hum (our choice)."""

HUM_MIN_CYCLES = 3
"""Cycles of the lower mains frequency (50 Hz) of quiet time for the lower hum level."""

BETWEEN_ONLY_FRACTION = 0.1
"""Below this fraction of the fitted samples from between pulses the hum is reported as fitted
on the quiet samples alone."""

HUM_FIT_SAMPLES = 20_000
"""At most this many samples (evenly thinned) go into the refinement's least squares (our
choice: ample for six coefficients; keeps the frequency search cheap)."""

FREQ_STEP_HZ = 0.01
"""Step of the refinement's frequency grid, Hz."""

FREQ_STEPS = 10
"""The refinement's grid reaches ± this many steps (±0.1 Hz) around the first fit's frequency."""

HUM_COEFFICIENTS = 6
"""Coefficients of the hum model: cosine and sine of harmonics 1 to 3."""


def highpass_gain(f_hz: np.ndarray, corner_hz: float | None) -> np.ndarray:
    """Gain of the zero-phase baseline high-pass (2nd-order Butterworth run both ways):
    1 − 1/(1 + (f/fc)⁴) = 1/(1 + (fc/f)⁴) (Butterworth magnitude |H|² = 1/(1 + (f/fc)^2n))."""
    f = np.asarray(f_hz, float)
    return np.ones_like(f) if not corner_hz else 1.0 / (1.0 + (corner_hz / f) ** 4)


def fit_hum_wide(x, cond, rate_hz, quiet, between, highpass_hz, channel):
    """Mains hum fitted on every sample where the baseline shows: the quiet stretches, and the
    middle of the gaps between pulses (adjacent pulses alternate in sign, so their tails
    largely cancel there).  Returns (HumFit or None, where it was fitted).

    Two passes: the first on the high-passed signal away from the capture's ends (the
    zero-phase high-pass rings there while hum is in the signal), its coefficients divided by
    the high-pass gain at each harmonic (:func:`highpass_gain`); the second, a correction fitted on
    the signal high-passed after the first hum was taken out (no ringing left, so every sample
    counts), with the frequency refined between grid points by a parabola through the
    residuals (the 0.02 Hz grid alone leaves a phase drift that reads as noise).
    """
    n = x.size
    edge = int(min(EDGE_S, 0.25 * n / rate_hz) * rate_hz)
    where = quiet | between
    n_quiet = int(quiet.sum())
    inner = where.copy()
    inner[:edge] = False
    inner[n - edge:] = False
    level = HUM_MIN_LEVEL if n_quiet >= HUM_MIN_CYCLES * rate_hz / 50.0 else HUM_MIN_LEVEL_SHORT
    first = fit_hum(cond.signal, rate_hz, inner if inner.sum() >= 0.5 * where.sum() else where, min_level=level)
    if first is None:
        return None, None
    hum_from = "quiet" if int((where & ~quiet).sum()) < BETWEEN_ONLY_FRACTION * int(where.sum()) else "quiet and between pulses"
    hum = _with_gain(first, 1.0 / highpass_gain(_harmonic_hz(first.freq_hz), highpass_hz))
    cs = ConditionSettings(highpass_hz=highpass_hz or None)
    idx = np.flatnonzero(where)
    idx = idx[:: max(1, idx.size // HUM_FIT_SAMPLES)]
    for _ in range(HUM_PASSES):
        # high-pass with the hum taken out (no ringing), then the hum put back as the
        # high-pass passes a steady sinusoid: the high-passed capture without the end ringing
        y = condition(x - hum.waveform(n, rate_hz), rate_hz, cs, channel=channel).signal
        g = highpass_gain(_harmonic_hz(hum.freq_hz), highpass_hz)
        target = y[idx] + _with_gain(hum, g).waveform(n, rate_hz)[idx]
        hum = _refine_hum(idx / rate_hz, target - target.mean(), hum.freq_hz, highpass_hz)
    return hum, hum_from


HUM_PASSES = 2
"""Passes of the hum refinement (the second changes the frequency by well under 0.01 Hz)."""


def _harmonic_hz(f_hz: float) -> np.ndarray:
    """Frequencies of the hum basis columns (cos, sin for harmonics 1..3)."""
    return f_hz * np.repeat([1.0, 2.0, 3.0], 2)


def _with_gain(h: HumFit, gain: np.ndarray) -> HumFit:
    c = h.coef * gain
    return HumFit(h.freq_hz, float(math.hypot(c[0], c[1])), c, h.residual_rms)


def _refine_hum(t: np.ndarray, target: np.ndarray, f0: float, highpass_hz) -> HumFit:
    """Least-squares hum (fundamental and harmonics 2, 3) on the high-passed samples
    ``target`` at times ``t``, the frequency searched on a 0.01 Hz grid within ±0.1 Hz of
    ``f0`` and then refined to the vertex of the parabola through the three best residuals;
    the coefficients are divided by the high-pass gain (:func:`highpass_gain`)."""
    from readchan.frontend.condition import _hum_basis

    def rss(f):
        A = _hum_basis(t, f)
        coef, *_ = np.linalg.lstsq(A, target, rcond=None)
        return float(np.sum((target - A @ coef) ** 2)), coef

    df = FREQ_STEP_HZ
    grid = f0 + df * np.arange(-FREQ_STEPS, FREQ_STEPS + 1)
    res = np.array([rss(f)[0] for f in grid])
    k = int(np.clip(np.argmin(res), 1, grid.size - 2))
    rm, r0, rp = res[k - 1:k + 2]
    den = rm - 2 * r0 + rp
    f = float(grid[k] + (0.5 * df * (rm - rp) / den if den > 0 else 0.0))
    r, coef = rss(f)
    if r > r0:
        f, (r, coef) = float(grid[k]), rss(float(grid[k]))
    sigma = math.sqrt(r / max(t.size - HUM_COEFFICIENTS, 1))
    return _with_gain(HumFit(f, 0.0, coef, sigma), 1.0 / highpass_gain(_harmonic_hz(f), highpass_hz))
