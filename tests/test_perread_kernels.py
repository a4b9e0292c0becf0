"""The compiled per-read loops of the F2F decoder give the values of their numpy references.

References: ``scipy.ndimage.median_filter`` (size 9, ``mode="nearest"``) for the period trace's
running median; the vectorised numpy assembly of a bit stream's margins and flags (the module
docstring of :mod:`readchan.linecode.f2f` defines them) for the bit fields.
"""

import numpy as np
from scipy.ndimage import median_filter

from readchan.linecode.f2f import _median9


def test_running_median_of_nine_equals_scipy_median_filter_nearest():
    rng = np.random.default_rng(11)
    for n in (9, 10, 17, 200, 613):
        c = 1e-3 * (1.0 + 0.05 * rng.standard_normal(n))
        c[rng.integers(0, n, 3)] = 2.1e-3                 # outliers: missing transitions
        expected = median_filter(c, size=9, mode="nearest")
        assert np.array_equal(_median9.py_func(c), expected)
        assert np.array_equal(_median9.compile_now()(c), expected)


def test_running_median_of_nine_keeps_repeated_values():
    c = np.array([1.0, 1.0, 2.0, 2.0, 2.0, 1.0, 1.0, 3.0, 3.0, 3.0, 1.0])
    assert np.array_equal(_median9.py_func(c), median_filter(c, size=9, mode="nearest"))


def test_compiled_bit_fields_equal_the_numpy_assembly_of_a_stream():
    """The one-loop bit fields (value, margin, flags) equal ``_assemble``'s numpy path, NaN
    ratios included (``numpy.minimum`` propagates NaN)."""
    from readchan.linecode.f2f import _bit_fields

    rng = np.random.default_rng(4)
    r = rng.uniform(0.3, 1.9, 400)
    r[[5, 17]] = np.nan
    kind = rng.choice(np.array([1, 2, 3], np.int8), 200)
    first = np.concatenate(([0], np.cumsum(np.where(kind == 2, 2, 1))[:-1])).astype(np.int64)
    dist = np.abs(r - 0.75) * 4.0
    margin = dist[first]
    two = kind == 2
    margin[two] = np.minimum(margin[two], dist[first[two] + 1])
    margin[kind == 3] = 0.0
    flags = np.where(kind == 3, 1, np.where((kind == 1) & (r[first] > 1.6), 2, 0)).astype(np.uint8)
    for fn in (_bit_fields.py_func, _bit_fields.compile_now()):
        bits, m, f = fn(first, kind, r)
        assert np.array_equal(bits, (kind != 1).astype(np.uint8))
        assert np.array_equal(m, margin, equal_nan=True)
        assert np.array_equal(f, flags)

