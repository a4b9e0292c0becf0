"""Character formats and track layouts of the magnetic stripe.

Input: a format name or a custom format string (:func:`parse_format`), or a track number
(:data:`TRACKS`).  Output: a :class:`~readchan.formats.iso7811.charformat.CharFormat` (defined in
:mod:`readchan.formats.iso7811.charformat`, re-exported here) or a :class:`TrackSpec`.

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

from readchan.errors import FormatError
from readchan.formats.iso7811.charformat import PARITIES, CharFormat, parity_bit
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
    if parity not in PARITIES:
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
