"""The activity gate: where in a capture there is signal, from one cheap pass over its samples.

Input: samples, a block at a time (any units), and the sample rate (Hz).
Output: :class:`Activity`: the per-block energies, the noise floor, and the active spans
(absolute sample indices, guard margins included), which decoding then works on.

Each block of :data:`ENERGY_BLOCK_S` (20 ms) gives one number, the variance of its samples (its mean
square less its squared mean, so a DC offset or a baseline wander slower than a block adds
nothing).  The noise floor is the 20th percentile of the block variances (an idle reader is
quiet most of the time; a capture that is all signal has its floor at the signal and every
block counts as active, below).  A block is active when its variance exceeds
:data:`ACTIVE_RATIO` × the floor, i.e. its RMS exceeds 1.22 × the floor's: a swipe at 8 dB
SNR, where decoding already fails, still raises a block's RMS by 1.5× (README, *Benchmarks*).  Active blocks closer than :data:`MERGE_GAP_S` are one span, and each span is
widened by :data:`GUARD_S` on either side, so that the quiet before the first pulse and after
the last (which the segmenter and the filters see) is in the span too.  When more than
:data:`ALL_ACTIVE_FRACTION` of the blocks are active, or the floor is 0 while blocks differ,
the whole capture is one span; so is a capture at one level throughout (no block active: a
timecode track from end to end, or noise only, which the decoder's white-noise test then
dismisses cheaply) and one whose floor stands above 1.5 × its quietest blocks' (2nd percentile:
less than a fifth of it is quiet, so the floor is signal): the gate only ever leaves out
stretches that are plainly idle.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

ENERGY_BLOCK_S = 0.02
"""Length of one energy block, s: a whole cycle of 50 Hz hum (1.2 of 60 Hz), so the hum adds
the same variance to every block wherever its phase falls, and ≈ 1000 samples at 48 kHz, so
the variance of a block of white noise scatters by √(2/1000) ≈ 4.5 %."""
ACTIVE_RATIO = 1.5
"""A block is active when its variance exceeds this × the noise floor's (ten times the scatter
of a noise block's variance, :data:`ENERGY_BLOCK_S`)."""
GUARD_S = 0.1
"""Quiet kept on either side of the active blocks, s: more than the segmenter's 20 ms gap, the
longest bit cell (20 ms) and the settling of the conditioning filters' tails."""
MERGE_GAP_S = 0.5
"""Active stretches closer than this are one span, s."""
ALL_ACTIVE_FRACTION = 0.6
"""Above this fraction of active blocks, the capture is taken whole."""
FLOOR_PERCENTILE = 20.0
"""Percentile of the block variances taken as the noise floor."""


def block_variances(x: np.ndarray, block: int, scale: float = 1.0) -> np.ndarray:
    """The variance of each whole block of ``block`` samples of the 1-D ``x`` (a trailing part
    block counts as one block of its own), of the samples times ``scale`` (integer samples
    and their full-scale factor, e.g. 2⁻¹⁵ for 16-bit PCM, are taken as they are).

    From the block sums of x and x² (mean square less squared mean), the products in float32
    and the sums accumulated in float64 for float input: one pass over the samples and no
    full-length float64 copy; the variance of a 20 ms block is only compared with 1.5 × the
    floor, so float32 products (relative error below 10⁻⁴ over a block) are ample."""
    x = np.asarray(x).ravel()
    nb = x.size // block
    out = []
    if nb:
        rows = x[: nb * block].reshape(nb, block)
        # about each block's first sample (the variance does not change), so that a DC offset
        # does not cancel away float32 digits: a constant block gives exactly 0
        rows = rows.astype(np.float32) - rows[:, :1].astype(np.float32)
        s1 = rows.sum(axis=1, dtype=np.float64) / block
        s2 = np.einsum("ij,ij->i", rows, rows).astype(np.float64) / block
        out.append(np.maximum(s2 - s1 * s1, 0.0) * (scale * scale))
    if x.size > nb * block:
        out.append(np.array([float(np.var(np.asarray(x[nb * block:], np.float64))) * scale * scale]))
    return np.concatenate(out) if out else np.zeros(0)


