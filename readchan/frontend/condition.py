"""Stage 2, the front end's conditioning: remove DC offset and slow baseline, optional low-pass and mains notch.

Input: one channel's samples (any units) and the sample rate (Hz); :class:`ConditionSettings`.
Output: :class:`Conditioned` (the float64 signal, baseline at 0).

All filters are zero-phase (``scipy.signal.sosfiltfilt`` / ``filtfilt``), so they move no
pulse peak in time: timing recovery sees the pulses where the head produced them.

Memory: the DC and the baseline are taken out of one float64 copy of the samples in place (the
baseline is rendered and subtracted a few thousand samples at a time), so conditioning without
a notch or low-pass holds the input and one full-length array.  The signal stays float64, not
float32: a 20 Hz high-pass at 48 kHz has its poles within 3·10⁻³ of the unit circle, where
float32's 6·10⁻⁸ rounding, recirculated over the filter's memory, is no longer negligible
against a quiet channel's noise; the detector's sub-sample parabola and the timing loop need
the signal to the precision the capture has; and decoding must give the same reads it gave
(16-bit samples are exact in float32, and are kept so while they are read in blocks,
:mod:`readchan.io.blocks`).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from scipy import signal as sps

from readchan.errors import ParameterError
from readchan.frontend import zerophase


@dataclass(frozen=True)
class ConditionSettings:
    """Conditioning settings.

    Parameters
    ----------
    highpass_hz : corner of the baseline-removing high-pass (2nd-order Butterworth,
        zero-phase), in Hz; None or 0 for DC removal only.
    lowpass_hz : corner of an optional 4th-order Butterworth low-pass, in Hz.
    notch_hz : mains frequencies to notch (e.g. (50.0,)), each with its first harmonics.
    notch_q : quality factor of each notch.
    """

    highpass_hz: float | None = 20.0
    lowpass_hz: float | None = None
    notch_hz: tuple[float, ...] = ()
    notch_q: float = 8.0

    def __post_init__(self) -> None:
        # the upper limit of every corner is the capture's Nyquist frequency, checked in condition()
        if self.highpass_hz is not None:
            object.__setattr__(self, "highpass_hz", check_frequency("highpass_hz", self.highpass_hz, MIN_HIGHPASS_HZ,
                                                                    allow_zero=True))
        if self.lowpass_hz is not None:
            object.__setattr__(self, "lowpass_hz", check_frequency("lowpass_hz", self.lowpass_hz, MIN_LOWPASS_HZ))
        try:
            notches = tuple(self.notch_hz)
        except TypeError:
            raise ParameterError(f"notch_hz must be a sequence of frequencies in Hz, was {self.notch_hz!r}") from None
        object.__setattr__(self, "notch_hz", tuple(check_frequency("notch_hz", f, MIN_NOTCH_HZ) for f in notches))
        q = _number("notch_q", self.notch_q)
        if not 0.5 <= q <= 1000:
            raise ParameterError(f"notch_q must be between 0.5 and 1000, was {self.notch_q!r}")


MIN_HIGHPASS_HZ = 0.1
"""Lowest baseline high-pass corner (Hz); 0 (or None) turns the high-pass off.  Below it the
zero-phase filter's transient outlasts any capture."""
MIN_LOWPASS_HZ = 10.0
"""Lowest low-pass corner (Hz): far below the slowest pulse rate of any track and swipe."""
MIN_NOTCH_HZ = 1.0
"""Lowest notch frequency (Hz); the mains are at 50 or 60 Hz (16.7 Hz on some railways)."""


def _number(name: str, value: object) -> float:
    if isinstance(value, bool):
        raise ParameterError(f"{name} must be a number, was {value!r}")
    try:
        return float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        raise ParameterError(f"{name} must be a number, was {value!r}") from None


def check_frequency(name: str, value: object, lowest_hz: float, *, allow_zero: bool = False) -> float:
    """``value`` as a float if it is a finite frequency of at least ``lowest_hz`` (or 0 when
    ``allow_zero``), else a :class:`ParameterError` naming ``name`` and the range."""
    f = _number(name, value)
    if allow_zero and f == 0:
        return 0.0
    if not math.isfinite(f) or f < lowest_hz:
        off = " (0: off)" if allow_zero else ""
        raise ParameterError(f"{name} must be a frequency of at least {lowest_hz:g} Hz and below the capture's "
                             f"Nyquist frequency{off}, was {value!r}")
    return f


@dataclass(frozen=True)
class Conditioned:
    """A conditioned single-channel signal.

    Attributes
    ----------
    signal : float64 samples after conditioning (capture units).
    rate_hz : sample rate in Hz.
    dc_offset : the median removed, in capture units.
    channel : channel index in the capture.
    """

    signal: np.ndarray
    rate_hz: float
    dc_offset: float
    channel: int


