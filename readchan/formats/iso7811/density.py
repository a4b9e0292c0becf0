"""Which track a read came from, decided from the physics the capture shows.

Input: a card read's bits (leading zeros), its clocking zeros' pulse widths over the bit cell,
the frame's format and length, the channel layout.
Output: :class:`TrackEvidence` (the track, its basis, the votes, ambiguity).

A read's bit period gives its speed only through the recording density: 210 bpi on tracks 1
and 3, 75 bpi on track 2 (ISO/IEC 7811-2).  Tracks 2 and 3 share the BCD character set, so
the characters alone do not tell them apart, and a wrong guess makes every speed 2.8× wrong.
Two measurements do:

* **Pulse width over the bit cell.**  A head's PW50 is a length, fixed by its gap, spacing and
  the medium's transition length (PW50 = sqrt(g² + 4(d + a)²), Karlqvist head over an arctan
  transition; Bertram, *Theory of Magnetic Recording*, 1994, ch. 5).  Over a 121 µm cell
  (210 bpi) it is 2.8× the fraction of a cell it is over a 338.7 µm cell (75 bpi).  Heads with
  gaps of about 10–25 µm (common practice, no source) and (d + a) of about 5–25 µm give PW50 of
  about 14–56 µm, so a width below ``PW50_75_MAX`` cell fits only 75 bpi, above
  ``PW50_210_MIN`` only 210 bpi, and in between both.
* **Leading clocking zeros.**  The start sentinel sits about 7.4 mm from the card's edge
  (ISO/IEC 7811; from memory, medium confidence), about 61 zeros at 210 bpi and 22 at 75 bpi.
  A read that shows at least ``ZEROS_210_MIN`` zeros before its start sentinel fits only
  210 bpi; from ``ZEROS_75_MIN`` to ``ZEROS_75_MAX`` it fits 75 bpi (fewer: the zeros near the
  edge were not read, and the count says nothing).

Each measurement votes for a density or abstains; the read is assigned when at least one
votes and none disagrees, else it is *ambiguous* and keeps the character-set default
(track 2 for BCD) with that said.  An explicit track, the channel of a three-channel capture,
the alphanumeric set (track 1 only) and a BCD text too long for track 2 decide before the
physics is asked.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from readchan._compiled import SAMPLE_JIT_AFTER, kernel
from readchan.formats.iso7811.charset import TRACKS, TrackSpec
from readchan.units import bit_cell_m

__all__ = ["TrackEvidence", "decide_track", "clocking_pw50_cell", "leading_zeros",
           "PW50_75_MAX", "PW50_210_MIN", "ZEROS_210_MIN", "ZEROS_75_MIN", "ZEROS_75_MAX"]

HEAD_PW50_MIN_M = 14e-6
"""Narrowest plausible head PW50 (m): sqrt(g² + 4(d+a)²) with g = 10 µm, d + a = 5 µm."""
HEAD_PW50_MAX_M = 56e-6
"""Widest plausible head PW50 (m): g = 25 µm, d + a = 25 µm."""
CELL_210_M = bit_cell_m(210.0)
CELL_75_M = bit_cell_m(75.0)

PW50_75_MAX = HEAD_PW50_MIN_M / CELL_210_M
"""Below this PW50/cell (0.116) no plausible head records at 210 bpi: the read is 75 bpi."""
PW50_210_MIN = HEAD_PW50_MAX_M / CELL_75_M
"""Above this PW50/cell (0.165) no plausible head records at 75 bpi: the read is 210 bpi."""

EDGE_TO_START_M = 7.4e-3
"""Start sentinel's distance from the card edge (ISO/IEC 7811; from memory, medium)."""
ZEROS_210_MIN = 44
"""At least this many leading zeros (0.72 × the 61 of 210 bpi; 2 × the 22 of 75 bpi) fit
only 210 bpi."""
ZEROS_75_MIN = 15
"""From this many leading zeros (0.7 × 22) up to ``ZEROS_75_MAX`` the read fits 75 bpi."""
ZEROS_75_MAX = 30
"""Up to this many leading zeros (1.35 × 22; half of 61) the read fits 75 bpi."""