@dataclass
class Activity:
    """Block energies gathered a block of samples at a time, and the spans they give.

    Feed consecutive samples with :meth:`feed` (any chunk sizes: the energy blocks run on
    across them); then :meth:`spans`.  Memory: one float per energy block (50 a second).
    """

    rate_hz: float
    block: int = 0
    variances: list = field(default_factory=list)
    n: int = 0
    _carry: np.ndarray = field(default_factory=lambda: np.zeros(0))

    def __post_init__(self) -> None:
        if not self.block:
            self.block = max(16, int(round(ENERGY_BLOCK_S * self.rate_hz)))

    def feed(self, x: np.ndarray, scale: float = 1.0) -> None:
        """Add the next samples (1-D, one channel) of the capture; integer samples with their
        full-scale factor ``scale`` (the variances are of ``x * scale``)."""
        x = np.asarray(x).ravel()
        self.n += x.size
        if self._carry.size:            # complete the part block left over from the last feed
            take = min(x.size, self.block - self._carry.size)
            self._carry = np.concatenate((self._carry, np.asarray(x[:take], np.float64) * scale))
            x = x[take:]
            if self._carry.size < self.block:
                return
            self.variances.append(block_variances(self._carry, self.block))
            self._carry = np.zeros(0)
        whole = x.size // self.block * self.block
        if whole:
            self.variances.append(block_variances(x[:whole], self.block, scale))
        self._carry = np.asarray(x[whole:], np.float64) * scale

    def energies(self) -> np.ndarray:
        """Per energy block, the variance of its samples (the last may be a part block)."""
        parts = list(self.variances)
        if self._carry.size:
            parts.append(np.array([float(np.var(self._carry))]))
        return np.concatenate(parts) if parts else np.zeros(0)

    def floor(self) -> float:
        """The noise floor: :data:`FLOOR_PERCENTILE` of the block variances."""
        e = self.energies()
        return float(np.percentile(e, FLOOR_PERCENTILE)) if e.size else 0.0

    def spans(self) -> list[tuple[int, int]]:
        """Active spans ``(start, stop)`` in absolute samples, sorted and disjoint; the whole
        capture as one span when it is mostly active (see the module docstring)."""
        e = self.energies()
        if e.size == 0:
            return []
        floor = self.floor()
        whole = [(0, self.n)]
        if not floor > 0:
            return whole if np.any(e > 0) else []
        active = e > ACTIVE_RATIO * floor
        if active.mean() > ALL_ACTIVE_FRACTION or not active.any():
            return whole        # mostly active, or one level throughout (a tape track, or all noise)
        if floor > ACTIVE_RATIO * float(np.percentile(e, 2.0)):
            return whole        # the floor is itself signal: less than a fifth of the capture is quiet
        return _spans_of(active, self.block, self.n, self.rate_hz)


def _spans_of(active: np.ndarray, block: int, n: int, rate_hz: float) -> list[tuple[int, int]]:
    """Runs of active blocks, merged across short gaps and widened by the guard, in samples."""
    on = np.flatnonzero(active)
    if on.size == 0:
        return []
    merge = max(1, int(MERGE_GAP_S * rate_hz / block))
    breaks = np.flatnonzero(np.diff(on) > merge)
    firsts = np.concatenate(([on[0]], on[breaks + 1]))
    lasts = np.concatenate((on[breaks], [on[-1]]))
    guard = int(round(GUARD_S * rate_hz))
    out: list[tuple[int, int]] = []
    for a, b in zip(firsts.tolist(), lasts.tolist()):
        lo, hi = max(0, a * block - guard), min(n, (b + 1) * block + guard)
        if out and lo <= out[-1][1]:
            out[-1] = (out[-1][0], hi)
        else:
            out.append((lo, hi))
    return out


def active_spans(x: np.ndarray, rate_hz: float) -> list[tuple[int, int]]:
    """The active spans of a whole channel ``x`` (1-D) at ``rate_hz`` (Hz), in samples."""
    gate = Activity(float(rate_hz))
    gate.feed(x)
    return gate.spans()
