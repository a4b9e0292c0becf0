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
    widths = []
    for j in pick.tolist():
        i = int(tr.index[j])
        s = 1.0 if x[i] >= 0 else -1.0
        half = 0.5 * s * x[i]
        lo, hi = max(0, i - 4096), min(x.size, i + 4097)
        below_l = np.flatnonzero(s * x[lo:i] < half)
        below_r = np.flatnonzero(s * x[i:hi] < half)
        if below_l.size and below_r.size:
            a0 = lo + int(below_l[-1])                 # last sample below half, left of the peak
            b0 = i + int(below_r[0])                   # first sample below half, right of it
            ya, ya1 = s * x[a0], s * x[a0 + 1]
            yb0, yb = s * x[b0 - 1], s * x[b0]
            left = a0 + (half - ya) / (ya1 - ya) if ya1 != ya else a0 + 0.5
            right = b0 - 1 + (yb0 - half) / (yb0 - yb) if yb0 != yb else b0 - 0.5
            widths.append(right - left)
    return float(np.median(widths)) / tr.rate_hz if widths else None


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
