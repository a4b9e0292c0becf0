"""The LTC frame word and timecode label arithmetic (SMPTE ST 12-1 / IEC 60461).

Input: a timecode label and the flags of a frame (:class:`FrameWord`), or 80 bits.
Output: 80 bits (uint8, bit 0 first, as recorded), or the :class:`FrameWord` they hold.

The 80-bit word (SMPTE ST 12-1; ../shared/REFERENCE.md), every field least significant bit first:

====================  ==========================================================
bits                  field
====================  ==========================================================
0–3, 8–9              frame units, frame tens
10, 11                drop-frame flag, colour-frame flag
16–19, 24–26          seconds units, seconds tens
32–35, 40–42          minutes units, minutes tens
48–51, 56–57          hours units, hours tens
4–7, 12–15, ... 60–63 user-bit groups 1..8 (4 bits each, at 4 + 8·(g − 1))
27, 43, 58, 59        30-frame family: polarity correction, BGF0, BGF1, BGF2;
                      25 fps: BGF0, BGF2, BGF1, polarity correction
64–79                 sync word 0011 1111 1111 1101
====================  ==========================================================

The polarity-correction bit is set so that the word holds an even number of zeros, so that
every frame of a biphase-mark recording starts with the same polarity.

Label arithmetic: a label counts frames since midnight.  Without drop frame, at ``n`` labels
per second, ``count = ((h·60 + m)·60 + s)·n + f``.  With drop frame (29.97 fps, 30 labels per
second) frame numbers 00 and 01 are skipped at the start of every minute except minutes 00,
10, 20, 30, 40 and 50 (SMPTE ST 12-1), so ten minutes hold 17 982 labels and a day 2 589 408.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from readchan.errors import FormatError, ParameterError

WORD_BITS = 80
SYNC_WORD = np.array([0, 0, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 0, 1], np.uint8)
"""Bits 64–79 in recorded order (SMPTE ST 12-1)."""
SYNC_REVERSED = SYNC_WORD[::-1].copy()
"""The sync word as the head meets it in reverse play: 1011 1111 1111 1100."""

USER_GROUP_BITS = tuple(4 + 8 * g for g in range(8))
"""First bit of user-bit groups 1..8."""

RATES_FPS = (24.0, 25.0, 29.97, 30.0)
"""Frame rates of LTC (SMPTE ST 12-1)."""

BCD_FIELDS = {  # field: (units position, units width, tens position, tens width)
    "frames": (0, 4, 8, 2),
    "seconds": (16, 4, 24, 3),
    "minutes": (32, 4, 40, 3),
    "hours": (48, 4, 56, 2),
}
FAMILY_BITS = {  # (polarity correction, BGF0, BGF1, BGF2)
    30: (27, 43, 58, 59),
    25: (59, 27, 58, 43),
}

DF_TEN_MINUTES = 17_982
"""Drop-frame labels in ten minutes: 10·60·30 − 9·2."""
DF_MINUTE = 1_798
"""Drop-frame labels in a minute that drops two: 60·30 − 2."""


def labels_per_second(rate_fps: float) -> int:
    """Frame labels per second of a rate: 24, 25 or 30 (29.97 counts as 30, SMPTE ST 12-1)."""
    return int(round(rate_fps))


def family(rate_fps: float) -> int:
    """25 for 25 fps; 30 for the 30-frame family (24, 29.97, 30), whose bit assignments it shares."""
    return 25 if labels_per_second(rate_fps) == 25 else 30


def frames_per_day(per_second: int, drop_frame: bool) -> int:
    """Labels in 24 hours."""
    return 144 * DF_TEN_MINUTES if drop_frame else 86_400 * per_second


@dataclass(frozen=True, slots=True)
class Label:
    """A timecode label HH:MM:SS:FF."""

    hours: int
    minutes: int
    seconds: int
    frames: int

    def text(self, drop_frame: bool = False) -> str:
        """``"HH:MM:SS:FF"``, with ``;`` before the frame field for drop frame."""
        sep = ";" if drop_frame else ":"
        return f"{self.hours:02d}:{self.minutes:02d}:{self.seconds:02d}{sep}{self.frames:02d}"

    @staticmethod
    def parse(text: str) -> tuple["Label", bool]:
        """``"HH:MM:SS:FF"`` or ``"HH:MM:SS;FF"`` → (label, drop frame written)."""
        t = str(text).strip()
        parts = t.replace(";", ":").replace(".", ":").split(":")
        if len(parts) != 4 or not all(p.isdigit() and 1 <= len(p) <= 2 for p in parts):
            raise FormatError(f"timecode must look like HH:MM:SS:FF, was {text!r}")
        h, m, s, f = map(int, parts)
        if h > 23 or m > 59 or s > 59 or f > 29:
            raise FormatError(f"timecode field out of range in {text!r}")
        return Label(h, m, s, f), ";" in t


def is_valid_label(label: Label, per_second: int, drop_frame: bool) -> bool:
    """True when ``label`` exists at ``per_second`` labels per second (drop frame: 30 only)."""
    if not (0 <= label.hours < 24 and 0 <= label.minutes < 60 and 0 <= label.seconds < 60):
        return False
    if not 0 <= label.frames < per_second:
        return False
    if drop_frame and label.seconds == 0 and label.frames < 2 and label.minutes % 10 != 0:
        return False
    return True


def label_to_count(label: Label, per_second: int, drop_frame: bool = False) -> int:
    """Frames since midnight of ``label`` (see the module docstring for the rule)."""
    if not is_valid_label(label, per_second, drop_frame):
        raise FormatError(f"{label.text(drop_frame)} is not a label at {per_second} labels/s"
                          + (" drop frame" if drop_frame else ""))
    total_min = label.hours * 60 + label.minutes
    count = (total_min * 60 + label.seconds) * per_second + label.frames
    if drop_frame:
        count -= 2 * (total_min - total_min // 10)
    return count


def count_to_label(count: int, per_second: int, drop_frame: bool = False) -> Label:
    """Inverse of :func:`label_to_count`; counts wrap at 24 hours."""
    count = int(count) % frames_per_day(per_second, drop_frame)
    if drop_frame:
        tens, rem = divmod(count, DF_TEN_MINUTES)
        # the first minute of ten keeps all 1800 labels; the other nine drop two each
        extra = 0 if rem < 2 else 2 * ((rem - 2) // DF_MINUTE)
        count += 18 * tens + extra
    f = count % per_second
    s_total = count // per_second
    return Label(s_total // 3600, (s_total // 60) % 60, s_total % 60, f)


@dataclass(frozen=True)
class FrameWord:
    """The content of one 80-bit LTC frame word.

    Attributes
    ----------
    label : the timecode label.
    drop_frame, color_frame : flags (bits 10 and 11).
    user_bits : 32-bit integer; group g (1..8) is the nibble ``(user_bits >> 4(g−1)) & 15``,
        whose least significant bit is the group's first recorded bit.
    bgf : binary group flags (BGF0, BGF1, BGF2).
    polarity : the polarity-correction bit.
    """

    label: Label
    drop_frame: bool = False
    color_frame: bool = False
    user_bits: int = 0
    bgf: tuple[int, int, int] = (0, 0, 0)
    polarity: int = 0

    @property
    def user_hex(self) -> str:
        """8 hex digits, group 1 first."""
        return "".join(f"{(self.user_bits >> (4 * g)) & 15:X}" for g in range(8))


def _put(bits: np.ndarray, pos: int, width: int, value: int) -> None:
    for k in range(width):
        bits[pos + k] = (value >> k) & 1


def encode_word(word: FrameWord, rate_fps: float) -> np.ndarray:
    """80 bits (uint8, bit 0 first) of ``word`` at ``rate_fps``, with the polarity bit set so
    that the word holds an even number of zeros (the ``polarity`` attribute is ignored)."""
    if not 0 <= word.user_bits < 1 << 32:
        raise ParameterError(f"user_bits must be a 32-bit value, was {word.user_bits!r}")
    bits = np.zeros(WORD_BITS, np.uint8)
    lab = word.label
    for name, value in (("frames", lab.frames), ("seconds", lab.seconds),
                        ("minutes", lab.minutes), ("hours", lab.hours)):
        up, uw, tp, tw = BCD_FIELDS[name]
        tens, units = divmod(value, 10)
        if tens >= 1 << tw:
            raise FormatError(f"{name} {value} does not fit its BCD field")
        _put(bits, up, uw, units)
        _put(bits, tp, tw, tens)
    bits[10] = int(word.drop_frame)
    bits[11] = int(word.color_frame)
    for g, pos in enumerate(USER_GROUP_BITS):
        _put(bits, pos, 4, (word.user_bits >> (4 * g)) & 15)
    pol, *bgf_pos = FAMILY_BITS[family(rate_fps)]
    for p, v in zip(bgf_pos, word.bgf):
        bits[p] = int(v) & 1
    bits[64:] = SYNC_WORD
    bits[pol] = 0
    if (WORD_BITS - int(bits.sum())) % 2:
        bits[pol] = 1
    return bits


def zeros_even(bits: np.ndarray) -> bool:
    """The polarity-correction check: an even number of zeros in the 80-bit word."""
    return (WORD_BITS - int(np.count_nonzero(bits))) % 2 == 0


def _field_matrix() -> np.ndarray:
    """Weights (80 × 13) that turn a word into its digits by one product: for each BCD field its
    units and tens, then the 8 user-bit groups, then the user bits as one 32-bit value."""
    cols = []
    for up, uw, tp, tw in BCD_FIELDS.values():
        for pos, width in ((up, uw), (tp, tw)):
            c = np.zeros(WORD_BITS, np.int64)
            c[pos:pos + width] = 1 << np.arange(width)
            cols.append(c)
    user = np.zeros(WORD_BITS, np.int64)
    for g, pos in enumerate(USER_GROUP_BITS):
        user[pos:pos + 4] = (1 << np.arange(4)) << (4 * g)
    cols.append(user)
    return np.stack(cols, axis=1)


_FIELDS = _field_matrix()
_TENS_LIMIT = (2, 5, 5, 2)        # frames, seconds, minutes, hours


def bcd_valid(bits: np.ndarray) -> bool:
    """Every BCD digit of the label in range: units 0–9, frame tens 0–2, seconds and minutes
    tens 0–5, hours 0–23."""
    v = np.asarray(bits, np.int64) @ _FIELDS
    units, tens = v[0:8:2], v[1:8:2]
    return bool((units <= 9).all() and (tens <= _TENS_LIMIT).all() and tens[3] * 10 + units[3] < 24)


def decode_word(bits: np.ndarray, rate_fps: float = 30.0) -> FrameWord:
    """The :class:`FrameWord` of 80 bits (bit 0 first); ``rate_fps`` picks the positions of the
    binary group flags and the polarity bit.  Raises FormatError when the sync word is absent
    or a BCD digit is out of range."""
    b = np.asarray(bits, np.uint8).ravel()
    if b.size != WORD_BITS:
        raise FormatError(f"an LTC word has 80 bits, was given {b.size}")
    if not np.array_equal(b[64:], SYNC_WORD):
        raise FormatError("bits 64–79 are not the LTC sync word")
    if not bcd_valid(b):
        raise FormatError("a BCD digit of the timecode is out of range")
    v = (b.astype(np.int64) @ _FIELDS).tolist()
    frames, seconds, minutes, hours = (v[2 * k + 1] * 10 + v[2 * k] for k in range(4))
    pol, *bgf_pos = FAMILY_BITS[family(rate_fps)]
    return FrameWord(Label(hours, minutes, seconds, frames), bool(b[10]), bool(b[11]), v[8],
                     tuple(int(b[p]) for p in bgf_pos), int(b[pol]))
