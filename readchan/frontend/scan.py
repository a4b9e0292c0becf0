"""Compiled scans of the detector: the lobes' peaks in one pass over the samples, and the
peaks' sub-sample times.

Input: a conditioned head signal (float64, capture units), the hysteresis and floor levels;
for the times, the peaks' sample indices.
Output: the index (int64) and sign (int8) of the tallest peak above the floor in every lobe,
the same values as the numpy path of :func:`readchan.frontend.detect._lobe_peaks`; the
parabola-vertex time of each peak (samples), the same as :func:`readchan.frontend.detect._parabolic_times`'s
numpy path.  Both have a numpy path their callers take until they are compiled.

The numpy path makes |x|, masks it, finds its peaks (``scipy.signal.find_peaks``), takes the
minimum and maximum between neighbouring peaks (``reduceat``) and groups the peaks into lobes
(``lexsort``): five passes over the signal and several over the peaks, which on a swipe are a
quarter of the samples.  The scan does the same in one pass over the samples and one over the
peaks; it is compiled (:mod:`readchan._compiled`, ``jit_after=SAMPLE_JIT_AFTER``) only once
enough samples have gone through the numpy path to pay for loading numba.

The signal stays float64 (not float32, which would halve the memory read): which samples are
peaks, and which peak of a lobe is the tallest, depend on comparisons that float32 rounding
would resolve differently from the float64 the rest of the detector uses.
"""

from __future__ import annotations

import numpy as np

from readchan._compiled import SAMPLE_JIT_AFTER, kernel


@kernel(jit_after=SAMPLE_JIT_AFTER)
def lobe_scan(x, h, floor):
    """Index and sign of the tallest peak of every lobe of ``x`` (hysteresis ± ``h``) among the
    peaks of |x| above ``floor`` (|x| ≤ ``floor`` taken as 0).

    Peaks follow ``scipy.signal.find_peaks`` without conditions (``_local_maxima_1d``): a sample
    above its left neighbour, followed by equal samples and then a lower one, is a peak at the
    middle of that plateau (rounded down).  Two neighbouring peaks of one sign are one lobe
    when the signal from the first up to (not including) the second never reaches the
    opposite hysteresis level; a lobe keeps its first peak of largest |x|."""
    # one compiled loop, kept whole (over 60 lines): the peak search and the lobe grouping are
    # written out as scipy's and numpy's steps are, so that each can be checked against them
    n = x.size
    peaks = np.empty(n // 2 + 1, np.int64)
    m = 0
    i = 1
    i_max = n - 1
    prev = abs(x[0]) if n else 0.0                 # |x[i - 1]|, floored, carried along
    if prev <= floor:
        prev = 0.0
    while i < i_max:
        cur = abs(x[i])
        if cur <= floor:
            cur = 0.0
        nxt = cur
        if prev < cur:
            i_ahead = i + 1
            ahead = abs(x[i_ahead])
            if ahead <= floor:
                ahead = 0.0
            while i_ahead < i_max and ahead == cur:
                i_ahead += 1
                ahead = abs(x[i_ahead])
                if ahead <= floor:
                    ahead = 0.0
            if ahead < cur:
                peaks[m] = (i + i_ahead - 1) // 2
                m += 1
                i = i_ahead
                nxt = ahead
        prev = nxt
        i += 1
    keep = np.empty(m, np.int64)
    sgn = np.empty(m, np.int8)
    if m == 0:
        return keep, sgn
    k = 0
    best = peaks[0]
    best_sign = 1 if x[best] > 0 else -1
    for j in range(1, m):
        p, q = peaks[j - 1], peaks[j]
        s_prev = 1 if x[p] > 0 else -1
        s_cur = 1 if x[q] > 0 else -1
        same = False
        if s_prev == s_cur:
            lo = x[p]
            hi = x[p]
            for t in range(p + 1, q):
                v = x[t]
                if v < lo:
                    lo = v
                if v > hi:
                    hi = v
            same = lo > -h if s_cur > 0 else hi < h
        if same:
            if abs(x[q]) > abs(x[best]):
                best = q
        else:
            keep[k] = best
            sgn[k] = best_sign
            k += 1
            best = q
            best_sign = s_cur
    keep[k] = best
    sgn[k] = best_sign
    k += 1
    return keep[:k].copy(), sgn[:k].copy()


@kernel(jit_after=SAMPLE_JIT_AFTER // 10)
def parabola(i, x):
    """The vertex of the parabola through samples i−1, i, i+1 of ``x`` for each index ``i``
    (clipped to 1 … n−2), in samples, moved by at most half a sample; a flat top: ``i``."""
    out = np.empty(i.size)
    hi = x.size - 2
    for k in range(i.size):
        c = min(max(i[k], 1), hi)
        ym, y0, yp = x[c - 1], x[c], x[c + 1]
        den = ym - 2 * y0 + yp
        d = 0.5 * (ym - yp) / den if abs(den) > 1e-300 else 0.0
        out[k] = c + min(max(d, -0.5), 0.5)
    return out
