"""A character format of the magnetic stripe: how a text character becomes a group of bits.

Input: the format's fields (data bits, parity, code offset, sentinel codes, LRC, length
limit).  Output: a checked :class:`CharFormat` that maps characters to codes and codes to
bits (data least significant bit first, then the parity bit; ISO/IEC 7811-2), and
:func:`parity_bit`.  The ISO formats and track layouts are :mod:`readchan.formats.iso7811.charset`'s.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from readchan.errors import FormatError


PARITIES = ("odd", "even", "none")

_MAX_CODEPOINT = 0x10FFFF

_SURROGATES = (0xD800, 0xDFFF)


def _check_format_fields(fmt: CharFormat) -> None:
    """Raise FormatError if a field of `fmt` is out of range."""
    where = f"format {fmt.name!r}"
    if not isinstance(fmt.name, str) or not fmt.name:
        raise FormatError(f"format name must be a non-empty string, was {fmt.name!r}")
    if not isinstance(fmt.data_bits, int) or not 4 <= fmt.data_bits <= 8:
        raise FormatError(f"{where}: data bits must be 4..8, was {fmt.data_bits!r}")
    if fmt.parity not in PARITIES:
        raise FormatError(f"{where}: parity must be one of odd, even, none, was {fmt.parity!r}")
    n_codes = 1 << fmt.data_bits
    if not isinstance(fmt.offset, int) or not 0 <= fmt.offset <= _MAX_CODEPOINT - n_codes + 1:
        raise FormatError(f"{where}: offset {fmt.offset!r} puts characters outside Unicode")
    last = fmt.offset + n_codes - 1
    if fmt.offset <= _SURROGATES[1] and last >= _SURROGATES[0]:
        # surrogate code points are not characters: no text holding them can be printed or written
        raise FormatError(
            f"{where}: offset {fmt.offset:#x} maps codes to {fmt.offset:#x}..{last:#x}, which overlaps the "
            f"surrogate code points {_SURROGATES[0]:#x}..{_SURROGATES[1]:#x} (not characters); choose an offset "
            f"from 0 to {_SURROGATES[0] - n_codes:#x} or from {_SURROGATES[1] + 1:#x} to "
            f"{_MAX_CODEPOINT - n_codes + 1:#x}"
        )
    for label, code in (("start", fmt.start_code), ("end", fmt.end_code),
                        ("sep", fmt.separator_code)):
        if label == "sep" and code is None:
            continue
        if not isinstance(code, int) or not 0 <= code < n_codes:
            raise FormatError(
                f"{where}: {label} code {code!r} does not fit {fmt.data_bits} data bits "
                f"(0..{n_codes - 1:#x})"
            )
    if fmt.start_code == fmt.end_code:
        raise FormatError(
            f"{where}: start and end codes must differ, both were {fmt.start_code:#x}"
        )
    if fmt.start_code == 0 and fmt.parity != "odd":
        raise FormatError(
            f"{where}: start code 0 with {fmt.parity} parity is all zeros, "
            "indistinguishable from clocking zeros"
        )
    if fmt.separator_code in (fmt.start_code, fmt.end_code):
        raise FormatError(f"{where}: separator code {fmt.separator_code:#x} equals a sentinel")
    if not isinstance(fmt.lrc, bool):
        raise FormatError(f"{where}: lrc must be True or False, was {fmt.lrc!r}")
    minimum = 2 + int(fmt.lrc)
    if fmt.max_chars is not None and (not isinstance(fmt.max_chars, int)
                                      or fmt.max_chars < minimum):
        raise FormatError(
            f"{where}: max characters must be at least {minimum} (sentinels"
            f"{' and LRC' if fmt.lrc else ''}), was {fmt.max_chars!r}"
        )


@dataclass(frozen=True)
class CharFormat:
    """How characters are coded into bits on one track.

    Parameters
    ----------
    name : str
        Name of the format: ``'iso-alpha'``, ``'iso-bcd'``, or a user's name.
    data_bits : int
        Number of data bits per character, 4 to 8.
    parity : {'odd', 'even', 'none'}
        Parity bit appended after the data bits. With ``'odd'`` the character (data and parity)
        holds an odd number of ones.
    offset : int
        ``code = ord(char) - offset`` and ``char = chr(code + offset)``.
    start_code, end_code : int
        Codes of the start and end sentinels; they must differ.
    separator_code : int or None
        Code of the field separator, or None if the format has none.
    lrc : bool
        Whether a longitudinal redundancy check character follows the end sentinel.
    max_chars : int or None
        Most characters on a track, counting sentinels and the LRC character (None: no limit).

    Raises
    ------
    FormatError
        If a field is out of range (bits outside 4..8, a code that does not fit the data bits,
        equal start and end sentinels, ...).
    """

    name: str
    data_bits: int
    parity: str
    offset: int
    start_code: int
    end_code: int
    separator_code: int | None
    lrc: bool
    max_chars: int | None

    def __post_init__(self) -> None:
        _check_format_fields(self)

    @property
    def bits_per_char(self) -> int:
        """Bits in one character on the stripe: data bits plus the parity bit, if any."""
        return self.data_bits + (0 if self.parity == "none" else 1)

    @property
    def n_codes(self) -> int:
        """Number of codes the data bits can hold, ``2 ** data_bits``."""
        return 1 << self.data_bits

    @property
    def start_char(self) -> str:
        """The start sentinel as a text character."""
        return self.char_of(self.start_code)

    @property
    def end_char(self) -> str:
        """The end sentinel as a text character."""
        return self.char_of(self.end_code)

    def char_bits(self, code: int) -> np.ndarray:
        """Bits of one character as written on the stripe.

        Parameters
        ----------
        code : int
            Character code, ``0 <= code < 2 ** data_bits``.

        Returns
        -------
        numpy.ndarray
            uint8 array of shape ``(bits_per_char,)``: the data bits least significant first,
            then the parity bit (if the format has one).

        Raises
        ------
        FormatError
            If `code` does not fit the data bits.

        Examples
        --------
        >>> ISO_BCD.char_bits(0x0B).tolist()
        [1, 1, 0, 1, 0]
        """
        code = self._checked_code(code)
        data = (code >> np.arange(self.data_bits)) & 1
        if self.parity == "none":
            return data.astype(np.uint8)
        return np.append(data, parity_bit(code, self)).astype(np.uint8)

    def code_of(self, ch: str) -> int:
        """Code of the text character `ch`.

        Raises
        ------
        FormatError
            If `ch` is not a single character the format can encode.
        """
        if not isinstance(ch, str) or len(ch) != 1:
            raise FormatError(f"format {self.name!r} encodes single characters, got {ch!r}")
        code = ord(ch) - self.offset
        if not 0 <= code < self.n_codes:
            raise FormatError(
                f"character {ch!r} cannot be encoded in format {self.name!r} "
                f"(it encodes {self._charset_description()})"
            )
        return code

    def char_of(self, code: int) -> str:
        """Text character of `code`.

        Raises
        ------
        FormatError
            If `code` does not fit the data bits.
        """
        return chr(self._checked_code(code) + self.offset)

    def _checked_code(self, code: int) -> int:
        code = int(code)
        if not 0 <= code < self.n_codes:
            raise FormatError(
                f"code {code:#x} is outside format {self.name!r} (0x00..{self.n_codes - 1:#04x})"
            )
        return code

    def _charset_description(self) -> str:
        lo, hi = chr(self.offset), chr(self.offset + self.n_codes - 1)
        return f"{lo!r}..{hi!r}, U+{self.offset:04X}..U+{self.offset + self.n_codes - 1:04X}"


def parity_bit(code: int, fmt: CharFormat) -> int:
    """Parity bit that goes with the data bits of `code` in format `fmt`.

    Parameters
    ----------
    code : int
        Character code.
    fmt : CharFormat
        Its format; ``fmt.parity`` must not be ``'none'``.

    Returns
    -------
    int
        0 or 1: with odd parity the bit that makes the count of ones in data and parity odd,
        with even parity the bit that makes it even.

    Raises
    ------
    FormatError
        If the format has no parity bit.
    """
    if fmt.parity == "none":
        raise FormatError(f"format {fmt.name!r} has no parity bit")
    ones = int(code).bit_count() & 1
    return ones ^ 1 if fmt.parity == "odd" else ones
