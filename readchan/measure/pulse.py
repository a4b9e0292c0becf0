"""Pulse width of a read: PW50 from the mean clocking-zero pulse, and the resolution.

Input: a read's transitions and bits (:class:`readchan.frontend.detect.Transitions`,
:class:`readchan.linecode.f2f.BitStream`), the wide-band signal (numpy array, capture units),
the sample rate in Hz and the read's :class:`readchan.measure.timing.Timing`.  Output: a
:class:`PulseShape` (PW50 in seconds, cells and metres; resolution) or None.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.interpolate import CubicSpline

from readchan.channel import Read
from readchan.linecode.f2f import BOUNDARY
from readchan.measure.timing import Timing
from readchan.units import METRES_PER_INCH

TRAIN_NEIGHBOURS = 40
"""Neighbours on each side in the Lorentzian clocking-zero train of
:func:`_lorentzian_train_width` (our choice; the tails of farther neighbours alternate in sign
and largely cancel)."""

TRAIN_GRID_POINTS = 2001
"""Points over the middle cell on which the train's half width is found (a step of 1/2000
cell; our choice)."""

ALIGN_CORE_CELLS = 0.35
"""Half width, in cells, of the middle of the pulse the re-alignment fits (:func:`_mean_pulse`;
our choice: the peak and both flanks, short of the neighbours' half of the cell)."""

ALIGN_MIN_SCALE = 0.2
"""Pulses fitting the mean at less than this scale are not re-aligned (a missed or merged pulse;
our choice)."""

ALIGN_MAX_SHIFT_CELLS = 0.15
"""Largest re-alignment of a pulse, in cells (our choice)."""

MIN_PW50_INTERVALS = 8
"""Fewest intervals a read needs for a pulse-width measurement (our choice)."""

SPLINE_REACH_CELLS = 0.7
"""A pulse is used only when this many cells on each side of its peak lie inside the capture
(the resampling grid reaches ±0.5 cell, the re-alignment ±0.15 more)."""


@dataclass(frozen=True)
class PulseShape:
    """Pulse width of one read.

    Attributes
    ----------
    pw50_s : median width at half amplitude of the full-cell-spaced pulses, seconds.
    pw50_cell : PW50 over the local bit period (isolated-pulse estimate).
    width_cell : half-amplitude width of the mean clocking-zero pulse as measured, in cells,
        before the correction for its neighbours' tails.
    pw50_m : PW50 times the local speed (median), metres; None without a density.
    n_pulses : pulses measured.
    resolution : mean |peak| of half-cell-spaced pulses over full-cell-spaced ones; None
        when the read has no run of ones.
    """

    pw50_s: float
    pw50_cell: float
    width_cell: float
    pw50_m: float | None
    n_pulses: int
    resolution: float | None


def _full_cell_pulses(ratio: np.ndarray) -> np.ndarray:
    """Transition indices whose two intervals on each side are full cells (r ≥ 0.75)."""
    full = ratio >= BOUNDARY
    n_tr = ratio.size + 1
    j = np.arange(2, n_tr - 2)
    ok = full[j - 2] & full[j - 1] & full[j] & full[j + 1]
    return j[ok]


def _half_cell_pulses(ratio: np.ndarray) -> np.ndarray:
    """Transition indices with half-cell intervals on both sides."""
    half = ratio < BOUNDARY
    j = np.arange(1, ratio.size)
    return j[half[j - 1] & half[j]]


PULSE_GRID = np.linspace(-0.5, 0.5, 201)
"""Where pulses are resampled for PW50, in bit cells from the peak."""


def half_width(x: np.ndarray, y: np.ndarray) -> float:
    """Full width at half of the peak of ``y(x)`` (peak near the middle), by linear
    interpolation between the grid points that straddle half the peak; NaN when unclear."""
    k0 = int(np.argmax(y))
    top = y[k0]
    if not top > 0:
        return math.nan
    half = 0.5 * top
    left = np.flatnonzero(y[:k0] < half)
    right = np.flatnonzero(y[k0 + 1:] < half)
    if left.size == 0 or right.size == 0:
        return math.nan
    i = left[-1]                                   # y[i] < half <= y[i+1]
    xl = x[i] + (half - y[i]) / (y[i + 1] - y[i]) * (x[i + 1] - x[i])
    k = k0 + 1 + right[0]                          # y[k] < half <= y[k-1]
    xr = x[k - 1] + (y[k - 1] - half) / (y[k - 1] - y[k]) * (x[k] - x[k - 1])
    return float(xr - xl)


def _lorentzian_train_width(pw50_cell: np.ndarray) -> np.ndarray:
    """Half-amplitude width (cells) of the middle pulse of an endless train of Lorentzian
    pulses of alternating sign one cell apart (the clocking zeros), for isolated-pulse widths
    ``pw50_cell``: the neighbours' tails narrow it (by 4 % at 0.3 cell, 12 % at 0.5 cell)."""
    x = np.linspace(-0.5, 0.5, TRAIN_GRID_POINTS)
    k = np.arange(-TRAIN_NEIGHBOURS, TRAIN_NEIGHBOURS + 1)
    out = np.empty(pw50_cell.size)
    for i, p in enumerate(pw50_cell):
        y = np.sum(((-1.0) ** k)[:, None] / (1.0 + (2.0 * (x[None, :] - k[:, None]) / p) ** 2), axis=0)
        out[i] = half_width(x, y)
    return out


_TRAIN_PW50 = np.linspace(0.02, 1.0, 50)

_TRAIN_WIDTH = _lorentzian_train_width(_TRAIN_PW50)


def isolated_pw50_cell(width_cell: float) -> float:
    """Isolated-pulse PW50 (cells) whose Lorentzian clocking-zero train has half-amplitude width
    ``width_cell`` (the inverse of :func:`_lorentzian_train_width`; Lorentzian pulse: the
    standard approximation).  Widths beyond the table's reach (1 cell) are returned as they are."""
    if not width_cell <= _TRAIN_WIDTH[-1]:
        return float(width_cell)
    return float(np.interp(width_cell, _TRAIN_WIDTH, _TRAIN_PW50))


MIN_CLOCKING_PULSES = 64
"""PW50 uses only the clocking zeros' pulses when there are at least this many (tracks 1 and 3);
else every pulse with full cells on both sides (track 2 has about 35 clocking zeros)."""

MAX_PW50_PULSES = 400
"""At most this many pulses (evenly spread) go into the mean pulse."""


def _mean_pulse(spline, t_pk: np.ndarray, per: np.ndarray, sign: np.ndarray, rate_hz: float,
                iterations: int = 3) -> np.ndarray:
    """Mean of the pulses resampled on ``PULSE_GRID`` (cells) around their peaks, each first
    re-aligned to the mean by least squares (a Gauss–Newton step per iteration on the model
    pulse_i ≈ a_i·m(x − δ_i), over the middle ±:data:`ALIGN_CORE_CELLS` cell), so that the detector's timing jitter
    does not widen the mean."""
    shift = np.zeros(t_pk.size)
    core = np.abs(PULSE_GRID) <= ALIGN_CORE_CELLS
    dx = PULSE_GRID[1] - PULSE_GRID[0]
    for it in range(iterations + 1):
        tt = (t_pk + shift * per)[:, None] + PULSE_GRID[None, :] * per[:, None]
        pulses = spline(tt * rate_hz) * sign[:, None]
        m = pulses.mean(axis=0)
        if it == iterations:
            return m
        dm = np.gradient(m, dx)
        mc, dmc, pc = m[core], dm[core], pulses[:, core]
        a = pc @ mc / (mc @ mc)
        ok = a > ALIGN_MIN_SCALE
        d = np.zeros(t_pk.size)
        d[ok] = -(pc[ok] @ dmc) / (a[ok] * (dmc @ dmc))     # P ≈ a·m − a·δ·m'
        shift = np.clip(shift + d, -ALIGN_MAX_SHIFT_CELLS, ALIGN_MAX_SHIFT_CELLS)
    return m


def measure_pulse_shape(tr, bs, w, rate_hz, timing: Timing, r: Read) -> PulseShape | None:
    """PW50 from the mean of the full-cell-spaced pulses (see :func:`_mean_pulse`), each
    resampled from a cubic spline of the wide-band signal on a grid in cells around its peak
    and sign-corrected: the mean keeps the shape and averages the noise down, so noise does not
    narrow the width.  The width of that mean is then corrected for its neighbours' tails
    (:func:`isolated_pw50_cell`)."""
    ratio = bs.ratio
    if ratio.size < MIN_PW50_INTERVALS:
        return None
    cand = _full_cell_pulses(ratio)
    # prefer the clocking zeros (outside the framed characters) when there are enough
    bi = r.frame.bit_index
    lo, hi = int(bi.min()), int(bi.max())
    bit_of = np.searchsorted(bs.first_transition, cand, side="right") - 1
    outside = (bit_of < lo) | (bit_of > hi)
    if outside.sum() >= MIN_CLOCKING_PULSES:
        cand, bit_of = cand[outside], bit_of[outside]
    if cand.size > MAX_PW50_PULSES:
        pick = np.linspace(0, cand.size - 1, MAX_PW50_PULSES).round().astype(int)
        cand, bit_of = cand[pick], bit_of[pick]
    per = bs.period_s[np.clip(bit_of, 0, bs.period_s.size - 1)]
    t_pk = tr.times_s[cand]
    inside = (((t_pk - SPLINE_REACH_CELLS * per) * rate_hz > 1)
              & ((t_pk + SPLINE_REACH_CELLS * per) * rate_hz < w.size - 2))
    if not inside.any():
        return None
    cand, per, t_pk = cand[inside], per[inside], t_pk[inside]
    a = max(0, int((t_pk.min() - per.max()) * rate_hz) - 4)
    b = min(w.size, int((t_pk.max() + per.max()) * rate_hz) + 5)
    spline = CubicSpline(np.arange(a, b), w[a:b])
    mean = _mean_pulse(spline, t_pk, per, np.sign(tr.amplitude[cand]), rate_hz)
    measured = half_width(PULSE_GRID, mean)
    if not math.isfinite(measured):
        return None
    pw50_cell = isolated_pw50_cell(measured)
    t_cell = float(np.median(per))
    pw50_m = None if timing.density_bpi is None else pw50_cell * METRES_PER_INCH / timing.density_bpi
    # resolution: half-cell-spaced over full-cell-spaced pulse amplitude
    halfs = _half_cell_pulses(ratio)
    fulls = _full_cell_pulses(ratio)
    res = None
    if halfs.size and fulls.size:
        amp = np.abs(w[np.clip(tr.index, 0, w.size - 1)])
        res = float(np.mean(amp[halfs]) / np.mean(amp[fulls]))
    return PulseShape(pw50_cell * t_cell, pw50_cell, measured, pw50_m, int(cand.size), res)
