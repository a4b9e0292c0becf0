"""Stage 3, segmentation: split a channel's transitions into reads (swipes).

Input: :class:`readchan.frontend.detect.Transitions`.
Output: :class:`Segment` s (index ranges into the transitions, start and end times in s).

A capture may hold several swipes separated by quiet stretches.  A new read starts where
the gap between transitions exceeds ``gap_factor`` times the local typical interval (the
running median of the neighbouring intervals) and ``min_gap_s``, or exceeds ``max_gap_s``
outright (no card has cells that long: 20 ms is a 75 bpi cell at 1.7 cm/s); a stretch with fewer than
``min_transitions`` transitions is noise, not a read.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.ndimage import median_filter

from readchan.frontend.detect import Transitions


@dataclass(frozen=True)
class Segment:
    """One read's span: transitions ``start:stop`` of the channel, from ``start_s`` to ``end_s``."""

    start: int
    stop: int
    start_s: float
    end_s: float

    @property
    def n_transitions(self) -> int:
        return self.stop - self.start


def segment(tr: Transitions, *, gap_factor: float = 12.0, min_gap_s: float = 0.005,
            max_gap_s: float = 0.02, min_transitions: int = 24) -> list[Segment]:
    """Split ``tr`` into reads; see the module docstring."""
    n = len(tr)
    if n < min_transitions:
        return []
    d = np.diff(tr.times_s)
    typical = median_filter(d, size=31, mode="nearest")
    # compare each gap with the typical interval on both sides of it
    left = np.concatenate(([typical[0]], typical[:-1]))
    right = np.concatenate((typical[1:], [typical[-1]]))
    ref = np.minimum(left, right)
    breaks = np.flatnonzero(((d > gap_factor * ref) & (d > min_gap_s)) | (d > max_gap_s)) + 1
    edges = np.concatenate(([0], breaks, [n]))
    out = []
    for a, b in zip(edges[:-1], edges[1:]):
        if b - a >= min_transitions:
            out.append(Segment(int(a), int(b), float(tr.times_s[a]), float(tr.times_s[b - 1])))
    return out