@dataclass(frozen=True)
class TrackEvidence:
    """Why a read was assigned its track.

    Attributes
    ----------
    track : the assumed track, or None (an unknown custom format).
    basis : ``"given"`` (``--track``), ``"channel"`` (channel i of a three-channel capture),
        ``"format"`` (alphanumeric: track 1), ``"length"`` (too long for track 2),
        ``"physics"`` (pulse width and/or clocking zeros), ``"ambiguous"`` (the measurements
        do not decide; the character set's default is kept).
    pw50_cell : clocking-zero PW50 over the bit cell, or None (logic capture, too few pulses).
    pw50_vote : density (bpi) the pulse width fits, or None.
    leading_zeros : zeros before the start sentinel, in reading order.
    zeros_vote : density (bpi) the zero count fits, or None.
    """

    track: TrackSpec | None
    basis: str
    pw50_cell: float | None = None
    pw50_vote: float | None = None
    leading_zeros: int | None = None
    zeros_vote: float | None = None

    @property
    def ambiguous(self) -> bool:
        return self.basis == "ambiguous"

    def text(self) -> str:
        """One line: the track assumed and on what evidence."""
        t = "track ?" if self.track is None else f"track {self.track.number} ({self.track.density_bpi:.0f} bpi)"
        if self.basis == "given":
            return f"{t}: given"
        if self.basis == "channel":
            return f"{t}: channel position in a three-channel capture"
        if self.basis == "format":
            return f"{t}: alphanumeric characters (track 1 only)"
        if self.basis == "length":
            return f"{t}: too many characters for track 2"
        parts = []
        if self.pw50_cell is not None:
            vote = "fits both densities" if self.pw50_vote is None else f"fits {self.pw50_vote:.0f} bpi only"
            parts.append(f"PW50 {self.pw50_cell:.3f} cell ({vote}: a {self.pw50_cell * CELL_210_M * 1e6:.0f} µm "
                         f"head at 210 bpi, {self.pw50_cell * CELL_75_M * 1e6:.0f} µm at 75 bpi)")
        if self.leading_zeros is not None:
            vote = "says nothing" if self.zeros_vote is None else f"fits {self.zeros_vote:.0f} bpi"
            parts.append(f"{self.leading_zeros} leading zeros ({vote}; about 61 at 210 bpi, 22 at 75 bpi)")
        why = "; ".join(parts) if parts else "no pulse width or clocking zeros to judge by"
        if self.basis == "ambiguous":
            return f"ambiguous, {t} assumed: {why}"
        return f"{t}: {why}"


def leading_zeros(bits: np.ndarray, first_bit: int, direction: str) -> int:
    """Zero bits immediately before the start sentinel's first bit ``first_bit``, in reading
    order (before it in time for a forward read, after it for a reverse one)."""
    b = np.asarray(bits)
    if direction == "forward":
        before = b[:first_bit][::-1]
    else:
        before = b[first_bit + 1:]
    ones = before.nonzero()[0]
    return int(ones[0]) if ones.size else int(before.size)


def clocking_pw50_cell(w: np.ndarray, rate_hz: float, idx: np.ndarray, sign: np.ndarray,
                       ratio: np.ndarray, period_s: np.ndarray) -> float | None:
    """Isolated-pulse PW50 in cells from the pulses of the clocking zeros.

    ``w`` is a wide-band signal (baseline removed, no low-pass), ``idx`` and ``sign`` the
    read's transitions' sample indices and polarities, ``ratio`` its normalised intervals, and
    ``period_s`` the bit period at each transition.  Pulses with full cells on both sides, two
    deep, are resampled on a grid of ±0.5 cell around their peaks (linear interpolation),
    sign-corrected and averaged; the half-amplitude width of the mean is corrected for its
    neighbours' tails (:func:`readchan.measure.pulse.isolated_pw50_cell`, Lorentzian train).
    None with fewer than 8 such pulses.
    """
    from readchan.measure.pulse import PULSE_GRID, half_width, isolated_pw50_cell

    full = ratio >= 0.75
    j = np.arange(2, ratio.size - 1)
    j = j[full[j - 2] & full[j - 1] & full[j] & full[np.minimum(j + 1, ratio.size - 1)]]
    if j.size < 8:
        return None
    per = period_s[j] * rate_hz
    if _mean_pulse.ready(j.size * PULSE_GRID.size):          # the same, compiled in one loop
        acc, count = _mean_pulse(w, idx[j].astype(float), np.asarray(sign, float)[j], per, PULSE_GRID)
        if count < 8:
            return None
        width = half_width(PULSE_GRID, acc / count)
        return isolated_pw50_cell(width) if math.isfinite(width) else None
    pos = idx[j][:, None] + PULSE_GRID[None, :] * per[:, None]
    ok = (pos.min(axis=1) >= 0) & (pos.max(axis=1) <= w.size - 1)
    if ok.sum() < 8:
        return None
    pos, sg = pos[ok], sign[j][ok]
    # interpolate on the read's own stretch of w, not the whole channel (that cost grew with
    # reads × capture length); lo is 0 or at least the stretch's length, so pos - lo is exact
    # (Sterbenz) and the result is bit-identical to interpolating on the whole signal
    lo, hi = int(pos.min()), int(math.ceil(pos.max())) + 2
    if lo < hi - lo:
        lo = 0
    hi = min(hi, w.size)
    pulses = np.interp((pos - lo).ravel(), np.arange(hi - lo, dtype=float), w[lo:hi]).reshape(pos.shape) * sg[:, None]
    width = half_width(PULSE_GRID, pulses.mean(axis=0))
    return isolated_pw50_cell(width) if math.isfinite(width) else None


