"""Physical evidence of damage in a read, and the characters it touches.

Input: a read's :class:`readchan.frontend.detect.Transitions` and
:class:`readchan.linecode.f2f.BitStream`.
Output: per-bit evidence arrays (:func:`damage_evidence`) and the damaged characters of a frame.

Parity and LRC cannot see two characters that carry the same pair of bit flips: every parity
bit and every LRC column still balance (the ISO code is a product of two single-parity checks,
whose smallest undetectable pattern is 2 characters × 2 columns).  Damage that makes such a
pattern (stray or missing pulses in two places, a stretch of the capture reversed or replaced)
leaves marks in the timing and the pulses that the decoder already measured.  This module
collects them per bit:

``guessed pulse``
    a transition the detector had to guess at: a noise peak dropped beside a pulse of the same
    polarity, a pulse rescued below threshold, or two pulses of one polarity in a row with none
    between (a polarity break: the medium's magnetisation can only flip back and forth, so
    transitions alternate; :mod:`readchan.frontend.detect`);
``parse break``
    an interval the F2F parse could not pair: a lone half cell, or an interval longer than
    1.6 cells (:mod:`readchan.linecode.f2f`);
``odd interval``
    an interval neither a half nor a whole cell: within :data:`ODD_INTERVAL` cell of the
    ¾-cell decision boundary, or outside 0.3–1.35 cells;
``phase step``
    the cell boundaries on the two sides of a bit lie on grids offset by more than
    :data:`PHASE_STEP` cell (a line fitted to the :data:`WINDOW` boundaries before and one fitted to
    the :data:`WINDOW` after disagree where they meet): the recording's clock jumped, which
    a card written at constant density and moved by a hand cannot do;
``period step``
    the slopes of those two lines (the bit period) differ by more than :data:`PERIOD_STEP`:
    a speed change within a few bits, beyond any hand.

Acceptance (:func:`readchan.channel.reads_from`): a read whose checks pass but whose evidence
touches more than :data:`MAX_DAMAGED_CHARS` character (a corrected character counts) is not
valid, reason ``"suspect"``: with two damaged characters a compensating pattern is possible.
The README gives the rule's cost on undamaged captures and its effect on damaged ones.
"""

from __future__ import annotations

import numpy as np

from readchan.frontend.detect import TR_EXTRA, TR_MISSING, Transitions
from readchan.formats.iso7811.framing import Frame
from readchan.linecode.f2f import BitStream
from readchan.smallstats import median

__all__ = ["EVIDENCE", "MAX_DAMAGED_CHARS", "damage_evidence", "damaged_characters", "boundary_steps"]

EVIDENCE = ("guessed pulse", "parse break", "odd interval", "phase step", "period step", "pulse size")
"""The kinds of evidence, in report order."""

MAX_DAMAGED_CHARS = 1
"""Most characters a valid read may hold evidence of damage in."""

ODD_INTERVAL = 0.12
"""Least distance (cells) from both a half and a whole cell of an interval that is neither
(so 0.62–0.88 cells, or outside 0.38–1.12)."""

OUTLIER = 8.0
"""A timing statistic counts as evidence above this many robust standard deviations of its
own spread over the read."""

PULSE_SIZE = float(np.log(1.6))
"""Least size (natural log of the ratio to the read's typical pulse) of a pulse that stands out."""

CLIPPED_FLOORS = {"odd interval": 0.25, "phase step": 0.3, "period step": 0.06}
"""Floors of the timing evidence in a clipped capture (pulses timed by the middle of flat
crests): clipping on a wandering baseline moves good pulses' timing by up to 0.2 cell, so
there only intervals outside 0.25–1.25 cells, phase steps over 0.3 cell and period steps over
6 % count."""

GUESS_FLAGS = np.uint8(TR_EXTRA | TR_MISSING)
"""Detector flags that count as a guessed pulse: a noise peak dropped beside a pulse, or a
polarity break.  A pulse rescued below threshold (``TR_WEAK``) does not count: clipped crests
on a wandering baseline need such rescues on good reads."""

WINDOW = 8
"""Cell boundaries fitted on each side of a bit for the phase and period steps."""

PHASE_STEP = 0.1
"""Least phase step (cells) that counts as a jump of the clock."""

PERIOD_STEP = 0.03
"""Least relative period change between the two sides that counts as a jump in speed."""


