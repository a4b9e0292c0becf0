"""Character framing: from a bit stream to sentinel-delimited text, and back.

Input: recovered bits (0/1, in the order they were read) and a
:class:`~readchan.formats.iso7811.charformat.CharFormat` (or several).  Output: the best
:class:`~readchan.formats.iso7811.candidate.Frame` (re-exported here), or None.  Writing is
:mod:`readchan.formats.iso7811.codes`'s (:func:`encode_text`, :func:`lrc_code`, re-exported
here); one candidate read is built and ranked by :mod:`readchan.formats.iso7811.candidate`.

Writing (:func:`encode_text`): every character is its code's data bits, least significant bit
first, then its parity bit; the characters run from the start sentinel to the end sentinel and
are followed by the LRC character, whose data bits are the XOR of the data bits of every
character from the start sentinel through the end sentinel and which carries its own parity
bit (ISO/IEC 7811-2).

Reading (:func:`frame`): find the start sentinel's bit pattern, cut the bits that follow into
characters until the end sentinel, take the LRC character, then check every parity bit and
the LRC. Both bit orders are tried, so a card swiped backwards reads the same.

Single-error correction
-----------------------
Parity and LRC together locate one flipped bit: the parity failure names the character and the
LRC syndrome (XOR of the data codes of all characters incl. the LRC character) names the data
bit. When exactly one character (the LRC character included) fails parity:

* a syndrome with exactly one bit set flips that data bit of that character;
* a zero syndrome means the parity bit itself was flipped: the data stand as read.

Nothing is corrected with two or more parity failures, nor when the correction would create or
destroy a sentinel. Every correction is reported in :attr:`Frame.corrected` and
:attr:`Frame.revised_bits`.
"""

from __future__ import annotations

from functools import lru_cache
from typing import Iterable, NamedTuple

import numpy as np

from readchan.errors import ParameterError
from readchan.formats.iso7811.candidate import BORDER_CHARS, STRAY_ONES, Frame, build_candidate
from readchan.formats.iso7811.charset import KNOWN_FORMATS, CharFormat
from readchan.formats.iso7811.codes import can_correct, checked_limit, code_bits, encode_text, lrc_code, popcount

__all__ = ["BORDER_CHARS", "Frame", "STRAY_ONES", "encode_text", "frame", "frame_auto", "lrc_code", "missing_end"]


#: Start sentinel occurrences tried per direction (real streams are clocking zeros before it).
MAX_STARTS = 4


#: Characters with a parity failure that could be a damaged end sentinel, tried per start.
MAX_SOFT_ENDS = 4


def frame(bits: np.ndarray, fmt: CharFormat, *, max_chars: int | None = None) -> Frame | None:
    """Find and decode the characters of one format in a bit stream.

    Parameters
    ----------
    bits : array_like
        1-D array of 0/1 bits (bool or integer), in the order they were recovered.
    fmt : CharFormat
        Character format to frame.
    max_chars : int, optional
        Most characters to read, LRC character included; default ``fmt.max_chars``.

    Returns
    -------
    Frame or None
        The best read, valid or not; None if the start sentinel occurs in neither direction.

    Raises
    ------
    ParameterError
        If `bits` is not a 1-D array of zeros and ones, or `max_chars` is too small.

    Notes
    -----
    Starts tried, in each direction: the first occurrence of the start sentinel's bit pattern
    (data and parity), and the windows holding the first one-bit after each of the first
    :data:`MAX_STARTS` runs of clocking zeros that match the pattern exactly or, for a format
    that can correct, but for one bit (a damaged start sentinel). From each start, characters
    are read up to the first end sentinel with good parity; up to :data:`MAX_SOFT_ENDS`
    characters before it that fail parity and are at most one bit from the end sentinel are
    tried as the end too (a damaged end sentinel). Reading stops at `max_chars` or when the
    bits run out (``complete=False``; all-zero characters at the end are then dropped as
    clocking zeros).

    A single error is corrected (module docstring) only when at least
    ``BORDER_CHARS * bits_per_char`` zero bits (or the ends of the stream) border the frame on
    both sides: elsewhere a damaged data character with the track going on explains the
    bits as well.

    Candidates are ranked by, in order:

    1. valid and bordered by clocking zeros on both sides;
    2. at most :data:`STRAY_ONES` one-bits next to the frame, not separated from it by
       clocking zeros (the frame explains its burst of bits);
    3. sides (0 to 2) bordered by clocking zeros beside a sentinel that is present;
    4. valid; 5. complete; 6. fewer parity failures per character; 7. more characters.

    The first best (forward before reverse) is returned. Ranking on the surrounding zeros
    before validity matters: an ISO BCD track read backwards can hold a short valid frame
    (an LRC of ':' reads backwards as ';', '?' is 11111 both ways).
    """
    seq = _as_bits(bits)
    limit = fmt.max_chars if max_chars is None else checked_limit(max_chars, fmt)
    best = _best(seq, fmt, limit)
    return None if best is None else best[1]


