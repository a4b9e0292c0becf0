"""Band limits matched to the pulses a first detection found: their intervals and widths.

Input: :class:`readchan.frontend.detect.Transitions` (and the signal they were found on).
Output: the intervals between a recording's pulses (s), the pulses' half-amplitude width (s),
and the low-pass and high-pass corners (Hz) the refined front end uses
(:func:`readchan.frontend.head.head_front_end`).
"""

from __future__ import annotations

import numpy as np

from readchan.frontend.detect import Transitions


def pulse_intervals(tr: Transitions) -> np.ndarray:
    """Intervals (s) between neighbouring transitions that are both pulses of a recording:
    |amplitude| at least 0.3 × the 90th percentile, so noise peaks in quiet stretches, which
    the detector also returns, do not set the filters (intervals over 20 ms are gaps)."""
    if len(tr) < 2:
        return np.zeros(0)
    a = np.abs(tr.amplitude)
    strong = a >= 0.3 * np.percentile(a, 90)
    d = np.diff(tr.times_s)
    d = d[strong[1:] & strong[:-1]]
    return d[(d > 0) & (d < 0.02)]


def pulse_width_s(x: np.ndarray, tr: Transitions, *, n: int = 200) -> float | None:
    """Median half-amplitude width (s) of up to ``n`` of the strongest pulses of ``tr`` in ``x``:
    the crossings of half of each peak on either side, linearly interpolated between samples
    (a pulse two or three samples wide is otherwise measured ±1 sample, ±30 %)."""
    if len(tr) < 8:
        return None
    a = np.abs(tr.amplitude)
    pick = np.argsort(a)[::-1][: min(n, len(tr))]
    idx = tr.index[pick].astype(np.int64)
    sign = np.where(x[idx] >= 0, 1.0, -1.0)
    half = 0.5 * sign * x[idx]
    # the nearest sample below half on either side, first within NEAR samples of the peak for
    # all the pulses at once, then (for the few not found there) within ±4096 one by one
    k = np.arange(-NEAR, NEAR + 1)
    win = np.clip(idx[:, None] + k, 0, x.size - 1)
    inside = (idx[:, None] + k >= 0) & (idx[:, None] + k < x.size)
    below = (sign[:, None] * x[win] < half[:, None]) & inside
    left_part, right_part = below[:, :NEAR][:, ::-1], below[:, NEAR:]
    a0 = np.where(left_part.any(axis=1), idx - 1 - np.argmax(left_part, axis=1), -1)
    b0 = np.where(right_part.any(axis=1), idx + np.argmax(right_part, axis=1), -1)
    widths = []
    for j in range(idx.size):
        i, s_, h = int(idx[j]), float(sign[j]), float(half[j])
        l0, r0 = int(a0[j]), int(b0[j])
        if l0 < 0 or r0 < 0:
            lo, hi = max(0, i - 4096), min(x.size, i + 4097)
            below_l = np.flatnonzero(s_ * x[lo:i] < h)
            below_r = np.flatnonzero(s_ * x[i:hi] < h)
            if not (below_l.size and below_r.size):
                continue
            l0, r0 = lo + int(below_l[-1]), i + int(below_r[0])
        ya, ya1 = s_ * x[l0], s_ * x[l0 + 1]
        yb0, yb = s_ * x[r0 - 1], s_ * x[r0]
        left = l0 + (h - ya) / (ya1 - ya) if ya1 != ya else l0 + 0.5
        right = r0 - 1 + (yb0 - h) / (yb0 - yb) if yb0 != yb else r0 - 0.5
        widths.append(right - left)
    return float(np.median(widths)) / tr.rate_hz if widths else None


NEAR = 48
"""Samples either side of a peak searched for its half-amplitude crossings all at once (a pulse
of PW50 up to about 90 samples); wider pulses are searched one by one."""


def auto_lowpass_hz(tr: Transitions, rate_hz: float, *, factor: float = 1.0) -> float | None:
    """Low-pass corner (Hz) matched to the pulse rate: ``factor`` / the 10th-percentile interval.

    The shortest F2F interval is a half cell h; a pulse's spectrum lies mostly below 1/h for the
    PW50 of a working channel (PW50 ≲ 0.6 of a cell), so a corner at 1/h keeps the pulses and
    drops the noise above them (common practice).  None when there are too few transitions or
    the corner would sit near Nyquist anyway.
    """
    d = pulse_intervals(tr)
    if d.size < 16:
        return None
    f = factor / float(np.percentile(d, 10))
    return f if f < 0.4 * rate_hz else None


def auto_highpass_hz(tr: Transitions, *, factor: float = 0.15) -> float | None:
    """High-pass corner (Hz) matched to the pulse rate: ``factor`` / the 90th-percentile interval.

    The head signal's content lies mostly at and above half the bit rate (clocking zeros:
    pulses one cell apart), but data that repeats every n bits puts lines at bit rate / n
    (a run of one BCD character: every 5 bits), so the corner stays at 0.15 × the slowest
    bit rate, below those, and still removes most of what lies under the pulses: mains hum at
    the faster speeds, baseline wander, AC-coupling droop (common practice; a corner at 0.3 ×
    was measured to break runs of BCD zeros at 10 cm/s).
    """
    d = pulse_intervals(tr)
    if d.size < 16:
        return None
    return factor / float(np.percentile(d, 90))
