"""A compiled zero-phase IIR pass: ``scipy.signal.sosfiltfilt`` (odd extension, initial states
from ``sosfilt_zi``) in one forward and one backward loop, without its full-length copies.

Input: second-order sections (``butter(..., output="sos")``), a float64 signal, the pad length.
Output: the filtered signal, float64, the same values as ``scipy.signal.sosfiltfilt`` (the
section recursion in scipy's order of operations, direct form II transposed; no fastmath).

``sosfiltfilt`` builds the odd extension, copies it for the forward pass, reverses and copies
again for the backward pass, and the caller copies the reversed result to make it contiguous:
five full-length arrays and as many passes besides the two filter loops.  Here the extension is
read on the fly, the forward pass writes one array and the backward pass the result.  Compiled
only once enough samples have gone through scipy's path (:mod:`readchan._compiled`,
``jit_after=SAMPLE_JIT_AFTER``), so short captures never load numba for it.

float64 throughout, not float32: the refinement's 2nd-order high-pass has its poles near the
unit circle, where float32's rounding recirculates in the recursion, and the result must equal
scipy's float64 pass (the decoder's reads must not change; :mod:`readchan.frontend.condition`).
"""

from __future__ import annotations

import numpy as np
from scipy import signal as sps

from readchan._compiled import SAMPLE_JIT_AFTER, kernel


def sosfiltfilt(sos: np.ndarray, x: np.ndarray) -> np.ndarray:
    """``scipy.signal.sosfiltfilt(sos, x)`` (default odd padding) for a 1-D float64 ``x``:
    scipy's own while little has been filtered, the compiled pass after (same values)."""
    sos = np.ascontiguousarray(sos, dtype=float)
    x = np.ascontiguousarray(x, dtype=float)
    ntaps = 2 * sos.shape[0] + 1 - min(int(np.sum(sos[:, 2] == 0)), int(np.sum(sos[:, 5] == 0)))
    edge = 3 * ntaps                                   # scipy's default pad length
    if x.ndim != 1 or x.size <= edge or not np.all(sos[:, 3] == 1.0) or not _zero_phase.ready(x.size):
        return np.ascontiguousarray(sps.sosfiltfilt(sos, x))
    return _zero_phase(sos, x, edge, np.ascontiguousarray(sps.sosfilt_zi(sos)))


@kernel(jit_after=SAMPLE_JIT_AFTER)
def _zero_phase(sos, x, edge, zi):
    """Forward then backward through the sections ``sos`` over ``x`` extended by ``edge``
    samples of odd reflection at either end (2·x[0] − x[edge − k] before, 2·x[n−1] − x[n−2−k]
    after), each pass started from ``zi`` times its first input, as ``sosfiltfilt`` does."""
    n = x.size
    ns = sos.shape[0]
    m = n + 2 * edge
    y = np.empty(m)
    z0 = np.empty(ns)
    z1 = np.empty(ns)
    first = 2.0 * x[0] - x[edge] if edge > 0 else x[0]
    for s in range(ns):
        z0[s] = zi[s, 0] * first
        z1[s] = zi[s, 1] * first
    for k in range(m):
        if k < edge:
            xc = 2.0 * x[0] - x[edge - k]
        elif k < edge + n:
            xc = x[k - edge]
        else:
            xc = 2.0 * x[n - 1] - x[n - 2 - (k - edge - n)]
        for s in range(ns):
            xn = sos[s, 0] * xc + z0[s]
            z0[s] = sos[s, 1] * xc - sos[s, 4] * xn + z1[s]
            z1[s] = sos[s, 2] * xc - sos[s, 5] * xn
            xc = xn
        y[k] = xc
    last = y[m - 1]
    for s in range(ns):
        z0[s] = zi[s, 0] * last
        z1[s] = zi[s, 1] * last
    out = np.empty(n)
    for k in range(m - 1, -1, -1):
        xc = y[k]
        for s in range(ns):
            xn = sos[s, 0] * xc + z0[s]
            z0[s] = sos[s, 1] * xc - sos[s, 4] * xn + z1[s]
            z1[s] = sos[s, 2] * xc - sos[s, 5] * xn
            xc = xn
        if edge <= k < edge + n:
            out[k - edge] = xc
    return out