def frame_auto(bits: np.ndarray, formats: Iterable[CharFormat] = KNOWN_FORMATS) -> Frame | None:
    """Frame the bits in every format of `formats` and keep the best read.

    Parameters
    ----------
    bits : array_like
        1-D array of 0/1 bits.
    formats : iterable of CharFormat
        Formats to try; default the ISO formats.

    Returns
    -------
    Frame or None
        The best read by the ranking of :func:`frame` (Notes), or None if no format's start
        sentinel occurs.
    """
    seq = _as_bits(bits)
    best: tuple[tuple, Frame] | None = None
    for fmt in formats:
        found = _best(seq, fmt, fmt.max_chars)
        if found is not None and (best is None or found[0] > best[0]):
            best = found
        if best is not None and best[0][:3] == (True, True, 2):
            break   # valid, bordered by clocking zeros, no stray bits: no other format frames so
    return None if best is None else best[1]


def _best(seq: np.ndarray, fmt: CharFormat, limit: int | None) -> tuple[tuple, Frame] | None:
    """Best (key, frame) over both directions and every start, or None."""
    best = None
    n = seq.size
    tab = _tables(fmt)
    for direction, ordered in (("forward", seq), ("reverse", seq[::-1])):
        win = _window_codes(ordered, tab)
        for start in _start_positions(ordered, fmt, win):
            for key, found in _frames_from(ordered, int(start), fmt, limit, direction, n, win):
                if best is None or key > best[0]:
                    best = (key, found)
    return best


class _Tables(NamedTuple):
    """Per-format constants of the framing: window width (bits), the start sentinel's window
    code, the set bits of every window code, the parity bit each data code needs."""

    width: int
    start_window: int
    ones: np.ndarray
    weights: np.ndarray
    parity: np.ndarray | None


@lru_cache(maxsize=64)
def _tables(fmt: CharFormat) -> _Tables:
    width = fmt.bits_per_char
    pattern = fmt.char_bits(fmt.start_code)
    start_window = sum(int(b) << k for k, b in enumerate(pattern))
    ones = np.array([bin(v).count("1") for v in range(1 << width)], dtype=np.int64)
    weights = (np.int64(1) << np.arange(width, dtype=np.int64))[::-1].copy()
    parity = None if fmt.parity == "none" else \
        code_bits(np.arange(fmt.n_codes, dtype=np.int64), fmt)[:, fmt.data_bits].copy()
    return _Tables(width, start_window, ones, weights, parity)


def _window_codes(seq: np.ndarray, tab: _Tables) -> np.ndarray:
    """Every window of ``width`` consecutive bits of ``seq`` as one code, its first bit least
    significant (a character's data code, LSB first, with its parity bit above): one
    convolution with the bit weights instead of a window matrix (int64)."""
    if seq.size < tab.width:
        return np.zeros(0, np.int64)
    return np.convolve(seq.astype(np.int64), tab.weights, mode="valid")


def _as_bits(bits) -> np.ndarray:
    arr = np.asarray(bits)
    if arr.ndim != 1:
        raise ParameterError(f"bits must be a 1-D array, had shape {arr.shape}")
    if arr.dtype == bool:
        return arr.astype(np.uint8)
    if arr.size == 0:
        return arr.astype(np.uint8)
    if not np.issubdtype(arr.dtype, np.integer):
        if not np.issubdtype(arr.dtype, np.floating) or not np.all(np.isin(arr, (0.0, 1.0))):
            raise ParameterError(f"bits must be zeros and ones, dtype was {arr.dtype}")
    elif arr.min() < 0 or arr.max() > 1:
        raise ParameterError(
            f"bits must be zeros and ones, values ranged {arr.min()}..{arr.max()}"
        )
    return arr.astype(np.uint8)


