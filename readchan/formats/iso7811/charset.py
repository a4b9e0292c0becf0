"""Character formats and track layouts of the magnetic stripe.

A character format says how a text character becomes a group of bits on the stripe: a code of
``data_bits`` bits (``code = ord(char) - offset``), written least significant bit first, followed
by one parity bit (odd, even, or none). Three codes are reserved as the start sentinel, the end
sentinel and the field separator; an LRC character may follow the end sentinel.

The two ISO formats (ISO/IEC 7811-2):

==========  =========  ======  =============  =====================================
format      data bits  parity  code           sentinels (start, separator, end)
==========  =========  ======  =============  =====================================
iso-alpha   6          odd     ASCII - 0x20   '%' (05h), '^' (3Eh), '?' (1Fh)
iso-bcd     4          odd     ASCII - 0x30   ';' (0Bh), '=' (0Dh), '?' (0Fh)
==========  =========  ======  =============  =====================================

Track 1 carries iso-alpha at 210 bpi (at most 79 characters incl. sentinels and LRC), track 2
iso-bcd at 75 bpi (40 characters), track 3 iso-bcd at 210 bpi (107 characters) (ISO/IEC 7811-2,
ISO/IEC 7813, ISO 4909).

A user may define a format of their own with :func:`parse_format`, e.g.
``custom:bits=5,parity=even,start=0x0B,end=0x0F,lrc=off``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from readchan.errors import FormatError
from readchan.units import bit_cell_m

__all__ = [
    "CharFormat",
    "ISO_ALPHA",
    "ISO_BCD",
    "KNOWN_FORMATS",
    "TRACKS",
    "TrackSpec",
    "parity_bit",
    "parse_format",
]

_PARITIES = ("odd", "even", "none")
_MAX_CODEPOINT = 0x10FFFF
_SURROGATES = (0xD800, 0xDFFF)


def _check_format_fields(fmt: CharFormat) -> None:
    """Raise FormatError if a field of `fmt` is out of range."""
    where = f"format {fmt.name!r}"
    if not isinstance(fmt.name, str) or not fmt.name:
        raise FormatError(f"format name must be a non-empty string, was {fmt.name!r}")
    if not isinstance(fmt.data_bits, int) or not 4 <= fmt.data_bits <= 8:
        raise FormatError(f"{where}: data bits must be 4..8, was {fmt.data_bits!r}")
    if fmt.parity not in _PARITIES:
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


ISO_ALPHA = CharFormat("iso-alpha", 6, "odd", 0x20, 0x05, 0x1F, 0x3E, True, 79)
ISO_BCD = CharFormat("iso-bcd", 4, "odd", 0x30, 0x0B, 0x0F, 0x0D, True, 107)


@dataclass(frozen=True)
class TrackSpec:
    """Physical and logical layout of one ISO track.

    Parameters
    ----------
    number : int
        Track number, 1 to 3.
    fmt : CharFormat
        Character format of the track.
    density_bpi : float
        Bit density along the track, in bits per inch.
    max_chars : int
        Most characters on the track, incl. sentinels and LRC.
    leading_zeros, trailing_zeros : int
        Clocking zeros written before the start sentinel and after the LRC character (bits).
    """

    number: int
    fmt: CharFormat
    density_bpi: float
    max_chars: int
    leading_zeros: int
    trailing_zeros: int

    @property
    def bit_cell_m(self) -> float:
        """Length of one bit cell on the stripe, in metres (25.4 mm / density)."""
        return bit_cell_m(self.density_bpi)


TRACKS = {
    1: TrackSpec(1, ISO_ALPHA, 210.0, 79, 61, 30),
    2: TrackSpec(2, ISO_BCD, 75.0, 40, 22, 15),
    3: TrackSpec(3, ISO_BCD, 210.0, 107, 61, 30),
}

KNOWN_FORMATS = (ISO_ALPHA, ISO_BCD)

_NAMED = {
    "iso-alpha": ISO_ALPHA,
    "iso-bcd": ISO_BCD,
    "track1": TRACKS[1].fmt,
    "track2": TRACKS[2].fmt,
    "track3": TRACKS[3].fmt,
}
_RESERVED_NAMES = ("auto", *_NAMED, "custom")
_CUSTOM_KEYS = ("bits", "parity", "offset", "start", "end", "sep", "lrc", "max", "name")
_CUSTOM_SYNTAX = (
    "custom:bits=N,start=CODE,end=CODE"
    "[,parity=odd|even|none,offset=N,sep=CODE,lrc=on|off,max=N,name=NAME]"
)
_VALID_NAMES = "auto, iso-alpha, iso-bcd, track1, track2, track3, " + _CUSTOM_SYNTAX
_TRUE = ("on", "yes", "true", "1")
_FALSE = ("off", "no", "false", "0")


def parse_format(spec: str) -> CharFormat | None:
    """Character format named by a command-line format string.

    Parameters
    ----------
    spec : str
        ``'auto'``; ``'iso-alpha'`` or ``'iso-bcd'``; ``'track1'``, ``'track2'`` or ``'track3'``
        (the ISO format of that track); or a user's format
        ``'custom:bits=5,parity=even,offset=0x30,start=0x0B,end=0x0F,sep=0x0D,lrc=off,``
        ``max=64,name=myfmt'``.
        In a custom format only ``bits``, ``start`` and ``end`` are required; ``parity``
        defaults to odd, ``offset`` to 0x30 for up to 5 bits and 0x20 above, ``sep`` to none,
        ``lrc`` to on, ``max`` to no limit and ``name`` to ``'custom'``. Integers are decimal or
        ``0x`` hexadecimal. Names and keys are case-insensitive.

    Returns
    -------
    CharFormat or None
        The format, or None for ``'auto'`` (try every format in :data:`KNOWN_FORMATS`).

    Raises
    ------
    FormatError
        With a one-line message naming the bad part, for an unknown name, an unknown or
        repeated key, a malformed value or a value out of range.

    Examples
    --------
    >>> parse_format('track2').name
    'iso-bcd'
    >>> parse_format('custom:bits=5,parity=even,start=0x0B,end=0x0F,lrc=off').bits_per_char
    6
    """
    if not isinstance(spec, str):
        raise FormatError(f"format must be a string, got {spec!r}; valid: {_VALID_NAMES}")
    key = spec.strip().lower()
    if key == "auto":
        return None
    if key in _NAMED:
        return _NAMED[key]
    if key.startswith("custom:"):
        return _parse_custom(spec.strip()[len("custom:"):])
    raise FormatError(f"unknown format {spec!r}; valid: {_VALID_NAMES}")


def _parse_custom(body: str) -> CharFormat:
    values: dict[str, str] = {}
    for item in body.split(","):
        item = item.strip()
        if not item:
            continue
        k, eq, v = item.partition("=")
        k = k.strip().lower()
        if not eq:
            raise FormatError(f"custom format: {item!r} is not key=value; valid: {_CUSTOM_SYNTAX}")
        if k not in _CUSTOM_KEYS:
            raise FormatError(
                f"custom format: unknown key {k!r}; valid keys: {', '.join(_CUSTOM_KEYS)}"
            )
        if k in values:
            raise FormatError(f"custom format: key {k!r} given twice")
        values[k] = v.strip()
    for required in ("bits", "start", "end"):
        if required not in values:
            raise FormatError(f"custom format: missing {required}=; valid: {_CUSTOM_SYNTAX}")

    bits = _parse_int("bits", values["bits"])
    if not 4 <= bits <= 8:
        raise FormatError(f"custom format: bits must be 4..8, was {bits}")
    parity = values.get("parity", "odd").lower()
    if parity not in _PARITIES:
        raise FormatError(f"custom format: parity must be one of odd, even, none, was {parity!r}")
    offset = _parse_int("offset", values["offset"]) if "offset" in values else (
        0x30 if bits <= 5 else 0x20
    )
    start = _parse_int("start", values["start"])
    end = _parse_int("end", values["end"])
    sep = None
    if values.get("sep", "none").lower() not in ("none", ""):
        sep = _parse_int("sep", values["sep"])
    lrc_text = values.get("lrc", "on").lower()
    if lrc_text in _TRUE:
        lrc = True
    elif lrc_text in _FALSE:
        lrc = False
    else:
        raise FormatError(f"custom format: lrc must be on or off, was {values['lrc']!r}")
    max_chars = None
    if values.get("max", "none").lower() not in ("none", ""):
        max_chars = _parse_int("max", values["max"])
    name = values.get("name", "custom")
    if not name:
        raise FormatError("custom format: name must not be empty")
    if name.lower() in _RESERVED_NAMES[:-1]:
        raise FormatError(f"custom format: name {name!r} is reserved for a built-in format")
    return CharFormat(name, bits, parity, offset, start, end, sep, lrc, max_chars)


def _parse_int(key: str, text: str) -> int:
    try:
        return int(text, 0)
    except ValueError:
        raise FormatError(
            f"custom format: {key}={text!r} is not an integer (decimal or 0x hex)"
        ) from None
