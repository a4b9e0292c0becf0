"""Recovery guided by parity and LRC: retry the least confident bit decisions of a failed read.

When a read fails its parity or LRC checks, the bits whose decisions came closest to the
half-cell/full-cell boundary (smallest timing margin, see :mod:`readchan.timing`) are the
likeliest to be wrong.  The search flips every combination of at most ``max_flips`` of the
``search_bits`` least confident framed bits (a Chase-style search: Chase, IEEE Trans. Inf.
Theory 18(1), 1972), re-frames each candidate in the read's own format and direction, and
keeps the candidates that pass every parity and the LRC *without* any further correction.

A candidate is accepted only when it is the **only** passing one.  The ISO parity + LRC code
is a product of two single-parity checks, so any two valid words differ in at least four bits
(two characters × two columns).  If every wrong bit of the read lies among the searched bits,
the true word is among the candidates, and any wrong candidate that also passed would make two
— so a unique pass cannot be wrong.  A false accept needs a wrong bit *outside* the searched
set that three or more searched bits complete to such a rectangle; the README gives the
analysis and the measured rate (``scripts/analyse_recovery.py``).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from itertools import combinations

import numpy as np

from readchan.formats import CharFormat
from readchan.framing import Frame, frame

SEARCH_BITS = 8
"""Least confident bits of the data region searched."""

MAX_FLIPS = 3
"""Most bits revised together."""

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
    searched : indices (into the bit stream) of the bits searched, least confident first.
    """

    frame: Frame | None
    candidates: int
    passing: int
    searched: tuple[int, ...]


def _data_region(bits: np.ndarray, base: Frame) -> np.ndarray:
    """Indices of the bits from the start sentinel to the last one-bit, in the read's direction.

    Wider than the base frame's own bits: a damaged character can end a frame early, and the
    bits it then leaves out must be searchable too.
    """
    first = int(np.asarray(base.bit_index)[0, 0])
    ones = np.flatnonzero(bits)
    if base.direction == "forward":
        last = int(ones[-1]) if ones.size else first
        return np.arange(first, max(first, last) + 1)
    last = int(ones[0]) if ones.size else first
    return np.arange(min(first, last), first + 1)


def least_confident(bits: np.ndarray, margin: np.ndarray, base: Frame, n: int = SEARCH_BITS) -> tuple[int, ...]:
    """The ``n`` least confident bits (smallest margin) of the read's data region, of those
    whose margin is below :data:`DOUBT_MARGIN`."""
    region = _data_region(bits, base)
    region = region[margin[region] < DOUBT_MARGIN]
    order = region[np.argsort(margin[region], kind="stable")]
    return tuple(int(i) for i in order[:n])


def confirm_correction(fr: Frame, bits: np.ndarray, margin: np.ndarray, fmt: CharFormat, *,
                       search_bits: int = SEARCH_BITS) -> Frame:
    """Keep a single-character correction only if the bit it revised is among the
    ``search_bits`` least confident decisions and doubtful (margin below
    :data:`DOUBT_MARGIN`); else return the read uncorrected and invalid.

    The ISO parity + LRC code has minimum distance 4: it corrects one error and detects two,
    but three (for example two in one character, keeping its parity, and one in another in a
    shared column) are miscorrected into a valid-looking wrong word.  Such a miscorrection
    revises a bit that was read confidently, so asking the timing for a second opinion removes
    most of them (``scripts/analyse_recovery.py`` measures how many).
    """
    if not fr.corrected or set(fr.revised_bits) <= set(least_confident(bits, margin, fr, search_bits)):
        return fr
    idx = np.asarray(fr.bit_index)
    weights = 1 << np.arange(fmt.data_bits)
    raw = (bits[idx[:, : fmt.data_bits]].astype(np.int64) * weights).sum(axis=1)
    n_data = len(fr.text)
    data = raw[:n_data]
    text = "".join(chr(int(c) + fmt.offset) for c in data)
    return dataclasses.replace(fr, codes=data, text=text, corrected=(), revised_bits=(), valid=False,
                               lrc_ok=False if fmt.lrc else fr.lrc_ok)


def candidate_count(search_bits: int = SEARCH_BITS, max_flips: int = MAX_FLIPS) -> int:
    """Number of candidates the search tries: Σ_{k=1..max_flips} C(search_bits, k)."""
    from math import comb

    return sum(comb(search_bits, k) for k in range(1, max_flips + 1))


def recover(bits: np.ndarray, margin: np.ndarray, base: Frame, fmt: CharFormat, *,
            search_bits: int = SEARCH_BITS, max_flips: int = MAX_FLIPS) -> Recovery:
    """Search for the unique valid reading near a failed ``base`` frame of ``bits``.

    Only a read with exactly one data character failing parity is searched, and only that
    character's bits among the ``search_bits`` least confident bits of the data region may be
    flipped (see the module docstring for why).

    Parameters
    ----------
    bits : the read's bit stream (0/1), as given to :func:`readchan.framing.frame`.
    margin : per-bit decision margin (same length as ``bits``).
    base : the failed frame of ``bits``.
    fmt : its character format.
    search_bits, max_flips : bounds of the search (see :func:`candidate_count`).
    """
    searched = least_confident(bits, margin, base, search_bits)
    fails = np.flatnonzero(~np.asarray(base.parity_ok))
    n_data = len(base.text)
    if not base.complete or fails.size != 1 or fails[0] >= n_data:
        return Recovery(None, 0, 0, searched)
    char_bits = set(np.asarray(base.bit_index)[int(fails[0])].tolist())
    pool = [i for i in searched if i in char_bits]
    passing: dict[str, tuple[Frame, tuple[int, ...]]] = {}
    tried = 0
    for k in range(1, max_flips + 1):
        for flips in combinations(pool, k):
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
