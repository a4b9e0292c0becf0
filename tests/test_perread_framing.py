"""The framing's window codes give the same characters and start positions as a window matrix.

Reference: the character layout of ISO/IEC 7811-2 (data bits least significant first, then the
parity bit), read here straight from ``numpy.lib.stride_tricks.sliding_window_view``.
"""

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

from readchan.formats.iso7811.charset import ISO_ALPHA, ISO_BCD
from readchan.formats.iso7811.codes import code_bits
from readchan.formats.iso7811.framing import _start_positions, _tables, _window_codes, encode_text


def test_window_codes_are_each_windows_bits_least_significant_first():
    rng = np.random.default_rng(3)
    for fmt in (ISO_ALPHA, ISO_BCD):
        seq = rng.integers(0, 2, 301).astype(np.uint8)
        weights = np.int64(1) << np.arange(fmt.bits_per_char, dtype=np.int64)
        expected = sliding_window_view(seq, fmt.bits_per_char).astype(np.int64) @ weights
        assert np.array_equal(_window_codes(seq, _tables(fmt)), expected)


def test_parity_table_is_the_parity_bit_iso_writes_for_every_code():
    for fmt in (ISO_ALPHA, ISO_BCD):
        codes = np.arange(fmt.n_codes)
        assert np.array_equal(_tables(fmt).parity, code_bits(codes, fmt)[:, fmt.data_bits])


def _reference_starts(seq, fmt):
    """The start search written over a window matrix (the definition in framing's docstring)."""
    width = fmt.bits_per_char
    distance = np.count_nonzero(sliding_window_view(seq, width) != fmt.char_bits(fmt.start_code), axis=1)
    exact = np.flatnonzero(distance == 0)
    ones = np.flatnonzero(seq)
    run_ends = np.concatenate([ones[:1], ones[1:][np.diff(ones) > width]])[:4]
    found = [exact[:1]]
    for first_one in run_ends:
        lo, hi = max(0, first_one - width + 1), min(first_one, distance.size - 1)
        found.append(lo + np.flatnonzero(distance[lo:hi + 1] <= 1))
    return np.unique(np.concatenate(found).astype(np.int64))


def test_start_positions_match_the_window_matrix_search_with_damaged_sentinels():
    rng = np.random.default_rng(8)
    for fmt, text in ((ISO_ALPHA, "%INVENTED^TEST?"), (ISO_BCD, ";1234567890?")):
        clean = np.concatenate((np.zeros(20, np.uint8), encode_text(text, fmt), np.zeros(20, np.uint8)))
        for _ in range(40):
            seq = clean.copy()
            seq[rng.integers(0, seq.size, rng.integers(0, 4))] ^= 1
            assert np.array_equal(_start_positions(seq, fmt), _reference_starts(seq, fmt))
