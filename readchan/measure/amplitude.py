"""Pulse amplitudes of a read and the channel's clipped samples.

Input: a read's transitions (:class:`readchan.frontend.detect.Transitions`), the wide-band
signal (numpy array, capture units), the sample rate in Hz, the :class:`readchan.channel.Read`
and the channel's clipped-sample mask (:func:`clipped_samples`).  Output: an :class:`Amplitude`
(|peak| per transition and its statistics in capture units, asymmetry in %, clipped fraction).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.ndimage import median_filter

from readchan.channel import Read


CLIP_TOL = 1e-4
"""A sample within this fraction of the channel's span from its largest or smallest value sits
on a flat top (our choice: below one step of a 13-bit converter)."""

CLIP_RUN = 3
"""Samples in a run at an extreme that make a flat top (clipping); one or two are a peak
(common practice)."""

SMOOTH_TRANSITIONS = 31
"""Transitions in the running median of the amplitude along the swipe (our choice: a single
weak or strong pulse does not move it)."""


@dataclass(frozen=True)
class Amplitude:
    """Pulse amplitudes of one read (capture units).

    Attributes
    ----------
    t_s : time of each transition, seconds.
    peak : |peak| of each transition on the wide-band signal.
    smooth : running median of ``peak`` over :data:`SMOOTH_TRANSITIONS` transitions (amplitude along the swipe).
    median_peak, min_peak, max_peak : median, smallest and largest |peak|.
    positive_median, negative_median : medians of the positive and negative peaks' magnitudes.
    asymmetry_pct : 100·(P − N)/(P + N).
    clipped_fraction : fraction of the read's samples in flat tops at the channel's extremes.
    """

    t_s: np.ndarray
    peak: np.ndarray
    smooth: np.ndarray
    median_peak: float
    min_peak: float
    max_peak: float
    positive_median: float
    negative_median: float
    asymmetry_pct: float
    clipped_fraction: float


def clipped_samples(x: np.ndarray) -> np.ndarray:
    """Per sample: True inside a run of ≥ CLIP_RUN samples within CLIP_TOL·span of an extreme."""
    hi, lo = float(x.max()), float(x.min())
    tol = CLIP_TOL * (hi - lo)
    if not tol > 0:
        return np.zeros(x.size, bool)
    out = np.zeros(x.size, bool)
    for at in (np.abs(x - hi) <= tol, np.abs(x - lo) <= tol):
        d = np.diff(np.concatenate(([0], at.view(np.int8), [0])))
        starts, stops = np.flatnonzero(d == 1), np.flatnonzero(d == -1)
        for a, b in zip(starts, stops):
            if b - a >= CLIP_RUN:
                out[a:b] = True
    return out


def measure_amplitude(tr, w, rate_hz, r: Read, clipped) -> Amplitude:
    idx = np.clip(tr.index, 0, w.size - 1)
    sgn = np.sign(tr.amplitude)
    peak = np.abs(w[idx])
    smooth = median_filter(peak, size=min(SMOOTH_TRANSITIONS, peak.size), mode="nearest") if peak.size else peak
    pos = np.abs(w[idx[sgn > 0]])
    neg = np.abs(w[idx[sgn < 0]])
    p = float(np.median(pos)) if pos.size else 0.0
    q = float(np.median(neg)) if neg.size else 0.0
    asym = 100.0 * (p - q) / (p + q) if p + q > 0 else 0.0
    a = max(0, int(r.start_s * rate_hz))
    b = min(w.size, int(r.end_s * rate_hz) + 1)
    clip = float(np.mean(clipped[a:b])) if clipped is not None and b > a else 0.0
    return Amplitude(tr.times_s.copy(), peak, smooth, float(np.median(peak)), float(peak.min()), float(peak.max()),
                     p, q, float(asym), clip)
