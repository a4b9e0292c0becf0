"""Timing of a read: swipe speed and acceleration, normalised intervals, decision margin, peak shift.

Input: a :class:`readchan.channel.Read` (its bits carry the timing loop's bit period in
seconds; its track, the density in bpi).  Output: a :class:`Timing` (speed in cm/s,
acceleration in m/s², interval histogram in cells, margins, peak shift in seconds and cells).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from readchan.channel import Read
from readchan.linecode.f2f import BOUNDARY
from readchan.units import speed_from_period_cm_s


HIST_EDGES = np.linspace(0.0, 2.0, 81)
"""Bin edges of the normalised-interval histogram, in bit cells."""

SLOPE_HALF_MIN_BITS = 8
"""Least half-window, in bits, of the sliding straight-line fit of speed against time."""

SLOPE_HALF_MAX_BITS = 200
"""Largest half-window, in bits, of the sliding fit."""

SLOPE_WINDOWS_PER_READ = 16
"""Between those bounds the half-window is the read's bits over this (our choice: the fit
follows a swipe's acceleration and deceleration, and averages the bit-to-bit jitter)."""

MARGIN_PERCENTILE = 1.0
"""Percentile of the decision margin reported beside its minimum (the 1st: a margin the read
keeps on all but one bit in a hundred)."""


@dataclass(frozen=True)
class Timing:
    """Timing of one read.

    Attributes
    ----------
    density_bpi : the density speeds are computed from; None when the track is unknown.
    bit_t_s : start time of each bit cell, seconds.
    period_s : the timing loop's bit period at each bit, seconds.
    speed_cm_s : 2.54 / (density · period) per bit, cm/s; None without a density.
    speed_fit_cm_s : speed from the sliding straight-line fit, cm/s; None without a density.
    accel_m_s2 : slope of the sliding fit, m/s²; None without a density.
    mean_speed_cm_s, min_speed_cm_s, max_speed_cm_s : mean of ``speed_cm_s``; extremes of
        ``speed_fit_cm_s``.
    mean_accel_m_s2 : slope of one straight line through speed against time, m/s².
    max_abs_accel_m_s2 : largest |accel_m_s2|.
    speed_change_per_bit : max over bits of |accel| · T / v (dimensionless).
    ratio_t_s, ratio : each interval's start time (s) and its normalised length r = Δ/T.
    hist_edges_cell, hist_counts : histogram of r (values clipped into 0..2).
    margin : decision margin per bit (0 on the boundary, 1 ideal).
    margin_min, margin_min_bit, margin_min_t_s : the worst bit's margin, index and time.
    margin_p1, margin_p1_bit, margin_p1_t_s : the 1st-percentile margin, and the bit at that
        rank with its time.
    peak_shift_s, peak_shift_cell : peak-shift estimate in seconds and in cells; None when
        the read lacks the patterns it needs.
    """

    density_bpi: float | None
    bit_t_s: np.ndarray
    period_s: np.ndarray
    speed_cm_s: np.ndarray | None
    speed_fit_cm_s: np.ndarray | None
    accel_m_s2: np.ndarray | None
    mean_speed_cm_s: float | None
    min_speed_cm_s: float | None
    max_speed_cm_s: float | None
    mean_accel_m_s2: float | None
    max_abs_accel_m_s2: float | None
    speed_change_per_bit: float | None
    ratio_t_s: np.ndarray
    ratio: np.ndarray
    hist_edges_cell: np.ndarray
    hist_counts: np.ndarray
    margin: np.ndarray
    margin_min: float
    margin_min_bit: int
    margin_min_t_s: float
    margin_p1: float
    margin_p1_bit: int
    margin_p1_t_s: float
    peak_shift_s: float | None
    peak_shift_cell: float | None


