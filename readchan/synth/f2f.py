"""F2F (Aiken biphase) encoding: bits to flux-transition positions.

ISO/IEC 7811-2 F2F: a flux transition at every bit-cell boundary and one more in the
middle of the cell for a 1.  A stream of n bits therefore has n + 1 boundary transitions
(the last closes the final cell) plus one per 1 bit.
"""

from __future__ import annotations

import numpy as np


def f2f_positions(bits: np.ndarray, cell_m: float) -> np.ndarray:
    """Transition positions in metres from the first boundary, for ``bits`` with cell ``cell_m``.

    Returns a sorted float64 array: boundaries at k·cell_m (k = 0..n) and mid-cell
    transitions at (k + ½)·cell_m for each 1 bit.
    """
    b = np.asarray(bits, dtype=np.uint8).ravel()
    n = b.size
    boundaries = np.arange(n + 1, dtype=float)
    mids = np.flatnonzero(b == 1).astype(float) + 0.5
    return np.sort(np.concatenate((boundaries, mids))) * cell_m
