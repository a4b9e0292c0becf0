"""Characters as bits on the stripe: codes with their parity bits, the LRC, a text's bit stream.

Input: text or character codes and a :class:`~readchan.formats.iso7811.charformat.CharFormat`.
Output: the bits as written (uint8 0/1, data least significant bit first, then parity; the
LRC character after the end sentinel; ISO/IEC 7811-2), or the LRC code.
"""

from __future__ import annotations

from typing import Iterable

import numpy as np

from readchan.errors import FormatError, ParameterError
from readchan.formats.iso7811.charformat import CharFormat


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
    limit = fmt.max_chars if max_chars is None else checked_limit(max_chars, fmt)
    if limit is not None and codes.size > limit:
        raise FormatError(
            f"text needs {codes.size} characters incl. sentinels"
            f"{' and LRC' if fmt.lrc else ''}, format {fmt.name!r} allows {limit}"
        )
    return code_bits(codes, fmt).ravel()


def checked_limit(max_chars: int, fmt: CharFormat) -> int:
    minimum = 2 + int(fmt.lrc)
    if int(max_chars) != max_chars or max_chars < minimum:
        raise ParameterError(f"`max_chars` must be an integer >= {minimum}, was {max_chars!r}")
    return int(max_chars)


def code_bits(codes: np.ndarray, fmt: CharFormat) -> np.ndarray:
    """Bits of every code, shape (n, bits_per_char), data LSB first then parity."""
    codes = np.asarray(codes, dtype=np.int64)
    data = ((codes[:, None] >> np.arange(fmt.data_bits)) & 1).astype(np.uint8)
    if fmt.parity == "none":
        return data
    parity = popcount(codes) & 1
    if fmt.parity == "odd":
        parity ^= 1
    return np.concatenate([data, parity[:, None].astype(np.uint8)], axis=1)


_POPCOUNT = np.array([bin(v).count("1") for v in range(256)], dtype=np.int64)
"""Set bits of every byte value, looked up by :func:`popcount`."""


def popcount(values: np.ndarray) -> np.ndarray:
    """Set bits among the low 8 bits of each value (int64; two's complement for negatives)."""
    return _POPCOUNT[np.asarray(values, dtype=np.int64) & 0xFF]


def can_correct(fmt: CharFormat) -> bool:
    return fmt.parity != "none" and fmt.lrc
