"""Biphase-mark line code for tape: bits ↔ transition positions, and transition times → bits.

Input (decode): a tape signal (line level or raw head), or transition times in seconds.
Output: :class:`TapeBits` – bits in capture order with per-bit start times, periods and
margins, one run per stretch of continuous signal.

Biphase mark has a transition at every bit-cell boundary and one more mid-cell for a 1: the
same modulation as F2F on a card (ISO/IEC 7811-2; SMPTE ST 12-1 for LTC).  The cell decisions
are the card channel's Viterbi parse of intervals against a bit-period trace
(:mod:`readchan.linecode.f2f`).  What is tape-specific is the period trace, and the parse's open
ends (:func:`open_parse`: a stretch may start and stop inside a cell):

* Tape plays from 0.1× to 10× nominal, with the speed changing during the capture, and a
  frame of timecode has no run of clocking zeros to learn the period from.  The trace is
  anchored where two neighbouring intervals differ by a factor of two: a full cell next to a
  half cell (a 0 next to a 1), where the longer one *is* the bit period.  Every LTC frame holds
  such pairs (its sync word 0011 1111 1111 1101 has three), so anchors occur at least three
  times per frame at any speed.  The anchors' periods are median-filtered over 9 anchors and
  interpolated in between.  A steady tone or pure noise gives no anchors, hence no bits.
* Biphase mark reads the same backwards (each cell still starts with a transition), so
  reverse play gives the bits in reverse order; the framer tells the direction.
* A stretch of signal ends where the interval between transitions exceeds ``gap_factor``
  times the local typical interval (:func:`readchan.frontend.segment.segment`).

Transitions of a line-level signal (a square wave) are mid-level crossings with hysteresis, the
rule of :func:`readchan.frontend.detect.detect_logic` run vectorised (:mod:`readchan.frontend.crossings`),
robust to the tilt of AC coupling because an exponential decay never crosses the mid level;
those of a raw head signal (pulses whose amplitude grows with speed) are the peaks of
:func:`readchan.frontend.detect.detect_head`, whose envelope follows the amplitude; its candidate floor
is 2 % of the largest pulses, since a tape signal has no quiet stretch to take the noise from.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.ndimage import median_filter

from readchan._compiled import kernel
from readchan.frontend.detect import Transitions, detect_head
from readchan.errors import ParameterError
from readchan.frontend.segment import segment
from readchan.frontend.crossings import hysteresis_crossings
from readchan.linecode.f2f import BIT_LONE_HALF, BitStream, _assemble, cell_positions

ANCHOR_TOLERANCE = 0.3
"""A pair of intervals anchors the period when log2 of their ratio lies within ±0.3 of ±1."""
SIGNAL_KINDS = ("auto", "line", "head")


def biphase_positions(bits: np.ndarray, start_level: int = 0) -> tuple[np.ndarray, int]:
    """Transition positions, in bit cells from the first boundary, of ``bits`` in biphase mark.

    Returns (positions, level after the last cell): boundaries at k (k = 0..n) and mid-cell
    transitions at k + ½ for every 1 bit; each transition flips the level, starting from
    ``start_level`` (0 or 1) before the first boundary.
    """
    pos = cell_positions(bits)
    return pos, (int(start_level) + pos.size) % 2


@dataclass(frozen=True)
class TapeBits:
    """Biphase-mark bits of a capture, in capture order.

    Attributes
    ----------
    bits : uint8 0/1.
    start_s : time of the transition that opens each bit cell, seconds.
    end_s : time of the transition that closes each cell, seconds.
    period_s : bit period each bit was decided against, seconds.
    margin : decision margin per bit (:mod:`readchan.linecode.f2f`), 1 ideal, 0 on the boundary.
    flags : per-bit ``readchan.linecode.f2f.BIT_*``.
    run : index of the stretch of continuous signal each bit belongs to.
    runs_s : (n_runs, 2) start and end time of each stretch, seconds.
    kind : the transition detector used, ``"line"`` or ``"head"``.
    n_transitions : transitions detected in the whole capture.
    """

    bits: np.ndarray
    start_s: np.ndarray
    end_s: np.ndarray
    period_s: np.ndarray
    margin: np.ndarray
    flags: np.ndarray
    run: np.ndarray
    runs_s: np.ndarray
    kind: str
    n_transitions: int

    def __len__(self) -> int:
        return int(self.bits.size)


def period_anchors(times_s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(time_s, period_s) of every full cell that stands next to a half cell.

    Two neighbouring intervals whose ratio is 2 (within ``ANCHOR_TOLERANCE`` in log2) are a
    full cell and a half cell; the longer one is the bit period, dated at its middle.
    """
    t = np.asarray(times_s, float)
    d = np.diff(t)
    if d.size < 2:
        return np.zeros(0), np.zeros(0)
    with np.errstate(divide="ignore", invalid="ignore"):
        lr = np.log2(d[1:] / d[:-1])
    up = np.abs(lr - 1.0) < ANCHOR_TOLERANCE          # half then full: the full is d[i+1]
    down = np.abs(lr + 1.0) < ANCHOR_TOLERANCE        # full then half: the full is d[i]
    idx = np.concatenate((np.flatnonzero(up) + 1, np.flatnonzero(down)))
    idx = np.unique(idx)
    return 0.5 * (t[idx] + t[idx + 1]), d[idx]


