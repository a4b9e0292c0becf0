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

SEARCH_BITS = 6
"""Least confident framed bits searched."""

MAX_FLIPS = 2
"""Most bits revised together."""


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


def candidate_count(search_bits: int = SEARCH_BITS, max_flips: int = MAX_FLIPS) -> int:
    """Number of candidates the search tries: Σ_{k=1..max_flips} C(search_bits, k)."""
    from math import comb

    return sum(comb(search_bits, k) for k in range(1, max_flips + 1))


def recover(bits: np.ndarray, margin: np.ndarray, base: Frame, fmt: CharFormat, *,
            search_bits: int = SEARCH_BITS, max_flips: int = MAX_FLIPS) -> Recovery:
    """Search for the unique valid reading near a failed ``base`` frame of ``bits``.

    Parameters
    ----------
    bits : the read's bit stream (0/1), as given to :func:`readchan.framing.frame`.
    margin : per-bit decision margin (same length as ``bits``).
    base : the failed frame of ``bits``.
    fmt : its character format.
    search_bits, max_flips : bounds of the search (see :func:`candidate_count`).
    """
    framed = np.unique(np.asarray(base.bit_index).ravel())
    framed = framed[(framed >= 0) & (framed < bits.size)]
    order = framed[np.argsort(margin[framed], kind="stable")]
    searched = tuple(int(i) for i in order[:search_bits])
    passing: dict[str, tuple[Frame, tuple[int, ...]]] = {}
    tried = 0
    for k in range(1, max_flips + 1):
        for flips in combinations(searched, k):
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
