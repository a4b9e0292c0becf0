"""One candidate read of a track: the characters from a start to an end, checked, corrected, ranked.

Input: the bits in reading order (uint8 0/1), the first bit of a start sentinel, the codes and
parity results of the characters that follow, the character taken as the end sentinel and the
:class:`~readchan.formats.iso7811.charformat.CharFormat`.  Output: a :class:`Frame` (text,
parity, LRC, single-error correction) and its ranking key (see
:func:`readchan.formats.iso7811.framing.frame`, Notes).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from readchan.formats.iso7811.charformat import CharFormat
from readchan.formats.iso7811.codes import can_correct


#: Clocking zeros, in characters, that must border a frame for it to count as bordered.
BORDER_CHARS = 2


#: One-bits tolerated next to a frame, within its burst of bits, as glitches in the zeros.
STRAY_ONES = 2


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


def build_candidate(seq: np.ndarray, start: int, codes: np.ndarray, par_ok: np.ndarray,
                    index: np.ndarray, fmt: CharFormat, direction: str,
                    end: int | None) -> tuple[tuple, Frame]:
    """One candidate read whose end sentinel is character `end` (None: no end found).

    Returns the candidate's ranking key with it (see :func:`readchan.formats.iso7811.framing.frame`,
    Notes).
    """
    n_data, n_rows, framed, lrc_read = _extent(seq, start, codes, fmt, end)
    data = codes[:n_data].copy()
    parity_ok = par_ok[:n_rows].copy()
    syndrome = (_xor(data) ^ lrc_read) if lrc_read is not None else None

    border = BORDER_CHARS * fmt.bits_per_char
    stop_bit = start + n_rows * fmt.bits_per_char
    zeros_before = not seq[max(0, start - border):start].any()
    zeros_after = framed and not seq[stop_bit:stop_bit + border].any()
    corrected, revised, parity_good, syndrome = _correct(data, parity_ok, syndrome, lrc_read, index, fmt,
                                                         framed, bool(zeros_before and zeros_after))

    complete = bool(framed and data.size >= 2 and data[-1] == fmt.end_code)
    starts = bool(data[0] == fmt.start_code)
    lrc_ok = True if not fmt.lrc else (syndrome == 0 if syndrome is not None else False)
    # Valid also needs clocking zeros after the LRC: data going on past it means the end
    # sentinel was a damaged data character and the "LRC" after it agreed by chance.
    valid = bool(complete and starts and parity_good and lrc_ok and zeros_after)
    chars = data + fmt.offset
    # one byte per character (Latin-1 is chr() below 256), else character by character
    text = (chars.astype(np.uint8).tobytes().decode("latin-1") if chars.size and 0 <= chars.min() and chars.max() < 256
            else "".join(chr(int(c)) for c in chars))
    found = Frame(
        format=fmt.name,
        direction=direction,
        bit_index=frozen(index[:n_rows]),
        codes=frozen(data),
        lrc=lrc_read,
        text=text,
        parity_ok=frozen(parity_ok),
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


def _extent(seq: np.ndarray, start: int, codes: np.ndarray, fmt: CharFormat,
            end: int | None) -> tuple[int, int, bool, int | None]:
    """How much of the characters from `start` a candidate ending at character `end` frames:
    (data characters, rows incl. the LRC character, framed?, LRC code as read or None)."""
    k = codes.size
    if end is None:
        n_data = k
        width = fmt.bits_per_char
        while n_data > 1 and not seq[start + (n_data - 1) * width:start + n_data * width].any():
            n_data -= 1  # clocking zeros after a read that never found its end
        return n_data, n_data, False, None
    if fmt.lrc and end + 1 >= k:
        return end + 1, end + 1, False, None
    n_data = end + 1
    return n_data, n_data + int(fmt.lrc), True, int(codes[end + 1]) if fmt.lrc else None


def _correct(data: np.ndarray, parity_ok: np.ndarray, syndrome: int | None, lrc_read: int | None,
             index: np.ndarray, fmt: CharFormat, framed: bool,
             bordered: bool) -> tuple[tuple[int, ...], tuple[int, ...], bool, int | None]:
    """The single-error correction of a candidate (module docstring of
    :mod:`readchan.formats.iso7811.framing`), applied to `data` in place.  Returns (corrected
    characters, revised bit indices, parity good after correction, LRC syndrome after it)."""
    corrected: tuple[int, ...] = ()
    revised: tuple[int, ...] = ()
    parity_good = bool(parity_ok.all())
    n_data = data.size
    fails = (~parity_ok).nonzero()[0]
    if framed and can_correct(fmt) and fails.size == 1:
        c = int(fails[0])
        fix = _single_error_fix(c, int(syndrome), data, lrc_read, fmt)
        if not bordered:
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
            syndrome = _xor(data) ^ lrc_fixed
            corrected = (c,)
            revised = (int(index[c, bit]),)
            parity_good = True
    return corrected, revised, parity_good, syndrome


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


def _xor(codes: np.ndarray) -> int:
    """The XOR of int64 character codes read from bits (so within the format's data bits):
    :func:`readchan.formats.iso7811.codes.lrc_code` without its range check."""
    return int(np.bitwise_xor.reduce(codes)) if codes.size else 0


def frozen(arr: np.ndarray) -> np.ndarray:
    arr = np.ascontiguousarray(arr)
    arr.setflags(write=False)
    return arr