def period_trace(times_s: np.ndarray, *, window: int = 15) -> np.ndarray | None:
    """Bit period (s) at every transition (see the module docstring), or None when there are
    fewer than 3 anchors.

    Two passes: the anchors, median-filtered over 9 of them and interpolated, give a coarse
    trace; against it every interval is a half cell (ratio below ¾) or a full cell, so every
    interval gives a cell estimate (2Δ or Δ), and those, median-filtered over ``window``
    intervals, are the trace, which then follows a steep speed ramp within a few cells.
    """
    t = np.asarray(times_s, float)
    at, per = period_anchors(t)
    if at.size < 3:
        return None
    per = median_filter(per, size=min(9, per.size), mode="nearest")
    d = np.diff(t)
    mid = 0.5 * (t[1:] + t[:-1])
    coarse = np.interp(mid, at, per)
    cell = np.where(d < 0.75 * coarse, 2.0 * d, d)
    fine = median_filter(cell, size=min(window, cell.size), mode="nearest")
    return np.interp(t, mid, fine)


def bits_from_times(times_s: np.ndarray) -> BitStream | None:
    """Biphase-mark bits of one stretch of transition times, or None when it has no anchors.

    The cells are the Viterbi parse of the intervals against :func:`period_trace`
    (:func:`open_parse`)."""
    t = np.asarray(times_s, float)
    trace = period_trace(t)
    if trace is None:
        return None
    return open_parse(t, trace)


def open_parse(t: np.ndarray, period_s: np.ndarray) -> BitStream:
    """Biphase-mark cells of the transition times ``t`` (s) against the bit period ``period_s``
    (s, at every transition): the sequence parse of :mod:`readchan.linecode.f2f` (the same moves and
    costs: a 0 is one interval, r = Δ/T near 1; a 1 is two, near ½ each; a lone half is a
    flagged error) with open ends.

    A stretch of tape signal starts and stops wherever the capture (or a dropout) cuts it, not
    at a cell boundary: its first interval may be the second half of a 1 whose opening boundary
    came before it, and its last the first half of a 1 whose closing boundary came after.  The
    parse may therefore take the first interval as such a leading half and leave the last one
    as such a trailing half, each costing what one half of a 1 costs in a pair,
    ½·(r − ½)², and making no bit (the cell is not whole).  A parse closed at both ends would
    instead have to call that half a lone half (cost ½ + (r − ½)²) or shift the cells before
    it, taking a half interval for a 0 (cost ¼): the cheaper, and the wrong, choice when the
    last cells are 1s.  Ties go to the closed parse.
    """
    t = np.asarray(t, float)
    r = np.diff(t) / np.asarray(period_s, float)[:-1]
    zero = (r - 1.0) ** 2
    lone = 0.5 + (r - 0.5) ** 2
    half = 0.5 * (r - 0.5) ** 2
    pair = np.empty(r.size)
    if r.size:
        pair[0] = np.inf
        pair[1:] = ((r[:-1] + r[1:] - 1.0) ** 2) + 0.5 * ((r[:-1] - 0.5) ** 2 + (r[1:] - 0.5) ** 2)
    kinds, lead = _open_viterbi(zero, lone, half, pair)
    widths = np.where(kinds == 2, 2, 1)
    first = lead + np.concatenate(([0], np.cumsum(widths)[:-1])).astype(np.int64)[:kinds.size]
    return _assemble(t, first, kinds, r, np.asarray(period_s, float)[first])


