"""Streaming decode of a capture file: the active stretches decoded one at a time, so that memory
does not grow with the capture's length and idle time costs one cheap pass.

Input: the path of an audio capture (WAV, FLAC, ...), :class:`readchan.channel.DecodeSettings`
and the channels to decode.
Output: :class:`readchan.results.Read` s with capture times and absolute sample positions,
yielded as they are found (:func:`iter_reads`) or listed (:func:`decode_file`).

How: one pass over the file in blocks (:mod:`readchan.io.blocks`; integer PCM read as integers,
exact) feeds the activity gate (:mod:`readchan.frontend.activity`), which gives each channel's
active spans; the same pass finds the converter step, and one more read of the most energetic
2¹⁸ samples the signal band, so these per-capture decisions are made once, as a whole-file
decode makes them (``DecodeSettings.quant_step``, ``band_hz``).  Each span, padded by
:data:`SETTLE_S` on either side (beyond the gate's guard) so that the conditioning filters have
settled before the first pulse, is read from the file and decoded as a stretch of its own
(:func:`readchan.channel.decode_channel`), its reads moved to capture time.  A span longer than
:data:`PIECE_S` is cut at its quietest 20 ms blocks into pieces; where a cut is not in quiet
capture, the pieces overlap by :data:`OVERLAP_S` (longer than any swipe: a card passes in 1.7 s
at 5 cm/s) and each keeps the reads that start in its own part, so a read across a cut is
decoded whole once.  With an executor (``jobs``), the stretches are decoded in parallel and their
reads come out in the same order.

A capture of at most :data:`WHOLE_S` is decoded whole, exactly as
:func:`readchan.channel.decode_capture` decodes it; so is one whose stretches hold a tape read
(timecode, cassette data: one read runs the whole tape, which stretches would split).  The
noise floor, hum and the corners matched to the pulses are still found per stretch: the reads
are the same (text, validity, direction; bits within one clocking zero at a read's edge) as a
whole-file decode's on the benchmark and test captures at 15 dB SNR and above, their times
agree to rounding, but at lower SNR a marginal read can pass in one and fail in the other; and
the channel-wide records of a whole-file decode (``ChannelResult``: transitions, segments,
status) are not made.  A streamed read's ``segment.start``/``stop`` count transitions within
its stretch.
"""

from __future__ import annotations

import os
from concurrent.futures import Executor
from dataclasses import dataclass, replace
from typing import Callable, Iterator

import numpy as np

from readchan.channel import DecodeSettings, decode_capture, decode_channel
from readchan.frontend.activity import Activity
from readchan.io.blocks import audio_info, read_span
from readchan.io.capture import load_capture
from readchan.results import Read
from readchan.survey import survey