def _window_fits(y: np.ndarray, w: int) -> tuple[np.ndarray, np.ndarray]:
    """Least-squares line (slope, value at the window's centre) of every window of ``w``
    consecutive values of ``y`` against their index, vectorised with cumulative sums."""
    n = y.size - w + 1
    x = np.arange(w, dtype=float) - 0.5 * (w - 1)            # centred abscissa
    sxx = float(np.sum(x * x))
    cy = np.concatenate(([0.0], np.cumsum(y)))
    ciy = np.concatenate(([0.0], np.cumsum(np.arange(y.size) * y)))
    sy = cy[w:] - cy[:n]
    siy = ciy[w:] - ciy[:n]
    start = np.arange(n, dtype=float)
    sxy = siy - (start + 0.5 * (w - 1)) * sy                  # Σ (i − centre)·y
    return sxy / sxx, sy / w


def boundary_steps(start_s: np.ndarray, w: int = WINDOW) -> tuple[np.ndarray, np.ndarray]:
    """Phase step (cells) and relative period step at every cell boundary ``j`` of a read.

    A line is fitted to boundaries ``j−w … j−1`` and another to ``j+1 … j+w`` (boundary ``j``
    itself, which a single displaced transition moves, takes part in neither); the phase step
    is the difference of their predictions of boundary ``j`` over the mean period, the period
    step the ratio of their slopes less one.  Zero where a side has fewer than ``w`` points.
    """
    b = np.asarray(start_s, float)
    n = b.size
    phase = np.zeros(n)
    period = np.zeros(n)
    if n < 2 * w + 1:
        return phase, period
    y = b - b[0]
    slope, centre = _window_fits(y, w)
    # boundaries j = w … n−w−1 fit the windows starting at j − w (left) and j + 1 (right): slices
    half = 0.5 * (w - 1)
    s_l, s_r = slope[:n - 2 * w], slope[w + 1:n - w + 1]
    pred_l = centre[:n - 2 * w] + s_l * (w - half)              # j − (left + half) = w − half
    pred_r = centre[w + 1:n - w + 1] + s_r * (-1.0 - half)      # j − (right + half) = −1 − half
    mean = 0.5 * (s_l + s_r)
    ok = mean > 0
    if ok.all():
        phase[w:n - w] = (pred_r - pred_l) / mean
        period[w:n - w] = s_r / s_l - 1.0
    else:
        j = np.arange(w, n - w)[ok]
        phase[j] = (pred_r[ok] - pred_l[ok]) / mean[ok]
        period[j] = s_r[ok] / s_l[ok] - 1.0
    return phase, period


def _scale(v: np.ndarray) -> float:
    """Robust standard deviation of zero-centred values: median |v| / 0.6745 (the median of
    a half-normal distribution is 0.6745 σ)."""
    return median(np.abs(v)) / 0.6745 if v.size else 0.0


def bit_statistics(bs: BitStream) -> dict[str, np.ndarray | float]:
    """Per-bit timing statistics of a read and the read's own scale of each.

    ``deviation``: per bit, the largest distance (cells) of its intervals from the nearer of
    a half and a whole cell; ``phase`` and ``period``: per bit, the larger |step| of
    :func:`boundary_steps` at its two boundaries; ``*_scale``: their robust spread over the
    read (:func:`_scale`), the yardstick of what is ordinary for this read.
    """
    n = len(bs)
    r = bs.ratio
    dev_iv = np.minimum(np.abs(r - 0.5), np.abs(r - 1.0))
    deviation = np.zeros(n)
    ft = bs.first_transition
    if r.size and n and ft[0] == 0 and (n == 1 or (ft[1:] > ft[:-1]).all()):
        # every interval belongs to the bit whose first interval is the last at or before it
        np.maximum(np.maximum.reduceat(dev_iv, ft), 0.0, out=deviation)
    elif r.size and n:
        owner = (np.searchsorted(ft, np.arange(r.size), side="right") - 1).clip(0, n - 1)
        np.maximum.at(deviation, owner, dev_iv)
    phase, period = boundary_steps(bs.start_s)
    inner = slice(WINDOW, max(WINDOW, n - WINDOW))
    both = lambda v: np.maximum(np.abs(v), np.abs(np.concatenate((v[1:], [0.0]))))  # noqa: E731
    return {"deviation": deviation, "phase": both(phase), "period": both(period),
            "deviation_scale": _scale(dev_iv), "phase_scale": _scale(phase[inner]),
            "period_scale": _scale(period[inner])}