@kernel
def _open_viterbi(zero, lone, half, pair):
    """The recursion and backtrace of :func:`open_parse` over the move costs of the ``n``
    intervals (``pair[i]``: intervals i − 1 and i as a 1; ``pair[0]`` infinite): the moves
    (1: a 0, 2: a 1, 3: a lone half), in capture order, and 1 when the first interval is a
    leading half (else 0)."""
    n = zero.size
    move = np.zeros(n + 1, np.int8)     # 1: a 0 (one interval); 2: a 1 (two); 3: a lone half; 4: a leading half
    cost = np.zeros(n + 1)
    for i in range(1, n + 1):
        a = cost[i - 1] + zero[i - 1]
        b = cost[i - 1] + lone[i - 1]
        c = cost[i - 2] + pair[i - 1] if i >= 2 else np.inf
        if a <= b and a <= c:
            cost[i] = a
            move[i] = 1
        elif c <= b:
            cost[i] = c
            move[i] = 2
        else:
            cost[i] = b
            move[i] = 3
        if i == 1 and half[0] < cost[1]:
            cost[1] = half[0]
            move[1] = 4
    i = n - 1 if n >= 2 and cost[n - 1] + half[n - 1] < cost[n] else n
    kinds = np.empty(n, np.int8)
    m = 0
    lead = 0
    while i > 0:
        mv = move[i]
        if mv == 4:
            lead = 1
        else:
            kinds[m] = mv
            m += 1
        i -= 2 if mv == 2 else 1
    return kinds[:m][::-1].copy(), lead


LINE_FILL = 0.6
"""Mean |x − mid| over half the 1–99 % span at and above which a tape signal is line level."""


