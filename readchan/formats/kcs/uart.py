"""The Kansas City standard UART on the time axis, resumable: start edges to bytes, fed a tone
track at a time (:mod:`readchan.formats.kcs.read`, step 5 of its module docstring).

Input: :class:`readchan.formats.kcs.read.ToneTrack` s in capture order, each with the span of
start edges it is to read.
Output: the bytes, their start times, framing errors, margins, speeds, the leader and the
dropouts (:meth:`Uart.result`).
"""

from __future__ import annotations

import numpy as np

from readchan.formats.kcs.read import (BYTE_BITS, EDGE_SETBACK, MIN_MARK_BEFORE, MIN_TONE_CELLS, ToneTrack,
                                       _leader_s)


class Uart:
    """The UART on the time axis (module docstring, step 5) with its state between calls, so
    that a long capture's tone tracks can be fed piece by piece (:meth:`feed`); one call over
    the whole track is the whole-capture read."""

    def __init__(self, baud: int, min_leader_s: float, max_dropout_s: float) -> None:
        self.baud, self.min_leader_s, self.max_dropout_s = baud, min_leader_s, max_dropout_s
        self.out: list[int] = []
        self.times: list[float] = []
        self.errors: list[int] = []
        self.margins: list[float] = []
        self.speeds: list[float] = []
        self.dropouts: list[tuple[float, float]] = []
        self.in_block = False
        self.prev_end = -np.inf
        self.leader = 0.0
        self.resume_s = -np.inf                      # onsets before this are inside a byte read

    def result(self):
        """Bytes, start times, framing errors, margins, speeds, the leader and the dropouts."""
        return self.out, self.times, self.errors, self.margins, self.speeds, self.leader, self.dropouts

    def feed(self, track: ToneTrack, from_s: float = -np.inf, to_s: float = np.inf) -> None:
        """Read the start edges of ``track`` from ``from_s`` to before ``to_s`` (seconds); the
        track must hold the tone 12 bits past ``to_s`` and the leader before ``from_s``."""
        baud, min_leader_s, max_dropout_s = self.baud, self.min_leader_s, self.max_dropout_s
        out, times, errors, margins, speeds = self.out, self.times, self.errors, self.margins, self.speeds
        onsets = track.onsets_s
        centres = (np.arange(BYTE_BITS) + 0.5)[:, None]
        half = 0.3
        k = int(np.searchsorted(onsets, max(from_s, self.resume_s)))
        while k < onsets.size and onsets[k] < to_s:
            t = float(onsets[k])
            sp = track.speed_at(t)
            bit_s = 1.0 / (baud * sp)
            if self.in_block:
                _, cov = track.fractions(np.array([self.prev_end]), np.array([max(t, self.prev_end + 1e-9)]))
                self.in_block = cov[0] >= 0.8
            lost = None
            if not self.in_block:
                # a leader opens a block; after a short loss of tone inside one, 1.5 bits of idle
                # mark resume it and the loss is recorded as a dropout
                idle = _leader_s(track, t - EDGE_SETBACK * bit_s, min(min_leader_s, 1.5 * bit_s))
                if idle < min_leader_s:
                    if not (out and t - self.prev_end <= max_dropout_s and idle >= 1.5 * bit_s):
                        k += 1
                        continue
                    lost = (float(self.prev_end), t - EDGE_SETBACK * bit_s - idle)
            a = t + (centres[:, 0] - half) * bit_s
            b = t + (centres[:, 0] + half) * bit_s
            frac, cov = track.fractions(a, b)
            if frac[0] >= 0.5 or cov[0] < 0.9 or np.count_nonzero(cov >= 0.5) < MIN_TONE_CELLS:
                k += 1                           # no clear start bit, or too little tone for a byte
                continue
            before, before_cov = track.fractions(np.array([t - (1 + EDGE_SETBACK) * bit_s]),
                                                 np.array([t - EDGE_SETBACK * bit_s]))
            if before[0] < MIN_MARK_BEFORE or before_cov[0] < 0.9:
                k += 1                           # the line was not at mark before it: no start bit
                continue
            if not out:
                self.leader = _leader_s(track, t - EDGE_SETBACK * bit_s, min_leader_s)
            if lost is not None:
                self.dropouts.append(lost)
            bits = (frac > 0.5).astype(np.int64)
            out.append(int(bits[1:9] @ (1 << np.arange(8))))
            times.append(t)
            speeds.append(sp)
            margins.append(float(np.min(np.abs(2 * frac - 1))))
            bad = bits[9] == 0 or bits[10] == 0 or bool(np.any(cov < 0.5))
            if bad:
                errors.append(len(out) - 1)
                next_t = t + 9.5 * bit_s
            else:
                next_t = t + 10.5 * bit_s
            self.in_block = True
            self.prev_end = next_t
            self.resume_s = next_t
            k = int(np.searchsorted(onsets, next_t))