def pulse_size(tr: Transitions) -> tuple[np.ndarray, float]:
    """Per transition, ``|log(|amplitude| / envelope) − median|`` (the pulse's size against the
    local pulse envelope, in natural-log units), and the read's robust spread of it
    (:func:`_scale`).  Head pulses follow the swipe speed smoothly (Faraday's law); a stray
    spike or a pulse added on top of another stands out."""
    env = np.asarray(tr.envelope, float)
    a = np.abs(np.asarray(tr.amplitude, float))
    ok = (env > 0) & (a > 0)
    if a.size and ok.all():                 # the usual case: every pulse measured
        la = np.log(a / env)
        dev = np.abs(la - median(la))
        return dev, _scale(dev)
    la = np.zeros(a.size)
    la[ok] = np.log(a[ok] / env[ok])
    dev = np.abs(la - (median(la[ok]) if ok.any() else 0.0))
    dev[~ok] = 0.0
    return dev, _scale(dev[ok]) if ok.any() else 0.0


def damage_evidence(tr: Transitions, bs: BitStream, *, clipped: bool = False) -> dict[str, np.ndarray]:
    """Indices of the bits of ``bs`` carrying each kind of :data:`EVIDENCE`.

    ``tr`` are the read's transitions (``bs.first_transition`` indexes them); ``clipped``:
    the capture was clipped (:data:`CLIPPED_FLOORS` apply).  The timing
    kinds are judged against the read's own spread: a statistic counts when it exceeds both
    a floor and :data:`OUTLIER` times the read's robust spread of it, so a read whose every
    interval wanders (heavy jitter, a worn card) raises its own bar and a clean read shows a
    small jump.
    """
    n = len(bs)
    out = {k: np.zeros(0, np.int64) for k in EVIDENCE}
    if n == 0:
        return out
    flagged = (tr.flags & GUESS_FLAGS).nonzero()[0]
    if flagged.size:
        k = np.searchsorted(bs.first_transition, flagged, side="right") - 1
        out["guessed pulse"] = np.unique(np.concatenate((k, k - 1)).clip(0, n - 1))
    out["parse break"] = bs.flags.nonzero()[0]
    st = bit_statistics(bs)
    for name, key, floor in (("odd interval", "deviation", ODD_INTERVAL), ("phase step", "phase", PHASE_STEP),
                             ("period step", "period", PERIOD_STEP)):
        floor = CLIPPED_FLOORS[name] if clipped else floor
        limit = max(floor, OUTLIER * float(st[key + "_scale"]))
        out[name] = (st[key] > limit).nonzero()[0]
    if tr.kind == "head" and len(tr):
        dev, scale = pulse_size(tr)
        big = (dev > max(PULSE_SIZE, OUTLIER * scale)).nonzero()[0]
        if big.size:
            k = np.searchsorted(bs.first_transition, big, side="right") - 1
            out["pulse size"] = np.unique(np.concatenate((k, k - 1)).clip(0, n - 1))
    return out


def damaged_characters(fr: Frame, evidence: dict[str, np.ndarray],
                       corrected: tuple[int, ...] = ()) -> tuple[tuple[int, tuple[str, ...]], ...]:
    """Characters of ``fr`` (index into its text; ``len(text)`` is the LRC character) that hold
    evidence, with its kinds; the ``corrected`` characters count as damaged ("corrected")."""
    idx = np.asarray(fr.bit_index)
    if idx.size == 0:
        return ()
    n_bits = int(idx.max()) + 1
    owner = np.full(max(n_bits, 1), -1, np.int64)
    owner[idx.ravel()] = np.repeat(np.arange(idx.shape[0]), idx.shape[1])
    found: dict[int, list[str]] = {int(c): ["corrected"] for c in corrected}
    for kind in EVIDENCE:
        bits = np.asarray(evidence.get(kind, ()), np.int64)
        if bits.size == 0:
            continue                    # most kinds are empty on a read: nothing to look up
        bits = bits[(bits >= 0) & (bits < n_bits)]
        for c in np.unique(owner[bits]).tolist():
            if c >= 0:
                found.setdefault(int(c), []).append(kind)
    return tuple((c, tuple(found[c])) for c in sorted(found))