def _sliding_slope(t: np.ndarray, v: np.ndarray, half: int) -> tuple[np.ndarray, np.ndarray]:
    """Least-squares line through (t, v) over the window of ±``half`` points around each point:
    (fitted value, slope) per point; windows shrink at the ends.  Cumulative sums, no loop."""
    n = t.size
    t0 = t - t.mean()
    c = [np.concatenate(([0.0], np.cumsum(a))) for a in (np.ones(n), t0, v, t0 * t0, t0 * v)]
    i = np.arange(n)
    a = np.clip(i - half, 0, n)
    b = np.clip(i + half + 1, 0, n)
    s0, st, sv, stt, stv = (cc[b] - cc[a] for cc in c)
    den = s0 * stt - st * st
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = np.where(den > 0, (s0 * stv - st * sv) / den, 0.0)
    fit = sv / s0 + slope * (t0 - st / s0)
    return fit, slope


def measure_timing(r: Read) -> Timing:
    bs = r.bits
    t = bs.start_s
    per = bs.period_s
    n = t.size
    density = r.track.density_bpi if r.track is not None else None
    speed = fit = accel = None
    mean_v = vmin = vmax = mean_a = max_a = change = None
    if density is not None and n >= 2:
        speed = speed_from_period_cm_s(per, density)
        half = int(max(SLOPE_HALF_MIN_BITS, min(n // SLOPE_WINDOWS_PER_READ, SLOPE_HALF_MAX_BITS)))
        fit, slope = _sliding_slope(t, speed, half)
        accel = slope / 100.0
        mean_v = float(np.mean(speed))
        vmin, vmax = float(fit.min()), float(fit.max())
        mean_a = float(np.polyfit(t - t.mean(), speed, 1)[0] / 100.0)
        max_a = float(np.max(np.abs(accel)))
        change = float(np.max(np.abs(accel) * 100.0 * per / fit))
    tr_t = r.transitions.times_s
    ratio = bs.ratio
    ratio_t = tr_t[:ratio.size]
    counts, _ = np.histogram(np.clip(ratio, HIST_EDGES[0], HIST_EDGES[-1] - 1e-9), HIST_EDGES)
    m = bs.margin
    k_min = int(np.argmin(m)) if n else 0
    order = np.argsort(m, kind="stable")
    k_p1 = int(order[int(MARGIN_PERCENTILE / 100.0 * (n - 1))]) if n else 0
    shift = _peak_shift(ratio)
    t_period = float(np.median(per)) if n else math.nan
    return Timing(density, t.copy(), per.copy(), speed, fit, accel, mean_v, vmin, vmax, mean_a, max_a, change,
                  ratio_t.copy(), ratio.copy(), HIST_EDGES.copy(), counts,
                  m.copy(), float(m[k_min]) if n else math.nan, k_min, float(t[k_min]) if n else math.nan,
                  float(np.percentile(m, MARGIN_PERCENTILE)) if n else math.nan, k_p1, float(t[k_p1]) if n else math.nan,
                  None if shift is None else shift * t_period, shift)


def _peak_shift(ratio: np.ndarray, min_count: int = 4) -> float | None:
    """Peak shift in cells from the normalised intervals.

    A transition with a half cell on one side and a full cell on the other is pushed away from
    its near neighbour by the shift δ (intersymbol interference of pulses of alternating
    polarity).  So a half cell with a full cell on one side and a half cell on the other is
    ½ + δ long, against ½ for a half cell between half cells; and a full cell with a half cell on
    one side and a full cell on the other is 1 − δ long, against 1 between full cells.  δ is the
    mean of the two differences that the read's patterns allow (None when neither does).
    """
    if ratio.size < 3:
        return None
    half = ratio < BOUNDARY
    mid = np.arange(1, ratio.size - 1)
    nb_half = half[mid - 1].astype(int) + half[mid + 1].astype(int)
    r = ratio[mid]
    est = []
    h1 = half[mid] & (nb_half == 1)
    h2 = half[mid] & (nb_half == 2)
    if h1.sum() >= min_count and h2.sum() >= min_count:
        est.append(float(np.median(r[h1]) - np.median(r[h2])))
    f1 = ~half[mid] & (nb_half == 1)
    f0 = ~half[mid] & (nb_half == 0)
    if f1.sum() >= min_count and f0.sum() >= min_count:
        est.append(float(np.median(r[f0]) - np.median(r[f1])))
    return float(np.mean(est)) if est else None
