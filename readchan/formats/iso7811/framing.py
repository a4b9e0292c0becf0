"""Character framing: from a bit stream to sentinel-delimited text, and back.

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

from dataclasses import dataclass
from typing import Iterable

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

from readchan.errors import FormatError, ParameterError
from readchan.formats.iso7811.charset import KNOWN_FORMATS, CharFormat

__all__ = ["Frame", "encode_text", "frame", "frame_auto", "lrc_code"]

#: Start sentinel occurrences tried per direction (real streams are clocking zeros before it).
MAX_STARTS = 4
#: Clocking zeros, in characters, that must border a frame for it to count as bordered.
BORDER_CHARS = 2
#: One-bits tolerated next to a frame, within its burst of bits, as glitches in the zeros.
STRAY_ONES = 2
#: Characters with a parity failure that could be a damaged end sentinel, tried per start.
MAX_SOFT_ENDS = 4


def lrc_code(codes: Iterable[int], fmt: CharFormat) -> int:
    """Longitudinal redundancy check code of a run of characters.

    Parameters
    ----------
    codes : iterable of int
        Data codes from the start sentinel through the end sentinel inclusive.
    fmt : CharFormat
        Their format.

    Returns
    -------
    int
        The XOR of all codes (data bits only; parity bits take no part), ISO/IEC 7811-2.

    Raises
    ------
    FormatError
        If a code does not fit the format's data bits.

    Examples
    --------
    >>> from readchan.formats.iso7811.charset import ISO_BCD
    >>> hex(lrc_code([0x0B, 0x01, 0x0F], ISO_BCD))
    '0x5'
    """
    arr = np.asarray(list(codes) if not isinstance(codes, np.ndarray) else codes, dtype=np.int64)
    if arr.size and (arr.min() < 0 or arr.max() >= fmt.n_codes):
        raise FormatError(f"codes must be 0..{fmt.n_codes - 1:#x} in format {fmt.name!r}")
    return int(np.bitwise_xor.reduce(arr)) if arr.size else 0


def encode_text(text: str, fmt: CharFormat, max_chars: int | None = None) -> np.ndarray:
    """Bits of one track's text as written on the stripe.

    Parameters
    ----------
    text : str
        Track text. The start sentinel is prepended unless `text` begins with it, the end
        sentinel appended unless it ends with it.
    fmt : CharFormat
        Character format.
    max_chars : int, optional
        Most characters allowed, counting sentinels and LRC character; default
        ``fmt.max_chars`` (which may be None: no limit).

    Returns
    -------
    numpy.ndarray
        uint8 array of 0/1, from the first bit of the start sentinel to the last bit of the LRC
        character (or of the end sentinel, for a format without LRC); no clocking zeros.

    Raises
    ------
    FormatError
        If a character cannot be encoded, a sentinel appears inside the data, or the track
        would hold more than `max_chars` characters.

    Examples
    --------
    >>> from readchan.formats.iso7811.charset import ISO_BCD
    >>> encode_text('1', ISO_BCD).reshape(-1, 5).tolist()
    [[1, 1, 0, 1, 0], [1, 0, 0, 0, 0], [1, 1, 1, 1, 1], [1, 0, 1, 0, 1]]
    """
    if not isinstance(text, str):
        raise FormatError(f"text must be a string, got {type(text).__name__}")
    start, end = fmt.start_char, fmt.end_char
    full = text
    if not full.startswith(start):
        full = start + full
    if len(full) < 2 or not full.endswith(end):
        full = full + end
    inner = full[1:-1]
    for sentinel, label in ((start, "start"), (end, "end")):
        where = inner.find(sentinel)
        if where >= 0:
            raise FormatError(
                f"{label} sentinel {sentinel!r} inside the data at character {where + 1} "
                f"(format {fmt.name!r})"
            )
    codes = np.array([fmt.code_of(ch) for ch in full], dtype=np.int64)
    if fmt.lrc:
        codes = np.append(codes, lrc_code(codes, fmt))
    limit = fmt.max_chars if max_chars is None else _checked_limit(max_chars, fmt)
    if limit is not None and codes.size > limit:
        raise FormatError(
            f"text needs {codes.size} characters incl. sentinels"
            f"{' and LRC' if fmt.lrc else ''}, format {fmt.name!r} allows {limit}"
        )
    return _code_bits(codes, fmt).ravel()


@dataclass(frozen=True, eq=False)
class Frame:
    """One framed read of a track.

    Attributes
    ----------
    format : str
        Name of the character format.
    direction : {'forward', 'reverse'}
        ``'forward'`` if the characters run in the order of the given bits, ``'reverse'`` if
        they run backwards through them (a card swiped the other way).
    bit_index : numpy.ndarray
        int64, shape ``(n_chars, bits_per_char)`` where `n_chars` counts the LRC character:
        index into the given bit array of every framed bit, data bits first. For reverse reads
        the indices decrease.
    codes : numpy.ndarray
        int64 codes of the characters start sentinel .. end sentinel, after any correction,
        LRC excluded.
    lrc : int or None
        LRC code as read; None if the format has no LRC or the bits ran out.
    text : str
        Characters of `codes` (start .. end sentinel inclusive, LRC excluded).
    parity_ok : numpy.ndarray
        bool per character incl. the LRC character, as read (before correction).
    lrc_ok : bool
        LRC check after correction; True if the format has no LRC, False if no LRC was read.
    complete : bool
        The end sentinel (and the LRC character, if the format has one) were found.
    corrected : tuple of int
        Indices of corrected characters; the LRC character's index is ``len(text)``.
    revised_bits : tuple of int
        Indices into the given bit array of the bits the correction changed.
    valid : bool
        Complete, starts with the start sentinel, and every parity and the LRC are good after
        correction.
    """

    format: str
    direction: str
    bit_index: np.ndarray
    codes: np.ndarray
    lrc: int | None
    text: str
    parity_ok: np.ndarray
    lrc_ok: bool
    complete: bool
    corrected: tuple[int, ...]
    revised_bits: tuple[int, ...]
    valid: bool

    @property
    def n_parity_errors(self) -> int:
        """Number of characters (LRC character included) that failed parity as read."""
        return int(np.count_nonzero(~self.parity_ok))

    @property
    def n_chars(self) -> int:
        """Number of framed characters, LRC character included."""
        return int(self.parity_ok.size)


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
    limit = fmt.max_chars if max_chars is None else _checked_limit(max_chars, fmt)
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
    for direction, ordered in (("forward", seq), ("reverse", seq[::-1])):
        for start in _start_positions(ordered, fmt):
            for key, found in _frames_from(ordered, int(start), fmt, limit, direction, n):
                if best is None or key > best[0]:
                    best = (key, found)
    return best


# --------------------------------------------------------------------------- private helpers


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


def _checked_limit(max_chars: int, fmt: CharFormat) -> int:
    minimum = 2 + int(fmt.lrc)
    if int(max_chars) != max_chars or max_chars < minimum:
        raise ParameterError(f"`max_chars` must be an integer >= {minimum}, was {max_chars!r}")
    return int(max_chars)


def _code_bits(codes: np.ndarray, fmt: CharFormat) -> np.ndarray:
    """Bits of every code, shape (n, bits_per_char), data LSB first then parity."""
    codes = np.asarray(codes, dtype=np.int64)
    data = ((codes[:, None] >> np.arange(fmt.data_bits)) & 1).astype(np.uint8)
    if fmt.parity == "none":
        return data
    parity = _popcount(codes) & 1
    if fmt.parity == "odd":
        parity ^= 1
    return np.concatenate([data, parity[:, None].astype(np.uint8)], axis=1)


def _popcount(values: np.ndarray) -> np.ndarray:
    values = np.asarray(values, dtype=np.int64)
    count = np.zeros(values.shape, dtype=np.int64)
    for k in range(8):
        count += (values >> k) & 1
    return count


def _start_positions(seq: np.ndarray, fmt: CharFormat) -> np.ndarray:
    """Bit positions worth trying as the first bit of the start sentinel.

    The first occurrence of the start sentinel's pattern anywhere, and the windows that hold
    the first one-bit after the stream's start or after a run of at least ``bits_per_char``
    zeros (for the first :data:`MAX_STARTS` such runs) and are the pattern exactly or, for a
    format that can correct, one bit away from it (a damaged start sentinel).
    """
    width = fmt.bits_per_char
    if seq.size < width:
        return np.zeros(0, dtype=np.int64)
    pattern = fmt.char_bits(fmt.start_code)
    distance = np.count_nonzero(sliding_window_view(seq, width) != pattern, axis=1)
    exact = np.flatnonzero(distance == 0)
    ones = np.flatnonzero(seq)
    if exact.size == 0 and not _can_correct(fmt):
        return exact
    run_ends = np.concatenate([ones[:1], ones[1:][np.diff(ones) > width]])[:MAX_STARTS]
    tolerance = 1 if _can_correct(fmt) else 0
    found = [exact[:1]]
    for first_one in run_ends:
        lo, hi = max(0, first_one - width + 1), min(first_one, distance.size - 1)
        found.append(lo + np.flatnonzero(distance[lo:hi + 1] <= tolerance))
    return np.unique(np.concatenate(found).astype(np.int64))


def _can_correct(fmt: CharFormat) -> bool:
    return fmt.parity != "none" and fmt.lrc


def _frames_from(seq: np.ndarray, start: int, fmt: CharFormat, limit: int | None,
                 direction: str, n_total: int) -> list[tuple[tuple, Frame]]:
    """Every candidate read beginning at bit `start` of `seq` (one per plausible end)."""
    width = fmt.bits_per_char
    n_avail = (seq.size - start) // width
    k = n_avail if limit is None else min(n_avail, limit)
    block = seq[start:start + k * width].reshape(k, width)
    weights = np.int64(1) << np.arange(fmt.data_bits, dtype=np.int64)
    codes = block[:, :fmt.data_bits].astype(np.int64) @ weights
    if fmt.parity == "none":
        par_ok = np.ones(k, dtype=bool)
    else:
        par_ok = block[:, fmt.data_bits] == _code_bits(codes, fmt)[:, fmt.data_bits]
    pos = start + np.arange(k * width, dtype=np.int64).reshape(k, width)
    index = pos if direction == "forward" else (n_total - 1) - pos

    clean = np.flatnonzero(((codes == fmt.end_code) & par_ok)[1:]) + 1
    stop = int(clean[0]) if clean.size else k
    near_end = (~par_ok[1:stop]) & (_popcount(codes[1:stop] ^ fmt.end_code) <= 1)
    ends = list(np.flatnonzero(near_end)[:MAX_SOFT_ENDS] + 1)
    if clean.size:
        ends.append(stop)
    out = [_build(seq, start, codes, par_ok, index, fmt, direction, int(e)) for e in ends]
    if not clean.size and k:
        out.append(_build(seq, start, codes, par_ok, index, fmt, direction, None))
    return out


def _build(seq: np.ndarray, start: int, codes: np.ndarray, par_ok: np.ndarray,
           index: np.ndarray, fmt: CharFormat, direction: str,
           end: int | None) -> tuple[tuple, Frame]:
    """One candidate read whose end sentinel is character `end` (None: no end found).

    Returns the candidate's ranking key with it (see :func:`frame`, Notes).
    """
    k = codes.size
    if end is None:
        n_data = k
        width = fmt.bits_per_char
        while n_data > 1 and not seq[start + (n_data - 1) * width:start + n_data * width].any():
            n_data -= 1  # clocking zeros after a read that never found its end
        n_rows, framed, lrc_read = n_data, False, None
    elif fmt.lrc and end + 1 >= k:
        n_data = n_rows = end + 1
        framed, lrc_read = False, None
    else:
        n_data = end + 1
        n_rows = n_data + int(fmt.lrc)
        framed = True
        lrc_read = int(codes[end + 1]) if fmt.lrc else None

    data = codes[:n_data].copy()
    parity_ok = par_ok[:n_rows].copy()
    corrected: tuple[int, ...] = ()
    revised: tuple[int, ...] = ()
    parity_good = bool(parity_ok.all())
    syndrome = (lrc_code(data, fmt) ^ lrc_read) if lrc_read is not None else None

    border = BORDER_CHARS * fmt.bits_per_char
    stop_bit = start + n_rows * fmt.bits_per_char
    zeros_before = not seq[max(0, start - border):start].any()
    zeros_after = framed and not seq[stop_bit:stop_bit + border].any()

    fails = np.flatnonzero(~parity_ok)
    if framed and _can_correct(fmt) and fails.size == 1:
        c = int(fails[0])
        fix = _single_error_fix(c, int(syndrome), data, lrc_read, fmt)
        if not (zeros_before and zeros_after):
            # A correction is believed only where clocking zeros border the frame: elsewhere a
            # damaged data character (the track going on) explains the bits as well.
            fix = None
        if fix is not None:
            new_code, bit = fix
            lrc_fixed = lrc_read
            if c < n_data:
                data[c] = new_code
            else:
                lrc_fixed = new_code  # Frame.lrc stays the LRC as read
            syndrome = lrc_code(data, fmt) ^ lrc_fixed
            corrected = (c,)
            revised = (int(index[c, bit]),)
            parity_good = True

    complete = bool(framed and data.size >= 2 and data[-1] == fmt.end_code)
    starts = bool(data[0] == fmt.start_code)
    lrc_ok = True if not fmt.lrc else (syndrome == 0 if syndrome is not None else False)
    # Valid also needs clocking zeros after the LRC: data going on past it means the end
    # sentinel was a damaged data character and the "LRC" after it agreed by chance.
    valid = bool(complete and starts and parity_good and lrc_ok and zeros_after)
    text = "".join(chr(int(c) + fmt.offset) for c in data)
    found = Frame(
        format=fmt.name,
        direction=direction,
        bit_index=_frozen(index[:n_rows]),
        codes=_frozen(data),
        lrc=lrc_read,
        text=text,
        parity_ok=_frozen(parity_ok),
        lrc_ok=bool(lrc_ok),
        complete=complete,
        corrected=corrected,
        revised_bits=revised,
        valid=valid,
    )
    # Clocking zeros count only beside a sentinel that is really there.
    bordered = int(zeros_before and starts) + int(zeros_after and complete)
    few_stray = _stray_ones(seq, start, stop_bit, border, STRAY_ONES) <= STRAY_ONES
    key = (valid and bordered == 2, few_stray, bordered, valid, complete,
           -found.n_parity_errors / max(n_rows, 1), n_rows)
    return key, found


def _single_error_fix(c: int, syndrome: int, data: np.ndarray, lrc_read: int,
                      fmt: CharFormat) -> tuple[int, int] | None:
    """New code of character `c` and the bit (column) to flip, or None if not correctable.

    The only parity failure is character `c`; `syndrome` is the XOR of all data codes incl. the
    LRC character. A zero syndrome blames `c`'s parity bit, a one-bit syndrome one data bit.
    """
    n_data = data.size
    old = int(data[c]) if c < n_data else int(lrc_read)
    if c == n_data and syndrome != 0:
        # A damaged LRC character whose data disagrees with the data characters: a burst in a
        # data character that kept its parity explains it as well as one bad LRC bit, and
        # "correcting" the LRC would then vouch for wrong data. Leave the read invalid.
        return None
    if syndrome == 0:
        new, bit = old, fmt.data_bits
    elif syndrome & (syndrome - 1) == 0:
        new, bit = old ^ syndrome, syndrome.bit_length() - 1
    else:
        return None
    # A correction must leave the sentinels where the framing found them.
    if c == 0 and new != fmt.start_code:
        return None
    if c == n_data - 1 and new != fmt.end_code:
        return None
    if 0 < c < n_data - 1 and new in (fmt.start_code, fmt.end_code):
        return None
    return new, bit


def _stray_ones(seq: np.ndarray, lo: int, hi: int, gap: int, cap: int) -> int:
    """One-bits outside ``seq[lo:hi]`` but joined to it by runs of fewer than `gap` zeros.

    Counting stops above `cap`.
    """
    count = 0
    edge, pos = lo, lo - 1  # walk left
    while pos >= 0 and edge - pos <= gap and count <= cap:
        if seq[pos]:
            count += 1
            edge = pos
        pos -= 1
    edge, pos = hi - 1, hi  # walk right
    while pos < seq.size and pos - edge <= gap and count <= cap:
        if seq[pos]:
            count += 1
            edge = pos
        pos += 1
    return count


def _frozen(arr: np.ndarray) -> np.ndarray:
    arr = np.ascontiguousarray(arr)
    arr.setflags(write=False)
    return arr


def missing_end(fr: Frame) -> str:
    """What an incomplete read lacks, for its LRC verdict: ``"no LRC"`` when the text ends in
    the end sentinel (the LRC character after it was not read), else ``"no end sentinel"``.
    Custom formats are judged by their end character when their name is a known format's."""
    from readchan.formats.iso7811.charset import KNOWN_FORMATS

    fmt = next((x for x in KNOWN_FORMATS if x.name == fr.format), None)
    if fmt is not None and fmt.lrc and len(fr.text) >= 2 and fr.text.endswith(fmt.end_char):
        return "no LRC"
    return "no end sentinel"
