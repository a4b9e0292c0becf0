"""LTC framer: biphase-mark bits to checked 80-bit frames, in either direction of play.

Input: :class:`readchan.linecode.biphase.TapeBits` (bits in capture order).
Output: :class:`FrameCandidate` per sync word found, each with the checks it passed.

The sync word (bits 64–79, ``0011 1111 1111 1101``) ends a frame; read backwards it is
``1011 1111 1111 1100``, so the order in which the head meets it tells the direction of play
(SMPTE ST 12-1).  Forward, the frame is the 64 bits before the sync word and the sync word;
reverse, it is the sync word (met first, bit 79 first) and the 64 bits after it, reversed.

A frame passes when all of these hold (cheapest first):

1. its 80 cells lie in one stretch of signal and none of them carries a timing flag
   (a lone half cell or an overlong interval) or a margin below ``min_margin``;
2. the word holds an even number of zeros (the polarity-correction bit, SMPTE ST 12-1);
3. every BCD digit is in range (units 0–9, tens within the field, hours below 24).

Candidates that overlap an earlier passing frame are dropped (a sync pattern cannot recur
inside a valid word, whose BCD digits and binary group flags interrupt any run of twelve 1s,
but a damaged stretch can fake one).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from readchan.linecode.biphase import TapeBits
from readchan.formats.ltc.word import (BCD_FIELDS, SYNC_REVERSED, SYNC_WORD, USER_GROUP_BITS, WORD_BITS,
                                    Label)

FORWARD = "forward"
REVERSE = "reverse"


@dataclass(frozen=True, slots=True)
class FrameCandidate:
    """One 80-bit word found at a sync word.

    Attributes
    ----------
    first_bit : index (in the capture-order bits) of the frame's first cell in capture order.
    direction : ``"forward"`` or ``"reverse"``.
    word : the 80 bits in recorded order (bit 0 first).
    position_s : capture time of the boundary opening the first cell in capture order.
    end_s : capture time of the boundary closing the last cell in capture order.
    min_margin : smallest decision margin of the 80 cells.
    clean, zeros_even, bcd_ok : the checks (see the module docstring).
    """

    first_bit: int
    direction: str
    word: np.ndarray
    position_s: float
    end_s: float
    min_margin: float
    clean: bool
    zeros_even: bool
    bcd_ok: bool

    @property
    def passed(self) -> bool:
        return self.clean and self.zeros_even and self.bcd_ok

    @property
    def duration_s(self) -> float:
        return self.end_s - self.position_s


def _matches(bits: np.ndarray, pattern: np.ndarray) -> np.ndarray:
    """Indices where ``pattern`` starts in ``bits``: one comparison of a shifted view per
    pattern bit (two booleans a bit of memory, where a window view compared whole takes one a
    bit per pattern bit)."""
    m = bits.size - pattern.size + 1
    if m <= 0:
        return np.zeros(0, np.int64)
    hit = bits[:m] == pattern[0]
    for j in range(1, pattern.size):
        hit &= bits[j:j + m] == pattern[j]
    return np.flatnonzero(hit)


def field_values(words: np.ndarray) -> dict[str, np.ndarray]:
    """Timecode fields of words (m × 80, recorded order), vectorised: units and tens of each
    BCD field (``frames_units``, ``frames_tens``, ...) and the user-bit integer ``user``."""
    out: dict[str, np.ndarray] = {}
    for name, (up, uw, tp, tw) in BCD_FIELDS.items():
        out[name + "_units"] = words[:, up:up + uw].astype(np.int64) @ (1 << np.arange(uw))
        out[name + "_tens"] = words[:, tp:tp + tw].astype(np.int64) @ (1 << np.arange(tw))
    user = np.zeros(words.shape[0], np.int64)
    for g, pos in enumerate(USER_GROUP_BITS):
        user |= (words[:, pos:pos + 4].astype(np.int64) @ (1 << np.arange(4))) << (4 * g)
    out["user"] = user
    return out


def _bcd_ok(f: dict[str, np.ndarray]) -> np.ndarray:
    ok = np.ones(f["user"].size, bool)
    for name, limit in (("frames", 2), ("seconds", 5), ("minutes", 5), ("hours", 2)):
        ok &= (f[name + "_units"] <= 9) & (f[name + "_tens"] <= limit)
    return ok & (f["hours_tens"] * 10 + f["hours_units"] < 24)


def labels_of(words: np.ndarray) -> list[Label]:
    """The labels of words (m × 80) whose BCD digits are in range."""
    f = field_values(words)
    return [Label(int(h), int(m), int(s), int(fr)) for h, m, s, fr in zip(
        f["hours_tens"] * 10 + f["hours_units"], f["minutes_tens"] * 10 + f["minutes_units"],
        f["seconds_tens"] * 10 + f["seconds_units"], f["frames_tens"] * 10 + f["frames_units"])]


def find_frames(tb: TapeBits, *, min_margin: float = 0.1) -> list[FrameCandidate]:
    """Every frame candidate of ``tb`` in capture order, with its checks (module docstring)."""
    bits = tb.bits
    n = bits.size
    fwd = _matches(bits, SYNC_WORD) - 64                # first cell of the frame
    rev = _matches(bits, SYNC_REVERSED)
    fwd = fwd[(fwd >= 0) & (fwd + WORD_BITS <= n)]
    rev = rev[rev + WORD_BITS <= n]
    first = np.concatenate((fwd, rev)).astype(np.int64)
    is_rev = np.concatenate((np.zeros(fwd.size, bool), np.ones(rev.size, bool)))
    if first.size == 0:
        return []
    order = np.argsort(first, kind="stable")
    first, is_rev = first[order], is_rev[order]
    out: list[FrameCandidate] = []
    taken_until = -1
    for a in range(0, first.size, CHUNK):
        taken_until = _checked(tb, first[a:a + CHUNK], is_rev[a:a + CHUNK], min_margin, taken_until, out)
    return out


CHUNK = 8192
"""Candidates checked at a time (their cells: 8192 × 80, a few MB), so a two-hour tape's
checks need no more memory than a minute's."""


def _checked(tb: TapeBits, first: np.ndarray, is_rev: np.ndarray, min_margin: float, taken_until: int,
             out: list[FrameCandidate]) -> int:
    """Append the candidates opening at bits ``first`` (sorted) to ``out`` with their checks;
    returns the bit up to which a passing frame has taken the bits."""
    bits = tb.bits
    cells = first[:, None] + np.arange(WORD_BITS)[None, :]
    words = bits[cells]
    words[is_rev] = words[is_rev, ::-1]
    margin = tb.margin[cells].min(axis=1)
    clean = ((tb.flags[cells] == 0).all(axis=1) & (tb.run[cells] == tb.run[first][:, None]).all(axis=1)
             & (margin >= min_margin))
    even = (WORD_BITS - words.sum(axis=1, dtype=np.int64)) % 2 == 0
    bcd = _bcd_ok(field_values(words))
    for k in range(first.size):
        c = FrameCandidate(int(first[k]), REVERSE if is_rev[k] else FORWARD, words[k],
                           float(tb.start_s[first[k]]), float(tb.end_s[first[k] + WORD_BITS - 1]),
                           float(margin[k]), bool(clean[k]), bool(even[k]), bool(bcd[k]))
        if c.passed:
            if c.first_bit < taken_until:
                continue
            taken_until = c.first_bit + WORD_BITS
        out.append(c)
    return taken_until