def condition(samples: np.ndarray, rate_hz: float, settings: ConditionSettings = ConditionSettings(),
              *, channel: int = 0) -> Conditioned:
    """Condition one channel of a head signal; see :class:`ConditionSettings`."""
    check_condition_settings(settings, rate_hz)
    x = np.asarray(samples, dtype=float)
    nyq = rate_hz / 2
    dc = float(np.median(x[:: max(1, x.size // 50_000)]))
    y = x - dc
    if settings.highpass_hz:
        _check_corner("highpass_hz", settings.highpass_hz, nyq)
        remove_baseline(y, rate_hz, settings.highpass_hz)
    for f in settings.notch_hz:
        _check_corner("notch frequency", f, nyq)
        for h in (1, 2, 3):
            fh = f * h
            if h == 1 or fh < 0.9 * nyq:
                b, a = sps.iirnotch(fh, settings.notch_q * h, fs=rate_hz)
                y = sps.filtfilt(b, a, y, padlen=min(y.size - 1, 3 * max(len(a), len(b))))
    if settings.lowpass_hz:
        _check_corner("lowpass_hz", settings.lowpass_hz, nyq)
        sos = _butter(4, settings.lowpass_hz, "lowpass", rate_hz)
        y = zerophase.sosfiltfilt(sos, y)
    return Conditioned(signal=np.ascontiguousarray(y), rate_hz=float(rate_hz), dc_offset=dc, channel=channel)


def check_condition_settings(settings: ConditionSettings, rate_hz: float) -> None:
    """Raise :class:`ParameterError` unless every corner and notch of ``settings`` lies below the
    Nyquist frequency of ``rate_hz``."""
    nyq = rate_hz / 2
    if settings.highpass_hz:
        _check_corner("highpass_hz", settings.highpass_hz, nyq)
    for f in settings.notch_hz:
        _check_corner("notch frequency", f, nyq)
    if settings.lowpass_hz:
        _check_corner("lowpass_hz", settings.lowpass_hz, nyq)


def baseline(y: np.ndarray, rate_hz: float, corner_hz: float) -> np.ndarray:
    """The slow baseline of ``y``: a 2nd-order Butterworth low-pass at ``corner_hz``, run forward
    and backward (zero phase), so ``y − baseline`` is the matching zero-phase high-pass.

    For speed the low-pass runs on block means, one block per ≈ 1/(40·corner) s, and the result
    is interpolated back to every sample.  The block means still hold everything below ≈ 20×
    the corner, and the low-pass keeps only what is below the corner, so the result matches
    the direct filter (within 0.5 % of a sinusoidal wander; tests/test_condition.py).
    """
    out = np.zeros(y.size)
    _apply_baseline(y, rate_hz, corner_hz, out, sign=1.0)
    return out


def remove_baseline(y: np.ndarray, rate_hz: float, corner_hz: float) -> np.ndarray:
    """``y`` with its :func:`baseline` subtracted in place (no full-length baseline array is
    made: it is rendered block by block); returns ``y``."""
    _apply_baseline(y, rate_hz, corner_hz, y, sign=-1.0)
    return y


_RENDER_ROWS = 4096
"""Blocks of the baseline rendered at a time (a few hundred thousand samples at 48 kHz)."""


def _apply_baseline(y: np.ndarray, rate_hz: float, corner_hz: float, out: np.ndarray, *, sign: float) -> None:
    """Add (``sign`` 1, into zeros: the baseline itself) or subtract (``sign`` −1) the baseline
    of ``y`` to ``out`` in place; the same values as rendering it whole, row block by row block."""
    block = max(1, int(rate_hz / (40.0 * corner_hz)))
    nb = y.size // block
    sos = _butter(2, corner_hz, "lowpass", rate_hz / block)
    if block == 1 or nb < 64:
        sos = _butter(2, corner_hz, "lowpass", rate_hz)
        slow_all = sps.sosfiltfilt(sos, y, padlen=min(y.size - 1, int(3 * rate_hz / corner_hz)))
        if sign > 0:
            out += slow_all
        else:
            out -= slow_all
        return
    means = y[: nb * block].reshape(nb, block).mean(axis=1)
    slow = sps.sosfiltfilt(sos, means, padlen=min(means.size - 1, 120))
    # back to every sample: the line through each block centre with the slope to the next
    slope = np.diff(slow, append=slow[-1]) / block
    offset = np.arange(block) - 0.5 * (block - 1)
    rows = out[: nb * block].reshape(nb, block)
    for a in range(0, nb, _RENDER_ROWS):
        b = min(nb, a + _RENDER_ROWS)
        line = slow[a:b, None] + slope[a:b, None] * offset
        if sign > 0:
            rows[a:b] += line
        else:
            rows[a:b] -= line
    if sign > 0:
        out[nb * block:] += slow[-1]
    else:
        out[nb * block:] -= slow[-1]


def signal_band_hz(x: np.ndarray, rate_hz: float, *, ratio: float = 4.0) -> float | None:
    """Upper edge (Hz) of the band where the signal stands above white noise, or None.

    Welch periodogram (1024-point segments, over the most energetic stretch of at most 2¹⁸ samples); the noise floor is the median power over the top quarter of the band; the signal
    band ends at the first frequency from which the power stays below ``ratio`` × the floor.
    None when the signal fills more than half the band (nothing to gain from a low-pass).
    """
    n = x.size
    if n < 4096:
        return None
    block = 1 << 18
    if n > block:                      # the most energetic stretch: where the swipes are
        nb = n // block
        energy = np.einsum("ij,ij->i", x[: nb * block].reshape(nb, block), x[: nb * block].reshape(nb, block))
        k = int(np.argmax(energy))
        x = x[k * block:(k + 1) * block]
    f, p = sps.welch(x, fs=rate_hz, nperseg=1024)
    nyq = rate_hz / 2
    floor = np.median(p[f > 0.75 * nyq])
    if not floor > 0:
        return None
    above = np.flatnonzero(p > ratio * floor)
    above = above[f[above] < 0.75 * nyq]
    if above.size == 0:
        return None
    edge = float(f[above[-1]])
    return edge if edge < 0.5 * nyq else None


def refine(c: Conditioned, *, lowpass_hz: float | None = None, highpass_hz: float | None = None) -> Conditioned:
    """``c`` through an optional extra zero-phase band limit: a 4th-order Butterworth low-pass at
    ``lowpass_hz`` and/or a 2nd-order high-pass at ``highpass_hz`` (Hz), in one filter pass."""
    nyq = c.rate_hz / 2
    if lowpass_hz is not None:
        _check_corner("lowpass", lowpass_hz, nyq)
    if highpass_hz is not None:
        _check_corner("highpass", highpass_hz, nyq)
    if lowpass_hz is None and highpass_hz is None:
        return c
    sos = []
    if lowpass_hz is not None:
        sos.append(_butter(4, lowpass_hz, "lowpass", c.rate_hz))
    if highpass_hz is not None:
        sos.append(_butter(2, highpass_hz, "highpass", c.rate_hz))
    y = zerophase.sosfiltfilt(np.concatenate(sos), c.signal)     # scipy's values, fewer copies
    return Conditioned(y, c.rate_hz, c.dc_offset, c.channel)


@functools.lru_cache(maxsize=64)
def _butter_cached(order: int, corner_hz: float, btype: str, fs_hz: float) -> np.ndarray:
    return sps.butter(order, corner_hz, btype=btype, fs=fs_hz, output="sos")


def _butter(order: int, corner_hz: float, btype: str, fs_hz: float) -> np.ndarray:
    """Butterworth second-order sections, designed once per order, corner (Hz), type and rate
    (Hz): a streamed capture conditions every stretch with the same filters.  A copy of the
    cached design (scipy's filter loop wants a writable one)."""
    return _butter_cached(int(order), float(corner_hz), btype, float(fs_hz)).copy()


def _check_corner(name: str, f_hz: float, nyq: float) -> None:
    if not math.isfinite(f_hz) or not 0 < f_hz < nyq:
        raise ParameterError(f"{name} must be between 0 and {nyq:g} Hz (the capture's Nyquist frequency), "
                             f"was {f_hz!r}")


@dataclass(frozen=True)
class HumFit:
    """Mains hum fitted on the quiet stretches of a capture.

    Attributes
    ----------
    freq_hz : fitted fundamental frequency in Hz (near 50 or 60).
    amplitude : fundamental amplitude (capture units, peak).
    coef : least-squares coefficients (cos, sin) for the fundamental and harmonics 2 and 3.
    residual_rms : RMS of what the fit leaves on the quiet samples.
    """

    freq_hz: float
    amplitude: float
    coef: np.ndarray
    residual_rms: float

    def waveform(self, n: int, rate_hz: float) -> np.ndarray:
        """The fitted hum over samples 0..n-1.

        The hum is periodic, so one period is tabulated at 8192 phases and looked up by each
        sample's phase (error below 0.08 % of the amplitude).
        """
        table_n = 8192
        table = _hum_basis(np.arange(table_n) / (table_n * self.freq_hz), self.freq_hz) @ self.coef
        out = np.empty(n)
        step = self.freq_hz / rate_hz * table_n
        chunk = 1 << 18                  # phases a quarter-million samples at a time: no full-length temporaries
        for a in range(0, n, chunk):
            phase = np.arange(a, min(n, a + chunk), dtype=float)
            phase *= step
            np.take(table, phase.astype(np.int64) & (table_n - 1), out=out[a:a + chunk])
        return out


def _hum_basis(t: np.ndarray, f: float, harmonics: int = 3) -> np.ndarray:
    cols = []
    for h in range(1, harmonics + 1):
        w = 2 * np.pi * f * h * t
        cols += [np.cos(w), np.sin(w)]
    return np.stack(cols, axis=1)


def _fundamental_residuals(t: np.ndarray, y: np.ndarray, freqs_hz: np.ndarray) -> np.ndarray:
    """Residual sum of squares of the least-squares fit of a·cos(2πft) + b·sin(2πft) to ``y``
    at times ``t`` (s), for every frequency of ``freqs_hz`` at once: from the normal equations
    of the two columns (Gram matrix G, right side r: RSS = Σy² − rᵀG⁻¹r), which is what
    ``numpy.linalg.lstsq`` minimises, without one solver call per frequency."""
    w = 2 * np.pi * np.asarray(freqs_hz, float)[:, None] * t[None, :]
    c, s = np.cos(w), np.sin(w)
    cc, ss, cs = np.einsum("ij,ij->i", c, c), np.einsum("ij,ij->i", s, s), np.einsum("ij,ij->i", c, s)
    cy, sy = c @ y, s @ y
    det = cc * ss - cs * cs
    explained = (ss * cy * cy - 2 * cs * cy * sy + cc * sy * sy) / np.where(det > 0, det, np.inf)
    return float(y @ y) - explained


def fit_hum(x: np.ndarray, rate_hz: float, quiet: np.ndarray, *, significance: float = 8.0,
            min_level: float = 0.02, freq_hz: float | None = None) -> HumFit | None:
    """Fit mains hum (50 or 60 Hz ± 0.6 Hz, with harmonics 2 and 3) to the samples where
    ``quiet`` is True, by linear least squares on a frequency grid of 0.02 Hz (or at
    ``freq_hz`` alone, Hz, when the frequency was found once for the whole capture).

    Fitting only where there are no pulses keeps the data out of the estimate: a stripe's
    own bit pattern can have a spectral line near 50 or 60 Hz, which a notch would eat.
    The quiet samples are averaged over ~0.5 ms and taken at ~2 kHz.  Returns None unless at
    least three mains cycles of quiet samples exist and the fitted amplitude exceeds
    ``significance`` × its standard error (σ·√(2/N)) and ``min_level`` × the capture's peak
    level.  ``freq_hz``: fit at this fundamental (Hz) only, without the grid search.
    """
    q = np.flatnonzero(quiet)
    if q.size < 3 * rate_hz / 50.0:
        return None
    step = max(1, int(rate_hz // 2000), q.size // 4000)   # ~2 kHz sampling, at most ~4000 points
    q = q[::step]
    # average over `step` samples before taking every step-th (a boxcar: 0.15 % loss at 60 Hz
    # for a 2 kHz step), so the noise does not alias into the fit at full strength
    w = max(1, int(rate_hz // 2000))
    lo = np.clip(q - w // 2, 0, x.size - w)
    smooth = x[lo[:, None] + np.arange(w)].mean(axis=1)
    peak = float(np.percentile(np.abs(x[:: max(1, x.size // 500_000)]), 99.9))
    return fit_hum_points(q / rate_hz, smooth, peak, significance=significance, min_level=min_level,
                          freq_hz=freq_hz)


def fit_hum_points(t_s: np.ndarray, values: np.ndarray, peak: float, *, significance: float = 8.0,
                   min_level: float = 0.02, freq_hz: float | None = None) -> HumFit | None:
    """:func:`fit_hum` on quiet samples already taken: their times ``t_s`` (s) and (boxcar-
    averaged) values, and the capture's peak level ``peak`` (99.9th percentile of |x|)."""
    t, y = np.asarray(t_s, float), np.asarray(values, float) - np.mean(values)

    def fit(f: float):
        A = _hum_basis(t, f)
        coef, *_ = np.linalg.lstsq(A, y, rcond=None)
        return float(np.sum((y - A @ coef) ** 2)), f, coef

    if freq_hz is None:
        # coarse search on the fundamental (0.1 Hz), then 0.02 Hz around the best, then harmonics
        grid = np.concatenate([np.arange(m - 0.6, m + 0.6001, 0.1) for m in (50.0, 60.0)])
        f0 = float(grid[int(np.argmin(_fundamental_residuals(t, y, grid)))])
        fine = np.arange(f0 - 0.1, f0 + 0.1001, 0.02)
        freq_hz = float(fine[int(np.argmin(_fundamental_residuals(t, y, fine)))])
    res, f, coef = fit(float(freq_hz))
    sigma = math.sqrt(res / max(t.size - 6, 1))
    amp = float(math.hypot(coef[0], coef[1]))
    if amp < significance * sigma * math.sqrt(2.0 / t.size) or amp < min_level * peak:
        return None
    return HumFit(float(f), amp, coef, sigma)