WHOLE_S = 120.0
"""Captures up to this long (s) are decoded whole."""
SETTLE_S = 0.05
"""Capture read on either side of an active span, s, beyond the gate's own guard of 0.1 s of
quiet (:data:`readchan.frontend.activity.GUARD_S`): the conditioning filters' start-up has
died out before the first pulse (the 20 Hz baseline low-pass, Butterworth Q = 0.707, decays
with a time constant of 1/(2π·20·0.707) ≈ 11 ms: e⁻¹³ after the 0.15 s of settle and guard),
and the quiet either side still gives the noise and hum estimates 0.3 s to work on."""
PIECE_S = 30.0
"""Longest stretch decoded at once, s (a piece: 1.4 M samples at 48 kHz, about 80 MB at the peak)."""
OVERLAP_S = 2.5
"""Capture two neighbouring pieces of a long span share, s: longer than a card swipe."""
def _pieces(span: tuple[int, int], energies: np.ndarray, block: int, rate_hz: float) -> list[tuple[int, int]]:
    """The owned parts ``(lo, hi)`` (samples) a span is cut into, cut at its quietest block
    within ±2 s of every :data:`PIECE_S`."""
    a, b = span
    piece = int(PIECE_S * rate_hz)
    if b - a <= piece:
        return [span]
    cuts = [a]
    reach = int(2.0 * rate_hz) // block
    while b - cuts[-1] > piece:
        nominal = (cuts[-1] + piece) // block
        lo, hi = max(nominal - reach, cuts[-1] // block + 1), min(nominal + reach, energies.size - 1)
        k = lo + int(np.argmin(energies[lo:hi + 1])) if hi >= lo else nominal
        cuts.append(min(b, max(cuts[-1] + block, k * block)))
    cuts.append(b)
    return [(cuts[i], cuts[i + 1]) for i in range(len(cuts) - 1) if cuts[i + 1] > cuts[i]]


def _at_capture_time(r: Read, lo: int, rate_hz: float) -> Read:
    """A read decoded from a stretch starting at sample ``lo``, moved to capture time.  Its
    transitions are copied out of the stretch's (they are views of them), so that a kept read
    does not keep every noise peak of its stretch in memory."""
    off = lo / rate_hz
    seg = replace(r.segment, start_s=r.segment.start_s + off, end_s=r.segment.end_s + off) if r.segment else None
    t = r.transitions
    tr = replace(t, times_s=t.times_s + off, index=t.index + lo, amplitude=t.amplitude.copy(),
                 envelope=t.envelope.copy(), flags=t.flags.copy()) if t is not None else None
    bits = replace(r.bits, start_s=r.bits.start_s + off) if r.bits is not None else None
    return replace(r, segment=seg, transitions=tr, bits=bits)


class _TapeRead(Exception):
    """A stretch held a tape read: the capture is decoded whole instead."""


Progress = Callable[[float], None]
"""A progress callback: called with the fraction of the work done (0 to 1, never decreasing;
the last call is 1.0)."""
GATE_SHARE = 0.1
"""Share of the progress the gate's pass counts for."""


def _no_progress(fraction: float) -> None:
    """The progress callback that does nothing."""


@dataclass(frozen=True)
class _Piece:
    """One stretch to decode: channel ``channel`` of the file, samples ``lo:hi`` read, the reads
    starting in ``own_lo:own_hi`` kept (all of them when ``keep_all``)."""

    channel: int
    lo: int
    hi: int
    own_lo: int
    own_hi: int
    keep_all: bool


class _PieceTask:
    """A piece's reads in capture time, as a picklable callable (for process pools):
    ``(family, reads)``; a family other than ``card`` means the stretch held a tape read."""

    def __init__(self, path: str, n_channels: int, rate_hz: float, settings: DecodeSettings,
                 decided: dict[int, dict]) -> None:
        self.path, self.n_channels, self.rate_hz, self.settings = path, n_channels, rate_hz, settings
        self.decided = decided          # per channel: the settings decided once for the capture

    def __call__(self, pc: _Piece) -> tuple[str, list[Read]]:
        x = np.ascontiguousarray(read_span(self.path, pc.lo, pc.hi)[:, pc.channel])
        settings = self.settings
        if self.decided.get(pc.channel):
            settings = replace(settings, **self.decided[pc.channel])
        res = decode_channel(x, self.rate_hz, settings, channel=pc.channel, n_channels=self.n_channels,
                             source=self.path)
        del x
        if res.family != "card":
            return res.family, []
        kept = []
        for r in res.reads:
            r = _at_capture_time(r, pc.lo, self.rate_hz)
            if pc.keep_all or pc.own_lo <= r.start_s * self.rate_hz < pc.own_hi:
                kept.append(r)
        return res.family, kept


QUIET_RUN = 3
"""Energy blocks (20 ms each) that must all be quiet, the cut's and one on either side, for a
cut there to need no overlap: 60 ms without pulses is longer than the segmenter's 20 ms gap,
so no read runs across it."""


def _quiet_blocks(energies: np.ndarray, floor: float) -> np.ndarray:
    """Per energy block: it and its neighbours (:data:`QUIET_RUN` in all) are all below the
    gate's activity threshold."""
    from readchan.frontend.activity import ACTIVE_RATIO

    if not floor > 0:
        return np.zeros(energies.size, bool)
    q = energies <= ACTIVE_RATIO * floor
    half = QUIET_RUN // 2
    run = np.convolve(q.astype(np.int32), np.ones(QUIET_RUN, np.int32), mode="same")
    run[:half] = 0
    run[run.size - half:] = 0
    return run == QUIET_RUN


def _quiet_at(quiet: np.ndarray, cut: int, block: int) -> bool:
    """A cut at sample ``cut`` lies in a quiet run of blocks (:func:`_quiet_blocks`)."""
    k = cut // block
    return 0 <= k < quiet.size and bool(quiet[k]) and cut % block == 0


def _plan(gates: list[Activity], chans: list[int], n: int, rate_hz: float) -> list[_Piece]:
    """Every channel's pieces, channel by channel and in time order."""
    settle, overlap = int(SETTLE_S * rate_hz), int(OVERLAP_S * rate_hz)
    out = []
    for g, c in zip(gates, chans):
        energies = g.energies()
        for span in g.spans():
            parts = _pieces(span, energies, g.block, rate_hz)
            if len(parts) == 1:
                out.append(_Piece(c, max(0, span[0] - settle), min(n, span[1] + settle), *span, True))
                continue
            quiet = _quiet_blocks(energies, g.floor())
            for a, b in parts:
                # a cut in quiet capture has no read across it: the filters' settling will do there
                lo = a - (settle if a == span[0] or _quiet_at(quiet, a, g.block) else overlap)
                hi = b + (settle if b == span[1] or _quiet_at(quiet, b, g.block) else overlap)
                out.append(_Piece(c, max(0, lo), min(n, hi), a, b, False))
    return out


def _stretch_reads(path: str, chans: list[int], n_channels: int, n: int, rate_hz: float,
                   settings: DecodeSettings, progress: Progress, executor: Executor | None) -> Iterator[Read]:
    from readchan.batch import in_order

    surveys = survey(path, chans, rate_hz, n, audio_info(path).subtype, progress, GATE_SHARE)
    gates = [sv.gate for sv in surveys]
    plan = _plan(gates, chans, n, rate_hz)
    total = sum(pc.own_hi - pc.own_lo for pc in plan) or 1
    done = 0
    decided = {sv.channel: sv.decisions(path, settings) for sv in surveys}
    task = _PieceTask(path, n_channels, rate_hz, settings, decided)
    window = 2 * getattr(executor, "_max_workers", 1)
    for pc, (family, reads) in zip(plan, in_order(task, plan, executor, window=window)):
        if family != "card":
            raise _TapeRead
        yield from reads
        done += pc.own_hi - pc.own_lo
        progress(GATE_SHARE + (1.0 - GATE_SHARE) * min(1.0, done / total))


def iter_reads(path: str | os.PathLike, settings: DecodeSettings = DecodeSettings(),
               channels: list[int] | None = None, *, whole_s: float = WHOLE_S,
               progress: Progress | None = None, executor: Executor | None = None) -> Iterator[Read]:
    """The reads of the capture at ``path``, channel by channel and in time order within a
    channel, each as soon as its stretch is decoded; see the module docstring.  ``whole_s``:
    captures up to this long (s) are decoded whole.  ``progress`` (:data:`Progress`) is told
    the fraction done as the work goes on.  ``executor`` (any :class:`concurrent.futures.Executor`,
    e.g. a process pool) decodes the stretches in parallel, a few in flight per worker; the reads
    come out in the same order and are the same as without one."""
    progress = progress or _no_progress
    p = os.fspath(path)
    info = audio_info(p)
    chans = list(range(info.channels)) if channels is None else list(channels)
    if info.frames <= whole_s * info.rate_hz:
        for res in decode_capture(load_capture(p), settings, chans):
            yield from res.reads
        progress(1.0)
        return
    seen: set[tuple[int, float]] = set()          # keys only: the reads given are not kept here
    try:
        for r in _stretch_reads(p, chans, info.channels, info.frames, info.rate_hz, settings, progress,
                                executor):
            seen.add((r.channel, round(r.start_s, 6)))
            yield r
    except _TapeRead:
        # a tape read spans the tape: timecode and cassette channels streamed (readchan.stream_tape),
        # card channels by stretches; its reads after those already given
        from readchan.stream_tape import tape_fallback_reads

        yield from (r for r in tape_fallback_reads(p, settings, chans) if (r.channel, round(r.start_s, 6)) not in seen)
    progress(1.0)


def decode_file(path: str | os.PathLike, settings: DecodeSettings = DecodeSettings(),
                channels: list[int] | None = None, *, whole_s: float = WHOLE_S,
                progress: Progress | None = None, jobs: int = 1) -> list[Read]:
    """Every read of the capture at ``path`` (:func:`iter_reads`), by channel and time;
    ``jobs`` > 1 decodes the stretches of a long capture in that many processes (same reads)."""
    if isinstance(jobs, bool) or not isinstance(jobs, int) or jobs < 1:
        from readchan.errors import ParameterError

        raise ParameterError(f"jobs must be a whole number of processes of at least 1, was {jobs!r}")
    if jobs == 1:
        return _sorted(iter_reads(path, settings, channels, whole_s=whole_s, progress=progress))
    from concurrent.futures import ProcessPoolExecutor

    with ProcessPoolExecutor(max_workers=jobs) as pool:
        return _sorted(iter_reads(path, settings, channels, whole_s=whole_s, progress=progress, executor=pool))


def _sorted(reads) -> list[Read]:
    return sorted(reads, key=lambda r: (r.channel, r.start_s))
