"""The compiled running median of the bit-period trace gives scipy's median filter's values.

Reference: ``scipy.ndimage.median_filter`` (size 9, ``mode="nearest"``), the implementation the
period trace used before the compiled loop.
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