@kernel(jit_after=4 * SAMPLE_JIT_AFTER)
def _mean_pulse(w, centre, sign, per, grid):
    """The sum over pulses of ``sign`` × ``w`` linearly interpolated at ``centre + grid·per``
    (samples), for the pulses whose grid lies within ``w``, and their count: the numpy path of
    :func:`clocking_pw50_cell` in one loop (``numpy.interp``'s arithmetic on unit-spaced
    abscissae: slope·(p − j) + w[j], w[j] at whole p; rows summed in order, as
    ``mean(axis=0)`` adds them)."""
    m = grid.size
    n = w.size
    acc = np.zeros(m)
    row = np.empty(m)
    count = 0
    for r in range(centre.size):
        lo = np.inf
        hi = -np.inf
        for g in range(m):
            p = centre[r] + grid[g] * per[r]
            row[g] = p
            lo = min(lo, p)
            hi = max(hi, p)
        if not (lo >= 0 and hi <= n - 1):
            continue
        for g in range(m):
            p = row[g]
            k = int(np.floor(p))
            if k >= n - 1:
                v = w[n - 1]
            elif p == k:
                v = w[k]
            else:
                v = (w[k + 1] - w[k]) * (p - k) + w[k]
            v = v * sign[r]
            acc[g] = v if count == 0 else acc[g] + v
        count += 1
    return acc, count


def decide_track(fmt_name: str, n_chars: int, channel: int, n_channels: int, explicit: int | None = None, *,
                 pw50_cell: float | None = None, zeros: int | None = None) -> TrackEvidence:
    """The track of a read and the evidence for it (see the module docstring)."""
    if explicit is not None:
        return TrackEvidence(TRACKS[explicit], "given", pw50_cell, leading_zeros=zeros)
    if n_channels == 3 and TRACKS[channel + 1].fmt.name == fmt_name:
        return TrackEvidence(TRACKS[channel + 1], "channel", pw50_cell, leading_zeros=zeros)
    if fmt_name == TRACKS[1].fmt.name:
        return TrackEvidence(TRACKS[1], "format", pw50_cell, leading_zeros=zeros)
    if fmt_name != TRACKS[2].fmt.name:
        return TrackEvidence(None, "format", pw50_cell, leading_zeros=zeros)
    if n_chars + 1 > TRACKS[2].max_chars:
        return TrackEvidence(TRACKS[3], "length", pw50_cell, leading_zeros=zeros)
    pv = None
    if pw50_cell is not None:
        pv = 75.0 if pw50_cell < PW50_75_MAX else (210.0 if pw50_cell > PW50_210_MIN else None)
    zv = None
    if zeros is not None:
        zv = 210.0 if zeros >= ZEROS_210_MIN else (75.0 if ZEROS_75_MIN <= zeros <= ZEROS_75_MAX else None)
    votes = {v for v in (pv, zv) if v is not None}
    if len(votes) == 1:
        track = TRACKS[3] if votes.pop() == 210.0 else TRACKS[2]
        return TrackEvidence(track, "physics", pw50_cell, pv, zeros, zv)
    return TrackEvidence(TRACKS[2], "ambiguous", pw50_cell, pv, zeros, zv)