def signal_kind(x: np.ndarray) -> str:
    """``"line"`` or ``"head"``: how full the signal is between its rails.

    A square wave sits at its rails, so the mean of |x − mid| is close to half its 1–99 %
    span (0.83–0.96 for line-level LTC from crawl through AC coupling to 10×, 0.71 through a
    100 Hz–8 kHz band); a train of head pulses spends most of its time below its peaks (about
    0.3–0.4).  A card-style two-level test (the time spent near the mid level) fails for
    tape, whose edges at 2 kbit/s and 25 µs fill over 5 % of the samples at 48 kHz.
    """
    x = np.asarray(x, float)[:: max(1, x.size // 400_000)]
    lo, hi = np.percentile(x, [1.0, 99.0])
    if not hi > lo:
        return "head"
    fill = float(np.mean(np.abs(x - 0.5 * (lo + hi)))) / (0.5 * (hi - lo))
    return "line" if fill >= LINE_FILL else "head"


def transitions(x: np.ndarray, rate_hz: float, kind: str = "auto") -> tuple[Transitions, str]:
    """Transitions of a tape signal and the detector used (``"line"`` or ``"head"``).

    ``auto`` decides by :func:`signal_kind`.  The median is removed first.
    """
    if kind not in SIGNAL_KINDS:
        raise ParameterError(f"signal kind must be one of {', '.join(SIGNAL_KINDS)}, was {kind!r}")
    x = np.asarray(x, float)
    x = x - np.median(x[:: max(1, x.size // 400_000)])
    if kind == "auto":
        kind = signal_kind(x)
    # a tape signal has no quiet stretches to take the noise from, so the head detector's
    # floor is its own 2 % of the largest pulses and the envelope threshold rejects noise
    tr = _line_transitions(x, rate_hz) if kind == "line" else detect_head(x, rate_hz, floor_sigma=0.0)
    return tr, kind


def _line_transitions(x: np.ndarray, rate_hz: float, hysteresis: float = 0.2) -> Transitions:
    """Mid-level crossings with ± ``hysteresis`` × the 1–99 % span (``detect_logic``'s rule,
    vectorised by :func:`readchan.frontend.crossings.hysteresis_crossings`)."""
    lo, hi = np.percentile(x[:: max(1, x.size // 400_000)], [1.0, 99.0])
    mid = 0.5 * (lo + hi)
    t = hysteresis_crossings(x - mid, hysteresis * (hi - lo)) if hi > lo else np.zeros(0)
    idx = np.round(t).astype(np.int64)
    z = np.zeros(t.size)
    return Transitions(t / rate_hz, idx, z, z, np.zeros(t.size, np.uint8), float(rate_hz), "logic", 0.0)


def decode_biphase(x: np.ndarray, rate_hz: float, *, kind: str = "auto",
                   gap_factor: float = 6.0, max_gap_s: float = 0.05) -> TapeBits:
    """Biphase-mark bits of the tape signal ``x`` (one channel, sampled at ``rate_hz``).

    Parameters
    ----------
    x : samples of one channel.
    rate_hz : sample rate in Hz.
    kind : ``"auto"``, ``"line"`` (a square wave from a deck's output) or ``"head"``.
    gap_factor : a stretch of signal ends at an interval longer than this many typical intervals.
    max_gap_s : ... or longer than this outright (a full cell at 0.1× of 24 fps is 5.2 ms).
    """
    tr, used = transitions(x, rate_hz, kind)
    return bits_from_transitions(tr.times_s, kind=used, gap_factor=gap_factor, max_gap_s=max_gap_s)


def bits_from_transitions(times_s: np.ndarray, *, kind: str = "line", gap_factor: float = 6.0,
                          max_gap_s: float = 0.05) -> TapeBits:
    """:class:`TapeBits` of transition times ``times_s`` (seconds, increasing)."""
    t = np.asarray(times_s, float)
    tr = Transitions(t, np.zeros(t.size, np.int64), np.zeros(t.size), np.zeros(t.size),
                     np.zeros(t.size, np.uint8), 1.0, kind, 0.0)
    parts: list[tuple[BitStream, np.ndarray]] = []
    runs = []
    for seg in segment(tr, gap_factor=gap_factor, min_gap_s=0.0, max_gap_s=max_gap_s, min_transitions=24):
        ts = t[seg.start:seg.stop]
        bs = bits_from_times(ts)
        if bs is None or len(bs) == 0:
            continue
        ft = bs.first_transition
        width = np.where(bs.bits == 1, 2, 1)
        width = np.where(bs.flags & BIT_LONE_HALF, 1, width)       # a lone half spans one interval
        close = np.minimum(ft + width, ts.size - 1)
        parts.append((bs, ts[close]))
        runs.append((float(ts[0]), float(ts[-1])))
    if not parts:
        z = np.zeros(0)
        return TapeBits(np.zeros(0, np.uint8), z, z, z, z, np.zeros(0, np.uint8), np.zeros(0, np.int64),
                        np.zeros((0, 2)), kind, int(t.size))
    cat = np.concatenate
    return TapeBits(
        bits=cat([p.bits for p, _ in parts]).astype(np.uint8),
        start_s=cat([p.start_s for p, _ in parts]),
        end_s=cat([e for _, e in parts]),
        period_s=cat([p.period_s for p, _ in parts]),
        margin=cat([p.margin for p, _ in parts]),
        flags=cat([p.flags for p, _ in parts]).astype(np.uint8),
        run=cat([np.full(len(p), k, np.int64) for k, (p, _) in enumerate(parts)]),
        runs_s=np.asarray(runs, float),
        kind=kind,
        n_transitions=int(t.size),
    )
