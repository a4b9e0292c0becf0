"""The cheaper paths of the card read channel give the values of the paths they stand in for:
the small-array median against ``numpy.median`` (the reference library), the outlier check's
shortcut against its full test, and the front end's conditioning reused for the PW50 against
conditioning the capture a second time."""

from __future__ import annotations

import numpy as np
import pytest

from readchan.io import capture
from readchan.smallstats import median


@pytest.mark.parametrize("n", [1, 2, 3, 4, 7, 64, 501, 1000])
def test_small_median_equals_numpy_median(n):
    rng = np.random.default_rng(n)
    for v in (rng.normal(size=n), np.round(rng.normal(size=n) * 2), np.full(n, 0.3)):
        assert median(v) == float(np.median(v))


def test_small_median_of_values_holding_a_nan_is_nan_as_in_numpy():
    v = np.array([1.0, np.nan, 3.0, 2.0])
    assert np.isnan(median(v)) and np.isnan(np.median(v))


@pytest.mark.parametrize("seed", range(40))
def test_outlier_shortcut_gives_the_full_tests_answer(seed, monkeypatch):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(2, 4000))
    x = rng.normal(0, 1, n) * rng.choice([1e-4, 1.0, 1e4])
    if seed % 3 == 0:
        x[rng.integers(0, n, 3)] *= rng.choice([5e2, 1e3, 2e3, 1e5])
    if seed % 7 == 0:
        x[:] = 0.25
    fast = capture.repair_outliers(x)
    monkeypatch.setattr(capture, "_none_wild", lambda *a: False)
    full = capture.repair_outliers(x)
    assert np.array_equal(fast[0], full[0]) and np.array_equal(fast[1], full[1])


def test_pw50_on_the_front_ends_conditioning_equals_a_second_conditioning(monkeypatch):
    from readchan.channel import DecodeSettings, decode_capture
    from readchan.formats.iso7811 import card
    from readchan.io.capture import load_capture

    cap = load_capture("fixtures/three-track-swipe.wav")
    once = decode_capture(cap, DecodeSettings())
    # never equal: the card rules condition the capture again for the PW50, as before
    monkeypatch.setattr(card, "conditioning_settings", lambda s: None)
    twice = decode_capture(cap, DecodeSettings())
    ev = lambda res: [(r.frame.text, r.track_evidence.pw50_cell) for c in res for r in c.reads]  # noqa: E731
    assert ev(once) == ev(twice) and len(ev(once)) >= 1


def test_window_distances_to_the_start_sentinel_equal_the_window_matrix_count():
    from numpy.lib.stride_tricks import sliding_window_view

    from readchan.formats.iso7811.framing import _hamming_windows

    rng = np.random.default_rng(5)
    for n in (7, 8, 50, 333):
        seq = rng.integers(0, 2, n).astype(np.uint8)
        pattern = rng.integers(0, 2, 7).astype(np.uint8)
        expected = np.count_nonzero(sliding_window_view(seq, 7) != pattern, axis=1)
        assert np.array_equal(_hamming_windows(seq, pattern), expected)
