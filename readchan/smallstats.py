"""Order statistics of the small per-read arrays (a read's intervals, pulses, bits), without
``numpy.median``'s per-call overhead, which on a few hundred values costs several times the
selection itself.

Input: a 1-D float array (a few to a few thousand values).
Output: its median as a float, the same value ``numpy.median`` gives: the middle value after
``numpy.partition`` (introselect), or for an even count the mean of the two middle values
computed as numpy does, (a + b) / 2 in double precision; NaN when any value is NaN.
"""

from __future__ import annotations

import numpy as np


def median(v: np.ndarray) -> float:
    """The median of the 1-D array ``v`` (non-empty), equal to ``float(numpy.median(v))``."""
    a = np.asarray(v, dtype=float)
    n = a.size
    if n == 0:
        raise ValueError("median of an empty array")
    h = n // 2
    if n == 1:
        return float(a[0])
    p = np.partition(a, (h - 1, h, n - 1) if n % 2 == 0 else (h, n - 1))
    if p[n - 1] != p[n - 1]:            # a NaN sorts last: numpy's median is NaN then
        return float("nan")
    if n % 2:
        return float(p[h])
    return (float(p[h - 1]) + float(p[h])) / 2.0