def _start_positions(seq: np.ndarray, fmt: CharFormat, win: np.ndarray | None = None) -> np.ndarray:
    """Bit positions worth trying as the first bit of the start sentinel.

    The first occurrence of the start sentinel's pattern anywhere, and the windows that hold
    the first one-bit after the stream's start or after a run of at least ``bits_per_char``
    zeros (for the first :data:`MAX_STARTS` such runs) and are the pattern exactly or, for a
    format that can correct, one bit away from it (a damaged start sentinel).  ``win``: the
    window codes of ``seq`` (:func:`_window_codes`), when the caller has them.
    """
    tab = _tables(fmt)
    width = tab.width
    if seq.size < width:
        return np.zeros(0, dtype=np.int64)
    if win is None:
        win = _window_codes(seq, tab)
    distance = tab.ones[win ^ tab.start_window]
    exact = (distance == 0).nonzero()[0]
    correct = can_correct(fmt)
    if exact.size == 0 and not correct:
        return exact
    ones = seq.nonzero()[0]
    run_ends = np.concatenate([ones[:1], ones[1:][np.diff(ones) > width]])[:MAX_STARTS].tolist()
    tolerance = 1 if correct else 0
    found = [exact[:1]]
    for first_one in run_ends:
        lo, hi = max(0, first_one - width + 1), min(first_one, distance.size - 1)
        found.append(lo + (distance[lo:hi + 1] <= tolerance).nonzero()[0])
    return np.unique(np.concatenate(found).astype(np.int64))


def _hamming_windows(seq: np.ndarray, pattern: np.ndarray) -> np.ndarray:
    """Bits differing from ``pattern`` in every window of ``len(pattern)`` consecutive bits of
    ``seq`` (int64): the count of ``sliding_window_view(seq, width) != pattern`` per window,
    summed one pattern bit at a time (a few slices instead of a window matrix)."""
    width = int(pattern.size)
    n = seq.size - width + 1
    distance = np.zeros(n, np.int64)
    for k in range(width):
        distance += seq[k:k + n] != pattern[k]
    return distance


def _frames_from(seq: np.ndarray, start: int, fmt: CharFormat, limit: int | None,
                 direction: str, n_total: int, win: np.ndarray | None = None) -> list[tuple[tuple, Frame]]:
    """Every candidate read beginning at bit `start` of `seq` (one per plausible end); ``win``:
    the window codes of ``seq`` (:func:`_window_codes`), when the caller has them."""
    tab = _tables(fmt)
    width = tab.width
    n_avail = (seq.size - start) // width
    k = n_avail if limit is None else min(n_avail, limit)
    if win is None:
        win = _window_codes(seq, tab)
    chars = win[start:start + k * width:width]          # each character's bits as one code
    if tab.parity is None:
        codes = chars
        par_ok = np.ones(k, dtype=bool)
    else:
        codes = chars & (fmt.n_codes - 1)
        par_ok = (chars >> fmt.data_bits) == tab.parity[codes]
    pos = start + np.arange(k * width, dtype=np.int64).reshape(k, width)
    index = pos if direction == "forward" else (n_total - 1) - pos

    clean = ((codes == fmt.end_code) & par_ok)[1:].nonzero()[0] + 1
    stop = int(clean[0]) if clean.size else k
    near_end = (~par_ok[1:stop]) & (popcount(codes[1:stop] ^ fmt.end_code) <= 1)
    ends = list(near_end.nonzero()[0][:MAX_SOFT_ENDS] + 1)
    if clean.size:
        ends.append(stop)
    out = [build_candidate(seq, start, codes, par_ok, index, fmt, direction, int(e)) for e in ends]
    if not clean.size and k:
        out.append(build_candidate(seq, start, codes, par_ok, index, fmt, direction, None))
    return out


def missing_end(fr: Frame) -> str:
    """What an incomplete read lacks, for its LRC verdict: ``"no LRC"`` when the text ends in
    the end sentinel (the LRC character after it was not read), else ``"no end sentinel"``.
    Custom formats are judged by their end character when their name is a known format's."""
    from readchan.formats.iso7811.charset import KNOWN_FORMATS

    fmt = next((x for x in KNOWN_FORMATS if x.name == fr.format), None)
    if fmt is not None and fmt.lrc and len(fr.text) >= 2 and fr.text.endswith(fmt.end_char):
        return "no LRC"
    return "no end sentinel"
