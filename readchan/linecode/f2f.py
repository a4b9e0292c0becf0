"""Stage 4, the F2F line code: bits ↔ flux-transition positions (encode, :func:`f2f_positions`) and
transition times → bits with the timing kept for every bit (decode, :func:`recover_bits`).

Input (decode): transition times in seconds (:class:`readchan.frontend.detect.Transitions`).
Output: :class:`BitStream` (bits with their start times, periods and margins).

F2F (Aiken biphase, ISO/IEC 7811-2) has a transition at every bit-cell boundary and one more
mid-cell for a 1, so each interval between transitions is either a full cell (a 0) or a half
cell (half of a 1).

Model and loop:

* The initial bit period T₀ is learned from the leading clocking zeros: the median of the first
  intervals when they agree (within ±25 %) with each other, else a high percentile of the first
  intervals, which are full cells more often than not.
* Each interval Δ is normalised by the running period estimate T: r = Δ/T.  The decision
  boundary sits half-way between a half cell (r = ½) and a full cell (r = 1), at r = ¾.
  r ≥ ¾ is a 0; r < ¾ starts a 1, whose second half is the next interval.
* Decision margin of a bit: the distance of its interval(s) from the boundary, in units of the
  ideal distance (¼ cell): ``margin = |r − ¾| / ¼``, the smallest over the bit's intervals.
  1 is a perfect interval, 0 is on the boundary.
* Tracking loop: a first-order loop on the measured cell c (Δ for a 0, Δ₁ + Δ₂ for a 1),
  ``T ← T + α·(c − T)``.  It follows a speed change with a lag of (change per bit)/α cells and
  averages jitter over about 1/α bits (a standard first-order estimator; common practice).
  α defaults to 0.25.

A *reference* mode takes the true bit period at every instant instead of tracking it; the
accuracy benchmark uses it as the bound a timing loop can approach.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy.ndimage import median_filter

from readchan._compiled import kernel
from readchan.smallstats import median

BOUNDARY = 0.75
"""Decision boundary between a half cell and a full cell, in bit periods."""

BIT_LONE_HALF = np.uint8(1)
"""A half-cell interval not followed by a second half: a spurious or a missing transition."""
BIT_LONG = np.uint8(2)
"""An interval longer than 1.6 bit periods: transitions are missing."""


@dataclass(frozen=True)
class BitStream:
    """Recovered bits of one read, in time order.

    Attributes
    ----------
    bits : uint8 0/1.
    start_s : time of the transition that starts each bit cell, seconds.
    period_s : the bit-period estimate each bit was decided against, seconds.
    margin : decision margin per bit (see the module docstring), dimensionless.
    flags : per-bit bit mask of ``BIT_*`` (bit flags; transition flags are the detector's ``TR_*``).
    first_transition : index (within the read's transitions) of each bit's first transition.
    ratio : every interval normalised to the period estimate, r = Δ/T (one per interval).
    """

    bits: np.ndarray
    start_s: np.ndarray
    period_s: np.ndarray
    margin: np.ndarray
    flags: np.ndarray
    first_transition: np.ndarray
    ratio: np.ndarray

    def __len__(self) -> int:
        return int(self.bits.size)

    @property
    def regular(self) -> np.ndarray:
        """Per interval: True when it lies within ±0.15 of a half cell or ±0.2 of a full cell."""
        r = self.ratio
        return (np.abs(r - 0.5) < 0.15) | (np.abs(r - 1.0) < 0.2)

    def regular_span(self, run: int = 8) -> tuple[int, int] | None:
        """Transition indices (a, b) spanning from the first to the last run of ``run``
        regular intervals: the part of a read that is recording, not the noise around it."""
        ok = self.regular.astype(np.int64)
        if ok.size < run:
            return None
        win = np.convolve(ok, np.ones(run, np.int64), mode="valid") == run
        hits = win.nonzero()[0]
        if hits.size == 0:
            return None
        return int(hits[0]), int(hits[-1] + run + 1)

    def between(self, a: int, b: int) -> "BitStream":
        """The bits that lie within transitions ``a:b``, renumbered from transition ``a``."""
        keep = (self.first_transition >= a) & (self.first_transition < b - 1)
        if keep.any():
            last = int(keep.nonzero()[0][-1])
            width = 2 if self.bits[last] == 1 and not self.flags[last] & BIT_LONE_HALF else 1
            if self.first_transition[last] + width > b - 1:
                keep[last] = False
        return BitStream(self.bits[keep], self.start_s[keep], self.period_s[keep], self.margin[keep],
                         self.flags[keep], self.first_transition[keep] - a, self.ratio[a:b - 1])

    @property
    def regularity(self) -> float:
        """Fraction of intervals within ±0.15 of a half cell or ±0.2 of a full cell.

        Close to 1 for an F2F recording, far lower for noise, whose intervals spread
        continuously (common practice for telling a swipe from noise).
        """
        return float(np.mean(self.regular)) if self.ratio.size else 0.0


def initial_period(intervals_s: np.ndarray, n: int = 16) -> float:
    """Initial bit period in seconds from the leading clocking zeros (see module docstring)."""
    head = intervals_s[1: n + 1] if intervals_s.size > n + 1 else intervals_s
    if head.size == 0:
        return float("nan")
    m = median(head)
    if np.mean(np.abs(head / m - 1) < 0.25) >= 0.75:
        return m
    return float(np.percentile(intervals_s[: 4 * n], 80))


def recover_bits(times_s: np.ndarray, *, loop_gain: float = 0.25,
                 period_at: Callable[[np.ndarray], np.ndarray] | None = None,
                 method: str = "sequence") -> BitStream:
    """Recover F2F bits from transition times ``times_s`` (seconds, increasing).

    Parameters
    ----------
    times_s : transition times of one read, seconds.
    loop_gain : α of the first-order period-tracking loop (0 < α ≤ 1).
    period_at : optional reference: a function giving the true bit period (s) at given
        times; when given, the loop is bypassed.
    method : ``"sequence"`` (dynamic-programming parse, the default) or ``"loop"``.
    """
    loop = _recover_loop(times_s, loop_gain=loop_gain, period_at=period_at)
    if method == "loop" or len(loop) < 4:
        return loop
    t = np.asarray(times_s, dtype=float)
    if period_at is not None:
        return _parse(t, period_at(t))
    first = _parse(t, _period_trace(t, loop))
    if np.array_equal(first.bits, loop.bits) and np.array_equal(first.first_transition, loop.first_transition):
        return first          # the parse kept the loop's cells: a second pass would find the same
    return _parse(t, _period_trace(t, first))


def _period_trace(t: np.ndarray, bs: BitStream) -> np.ndarray:
    """Bit period (s) at every transition: the cells of ``bs`` median-filtered over 9 bits."""
    ends = np.concatenate((bs.start_s[1:], [t[-1]]))
    cell = ends - bs.start_s
    ok = (bs.flags == 0) & (cell > 0)
    if ok.sum() < 4:
        return np.interp(t, bs.start_s, bs.period_s)
    good = cell[ok]
    if good.size >= 9 and _median9.ready(good.size):        # the same values, compiled
        c = _median9(good)
    else:
        c = median_filter(good, size=min(9, int(ok.sum())), mode="nearest")
    mid = 0.5 * (bs.start_s[ok] + ends[ok])
    return np.interp(t, mid, c)


@kernel
def _median9(c: np.ndarray) -> np.ndarray:
    """Running median over 9 values of ``c``, the ends repeated: the values of
    ``scipy.ndimage.median_filter(c, size=9, mode="nearest")`` (a median of an odd count is
    one of the values, so any exact selection gives the same) in one compiled loop."""
    n = c.size
    out = np.empty(n)
    win = np.empty(9)
    for k in range(9):                            # the first window, insertion-sorted
        v = c[min(max(k - 4, 0), n - 1)]
        m = k
        while m > 0 and win[m - 1] > v:
            win[m] = win[m - 1]
            m -= 1
        win[m] = v
    out[0] = win[4]
    for i in range(1, n):                         # slide: drop the value leaving, insert the one entering
        old = c[max(i - 5, 0)]
        v = c[min(i + 4, n - 1)]
        m = 0
        while win[m] != old:
            m += 1
        while m < 8 and win[m + 1] < v:
            win[m] = win[m + 1]
            m += 1
        while m > 0 and win[m - 1] > v:
            win[m] = win[m - 1]
            m -= 1
        win[m] = v
        out[i] = win[4]
    return out


def _assemble(t: np.ndarray, first: list[int], kind: list[int], r: np.ndarray, period: np.ndarray) -> BitStream:
    """A BitStream from per-bit decisions: ``first`` interval index and ``kind`` (1: a 0 bit of
    one interval, 2: a 1 bit of two, 3: a lone half), vectorised over the bits."""
    first_a = np.asarray(first, np.int64)
    kind_a = np.asarray(kind, np.int8)
    if first_a.size and _bit_fields.ready(first_a.size):     # the same, compiled in one loop
        bits, margin, flags = _bit_fields(first_a, kind_a, r)
        return BitStream(bits, t[first_a], np.asarray(period, float), margin, flags, first_a, r)
    dist = np.abs(r - BOUNDARY) * 4.0
    margin = dist[first_a]
    two = (kind_a == 2).nonzero()[0]
    margin[two] = np.minimum(margin[two], dist[first_a[two] + 1])
    lone = kind_a == 3
    margin[lone] = 0.0
    flags = np.where(lone, BIT_LONE_HALF,
                     np.where((kind_a == 1) & (r[first_a] > 1.6), BIT_LONG, 0)).astype(np.uint8)
    return BitStream((kind_a != 1).astype(np.uint8), t[first_a], np.asarray(period, float), margin, flags,
                     first_a, r)


@kernel
def _bit_fields(first: np.ndarray, kind: np.ndarray, r: np.ndarray):
    """Per bit, its value (uint8), margin and flags (uint8) from its first interval ``first``
    and ``kind`` and the intervals' ratios ``r``: :func:`_assemble`'s numpy path in one loop
    (the same IEEE operations; ``numpy.minimum``'s NaN rule kept)."""
    n = first.size
    bits = np.empty(n, np.uint8)
    margin = np.empty(n)
    flags = np.zeros(n, np.uint8)
    for k in range(n):
        i = first[k]
        kd = kind[k]
        a = abs(r[i] - BOUNDARY) * 4.0
        bits[k] = 0 if kd == 1 else 1
        if kd == 3:
            a = 0.0
            flags[k] = BIT_LONE_HALF
        elif kd == 2:
            b = abs(r[i + 1] - BOUNDARY) * 4.0
            if a == a and not a <= b:
                a = b
        elif r[i] > 1.6:
            flags[k] = BIT_LONG
        margin[k] = a
    return bits, margin, flags


def _parse(t: np.ndarray, period: np.ndarray) -> BitStream:
    """Viterbi parse of the intervals of ``t`` into F2F bits against the period trace."""
    r = np.diff(t) / period[:-1]
    if r.size == 0:
        return _assemble(t, np.zeros(0, np.int64), np.zeros(0, np.int8), r, period[:0])
    # move costs, vectorised; the recursion (:func:`_viterbi`) only adds and compares them
    zero = (r - 1.0) ** 2
    lone_cost = 0.5 + (r - 0.5) ** 2
    pair = np.empty(r.size)
    pair[0] = np.inf
    pair[1:] = ((r[:-1] + r[1:] - 1.0) ** 2) + 0.5 * ((r[:-1] - 0.5) ** 2 + (r[1:] - 0.5) ** 2)
    kinds = _viterbi(zero, lone_cost, pair)
    widths = np.where(kinds == 2, 2, 1)
    first = np.concatenate(([0], np.cumsum(widths)[:-1])).astype(np.int64)
    return _assemble(t, first, kinds, r, period[first])


@kernel
def _viterbi(zero: np.ndarray, lone_cost: np.ndarray, pair: np.ndarray) -> np.ndarray:
    """The least-cost sequence of moves over the intervals (1: a 0 bit of one interval; 2: a 1
    bit of two; 3: a lone half), from the per-interval costs; int8 per bit, in time order."""
    n = zero.size
    move = np.zeros(n + 1, np.int8)
    prev2, prev1 = np.inf, 0.0
    for i in range(1, n + 1):
        a = prev1 + zero[i - 1]
        b = prev1 + lone_cost[i - 1]
        c = prev2 + pair[i - 1]
        if a <= b and a <= c:
            prev2, prev1 = prev1, a
            move[i] = 1
        elif c <= b:
            prev2, prev1 = prev1, c
            move[i] = 2
        else:
            prev2, prev1 = prev1, b
            move[i] = 3
    kinds = np.empty(n, np.int8)
    k = 0
    i = n
    while i > 0:
        mv = move[i]
        kinds[k] = mv
        k += 1
        i -= 2 if mv == 2 else 1
    return kinds[:k][::-1].copy()


def _recover_loop(times_s: np.ndarray, *, loop_gain: float = 0.25,
                  period_at: Callable[[np.ndarray], np.ndarray] | None = None) -> BitStream:
    """The first-order tracking loop with threshold decisions (see the module docstring)."""
    t = np.asarray(times_s, dtype=float)
    d = np.diff(t)
    if d.size == 0:
        z = np.zeros(0)
        return BitStream(np.zeros(0, np.uint8), z, z, z, np.zeros(0, np.uint8), np.zeros(0, np.int64), z)
    ref = np.asarray(period_at(t[:-1]), float) if period_at is not None else np.zeros(0)
    T = initial_period(d) if period_at is None else float(ref[0])
    first, kind, period, ratio = _track(d, float(T), ref, float(loop_gain))
    return _assemble(t, first, kind, ratio, period)


@kernel
def _track(d: np.ndarray, T: float, ref: np.ndarray, loop_gain: float):
    """The loop over the intervals ``d`` (s) from the period ``T`` (s); with a reference period
    per interval in ``ref`` (non-empty), no tracking.  Returns each bit's first interval, kind
    (1: a 0 bit, 2: a 1 bit, 3: a lone half) and period (s), and every interval's ratio."""
    nb = d.size
    first = np.empty(nb, np.int64)
    kind = np.empty(nb, np.int8)
    period = np.empty(nb)
    ratio = np.zeros(nb)
    tracking = ref.size == 0
    k = 0
    i = 0
    while i < nb:
        if not tracking:
            T = ref[i]
        di = d[i]
        r1 = di / T
        ratio[i] = r1
        first[k] = i
        period[k] = T
        if r1 >= BOUNDARY or i + 1 >= nb:
            kind[k] = 1
            cell = di
            i += 1
        else:
            r2 = d[i + 1] / T
            ratio[i + 1] = r2
            if r2 >= BOUNDARY:
                kind[k] = 3
                cell = 2 * di
                i += 1
            else:
                kind[k] = 2
                cell = di + d[i + 1]
                i += 2
        k += 1
        if tracking and cell < 1.6 * T:
            T += loop_gain * (cell - T)
    return first[:k].copy(), kind[:k].copy(), period[:k].copy(), ratio


# -- encoding: the same code run forward, for the synthesizers --------------------------------


def cell_positions(bits: np.ndarray) -> np.ndarray:
    """Transition positions, in bit cells from the first boundary, of ``bits`` in F2F (biphase
    mark): boundaries at k (k = 0..n, the last closes the final cell) and mid-cell transitions
    at k + ½ for each 1 bit (ISO/IEC 7811-2; SMPTE ST 12-1 for LTC).  Sorted float64."""
    b = np.asarray(bits, dtype=np.uint8).ravel()
    return np.sort(np.concatenate((np.arange(b.size + 1, dtype=float), (b == 1).nonzero()[0] + 0.5)))


def f2f_positions(bits: np.ndarray, cell_m: float) -> np.ndarray:
    """Transition positions in metres from the first boundary, for ``bits`` with cell ``cell_m``
    (m): :func:`cell_positions` scaled by the cell length."""
    return cell_positions(bits) * cell_m
