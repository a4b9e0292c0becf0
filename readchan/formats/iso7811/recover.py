"""Recovery guided by parity and LRC: revise the least confident bit decisions of a failed read.

Input: a failed :class:`readchan.formats.iso7811.framing.Frame`, its bits and their decision
margins, the character format.
Output: :class:`Recovery` (candidates searched, those passing, the accepted frame or None).

When a read fails its checks, the bits whose decisions came closest to the half-cell/full-cell
boundary (smallest timing margin, see :mod:`readchan.linecode.f2f`) are the likeliest to be wrong.
Two mechanisms use that, both bounded by the timing evidence:

* :func:`confirm_correction` keeps the ISO single-character correction only when the bit it
  revised is among the :data:`CORRECTION_RANK` least confident doubtful bits of the read.
* :func:`recover` searches a read whose parity fails in exactly one data character: for
  k = 1 … :data:`MAX_FLIPS`, it flips every k of the k + 1 least confident doubtful bits that
  lie in that character (a Chase-style search over the least reliable positions: Chase, IEEE
  Trans. Inf. Theory 18(1), 1972), re-frames each candidate in the read's own format and
  direction, and accepts a candidate only if it passes every parity and the LRC *without* any
  further correction and is the **only** one that does.

Why: the ISO parity + LRC code is a product of two single-parity checks, so two valid words
differ in at least four bits (two characters × two columns): it corrects one error and detects
two, and three errors can be *miscorrected* into a valid-looking wrong word.  A wrong word can
only pass if its revisions complete such a pattern, and the revisions are restricted to the
very bits the timing doubted most; the README gives the analysis and
``scripts/analyse_recovery.py`` measures the false-accept rate.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from itertools import combinations

import numpy as np

from readchan.formats.iso7811.charset import CharFormat
from readchan.formats.iso7811.framing import Frame, frame

MAX_FLIPS = 3
"""Most bits revised together by the recovery search."""

CORRECTION_RANK = 2
"""A single-character correction must revise one of this many least confident bits."""

DOUBT_MARGIN = 0.5
"""A decision is doubtful below this margin: its interval lay within ⅛ cell of the boundary.
Only doubtful decisions are ever revised: a confidently read bit that is wrong was recorded
wrong, and no timing evidence speaks for changing it."""


@dataclass(frozen=True)
class Recovery:
    """Outcome of a recovery search.

    Attributes
    ----------
    frame : the accepted frame (its ``revised_bits`` name the flipped bits), or None.
    candidates : candidates tried.
    passing : distinct texts among candidates that passed every check.
    searched : indices (into the bit stream) of the doubtful bits considered, least confident first.
    """

    frame: Frame | None
    candidates: int
    passing: int
    searched: tuple[int, ...]


def _data_region(bits: np.ndarray, base: Frame) -> np.ndarray:
    """Indices of the bits from the start sentinel to the last one-bit, in the read's direction.

    Wider than the base frame's own bits: a damaged character can end a frame early, and the
    bits it then leaves out must count too.
    """
    first = int(np.asarray(base.bit_index)[0, 0])
    ones = np.flatnonzero(bits)
    if base.direction == "forward":
        last = int(ones[-1]) if ones.size else first
        return np.arange(first, max(first, last) + 1)
    last = int(ones[0]) if ones.size else first
    return np.arange(min(first, last), first + 1)


def least_confident(bits: np.ndarray, margin: np.ndarray, base: Frame, n: int) -> tuple[int, ...]:
    """The ``n`` least confident doubtful bits (margin below :data:`DOUBT_MARGIN`) of the read's
    data region, least confident first."""
    region = _data_region(bits, base)
    region = region[margin[region] < DOUBT_MARGIN]
    order = region[np.argsort(margin[region], kind="stable")]
    return tuple(int(i) for i in order[:n])


def _suspects_elsewhere(fr: Frame, suspect_bits, rows: tuple[int, ...]) -> bool:
    """True when a bit the detector had to guess at lies outside the characters ``rows``."""
    if not len(suspect_bits):
        return False
    idx = np.asarray(fr.bit_index)
    inside = set(idx[list(rows)].ravel().tolist()) if rows else set()
    lo, hi = int(idx.min()), int(idx.max())
    return any(lo <= b <= hi and b not in inside for b in np.asarray(suspect_bits).tolist())


def confirm_correction(fr: Frame, bits: np.ndarray, margin: np.ndarray, fmt: CharFormat,
                       suspect_bits=()) -> Frame:
    """Keep a single-character correction only if the bit it revised is among the
    :data:`CORRECTION_RANK` least confident doubtful bits, and no bit the transition detector
    had to guess at (``suspect_bits``: a rescued, dropped or missing pulse) lies in another
    character of the frame — such a guess can change two bits of a character and keep its
    parity; else return the read uncorrected and invalid (its characters as read)."""
    if not fr.corrected:
        return fr
    if (set(fr.revised_bits) <= set(least_confident(bits, margin, fr, CORRECTION_RANK))
            and not _suspects_elsewhere(fr, suspect_bits, fr.corrected)):
        return fr
    idx = np.asarray(fr.bit_index)
    weights = 1 << np.arange(fmt.data_bits)
    raw = (bits[idx[:, : fmt.data_bits]].astype(np.int64) * weights).sum(axis=1)
    data = raw[: len(fr.text)]
    text = "".join(chr(int(c) + fmt.offset) for c in data)
    return dataclasses.replace(fr, codes=data, text=text, corrected=(), revised_bits=(), valid=False,
                               lrc_ok=False if fmt.lrc else fr.lrc_ok)


def candidate_count(max_flips: int = MAX_FLIPS) -> int:
    """Most candidates the search tries: Σ_{k=1..max_flips} C(k + 1, k)."""
    return sum(k + 1 for k in range(1, max_flips + 1))


def recover(bits: np.ndarray, margin: np.ndarray, base: Frame, fmt: CharFormat, *,
            max_flips: int = MAX_FLIPS, suspect_bits=()) -> Recovery:
    """Search for the unique valid reading near a failed ``base`` frame of ``bits``.

    Parameters
    ----------
    bits : the read's bit stream (0/1), as given to :func:`readchan.formats.iso7811.framing.frame`.
    margin : per-bit decision margin (same length as ``bits``).
    base : the failed frame of ``bits``.
    fmt : its character format.
    max_flips : most bits revised together (see the module docstring).
    suspect_bits : bits the transition detector had to guess at; none may lie outside the
        failing character (see :func:`confirm_correction`).
    """
    searched = least_confident(bits, margin, base, max_flips + 1)
    fails = np.flatnonzero(~np.asarray(base.parity_ok))
    if (not base.complete or fails.size != 1 or fails[0] >= len(base.text)
            or _suspects_elsewhere(base, suspect_bits, (int(fails[0]),))):
        return Recovery(None, 0, 0, searched)
    char_bits = set(np.asarray(base.bit_index)[int(fails[0])].tolist())
    passing: dict[str, tuple[Frame, tuple[int, ...]]] = {}
    tried = 0
    for k in range(1, max_flips + 1):
        for flips in combinations(searched[: k + 1], k):
            if not set(flips) <= char_bits:
                continue
            tried += 1
            cand = bits.copy()
            cand[list(flips)] ^= 1
            fr = frame(cand, fmt)
            if fr is None or not fr.valid or fr.corrected or fr.direction != base.direction:
                continue
            passing.setdefault(fr.text, (fr, tuple(sorted(flips))))
    if len(passing) != 1:
        return Recovery(None, tried, len(passing), searched)
    fr, flips = next(iter(passing.values()))
    rows = [r for r, row in enumerate(np.asarray(fr.bit_index)) if set(row.tolist()) & set(flips)]
    fixed = dataclasses.replace(fr, corrected=tuple(rows), revised_bits=flips)
    return Recovery(fixed, tried, 1, searched)
