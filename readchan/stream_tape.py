"""Streaming decode of a long tape channel (linear timecode): the tape read of a capture that does
not fit in memory, decoded from its file in pieces, equal to the whole-file decode.

Input: the path of an audio capture, a channel index and :class:`readchan.channel.DecodeSettings`.
Output: :class:`readchan.results.ChannelResult` holding the channel's one timecode read
(:func:`timecode_channel`), the read itself (:func:`stream_ltc`), or the reads of every channel
of a capture whose stretches held a tape read (:func:`tape_fallback_reads`, used by
:mod:`readchan.stream`).

How (:func:`stream_ltc`):

1. One pass over the file in blocks keeps the capture-wide levels the whole-file decoder
   takes from strided subsamples of the channel (:mod:`readchan.stream_tape_detect`): the
   non-physical sample test's, the biphase detector's median, span and signal kind, the head
   detector's pulse level; subsamples at the same absolute positions give the same values.
2. The channel is read in pieces of :data:`PIECE_S` that own consecutive spans of the capture,
   each read with :data:`MARGIN_S` of the capture on either side.  Per piece: the transitions
   with the capture's levels, at absolute sample positions (the same floats as the whole-file
   detector's), then the biphase parse (:func:`readchan.linecode.biphase.bits_from_transitions`).
3. A piece keeps the bits that open in its own span (start time at or after its first sample,
   before the next piece's first).  All the stages before are local — hysteresis state, the
   running medians (31 intervals for the gaps, 9 anchors and 15 intervals for the period
   trace), the Viterbi parse, whose surviving paths merge at every 0 bit — so at a cut far
   from the piece's edges (2 s: 4000 bits at 1×) both pieces decide the same cells.  That is
   checked at every cut: the bits each piece decoded over ±1 s around the cut must be equal
   (value, start and end time); :attr:`StreamedBits.cut_mismatches` counts the cuts where
   they were not (none in the tests).  A stretch of signal (a run) crossing a cut is one run.
4. The frame-level interpretation (frames at sync words, rate inference, events, direction,
   validity) runs once over the merged bits (:func:`readchan.formats.ltc.read.read_from_bits`),
   as the whole-file decode runs it; ``auto`` signal kind tries the other detector with a
   second streamed pass when the first read has no frame or damage events
   (:func:`readchan.formats.ltc.read.decode_ltc`'s rule).

Memory: a piece's samples and transitions (a few tens of MB at 48 kHz), plus the read itself,
which covers the tape: its per-bit record (:class:`readchan.linecode.biphase.TapeBits`, 42 bytes
a bit in float64/int64 columns) and its frames.  A two-hour 25 fps track holds 14.4 M bits,
605 MB of record; the streamed decode peaked at 979 MB (875 MB without numba), in 23 s against
3.6 s for a plain read and filter of the file (scripts/bench_stream_tape.py).
Cassette data (Kansas City standard) streams by :mod:`readchan.stream_kcs` (equal to rounding,
not bit for bit: see there).
"""

from __future__ import annotations

import os
import warnings
from dataclasses import dataclass

import numpy as np

from readchan.formats.ltc.read import DAMAGE, FORMAT, LtcRead, read_from_bits
from readchan.io.blocks import audio_info, read_span
from readchan.io.capture import NonPhysicalSampleWarning, describe_outliers, display_path
from readchan.linecode.biphase import TapeBits, bits_from_transitions
from readchan.results import ChannelResult, Read, tape_channel_result
from readchan.stream_tape_detect import TapeLevels, _repair, channel_levels, piece_transitions

PIECE_S = 60.0
"""Capture each piece owns, s."""
MARGIN_S = 2.0
"""Capture read on either side of a piece's own span, s: far more than the detector's hysteresis
state, the running medians and the parse need to settle (a few dozen transitions), and more
than a frame at 0.1× (0.4 s)."""
CHECK_S = 1.0
"""Around every cut, the bits both pieces decoded over ±CHECK_S must agree."""


@dataclass(frozen=True)
class StreamedBits:
    """The merged biphase bits of a streamed channel, and how many cuts the pieces disagreed at."""

    bits: TapeBits
    cut_mismatches: int
    pieces: int
    outliers: np.ndarray
    """Positions (absolute samples) of the non-physical samples replaced before decoding."""


COLUMN_CHUNK_BYTES = 64 << 20
"""Bytes per chunk of a merged column (:class:`_Column`)."""
_FIELDS = ("bits", "start_s", "end_s", "period_s", "margin", "flags")


class _Column:
    """A growing 1-D array kept in chunks of :data:`COLUMN_CHUNK_BYTES`, each filled in place,
    joined once at the end with each chunk freed as it is copied out.

    Chunks that large are mapped from the system on their own (glibc maps allocations above
    32 MB) and go back to it when freed, where a list of per-piece arrays sits in the heap
    between each piece's temporaries and fragments it: a two-hour tape's 605 MB of bits then
    held 1.4 GB of memory (an array grown in place by ``ndarray.resize`` peaked higher still)."""

    def __init__(self, dtype) -> None:
        self.dtype = np.dtype(dtype)
        self.per_chunk = max(1, COLUMN_CHUNK_BYTES // self.dtype.itemsize)
        self.chunks: list[np.ndarray] = []
        self.fill = 0                                  # elements used in the last chunk

    def extend(self, values: np.ndarray) -> None:
        v = np.asarray(values, self.dtype)
        while v.size:
            if not self.chunks or self.fill == self.per_chunk:
                self.chunks.append(np.empty(self.per_chunk, self.dtype))
                self.fill = 0
            take = min(v.size, self.per_chunk - self.fill)
            self.chunks[-1][self.fill:self.fill + take] = v[:take]
            self.fill += take
            v = v[take:]

    def join(self) -> np.ndarray:
        """The values as one array; the chunks are freed as they are copied out."""
        n = (len(self.chunks) - 1) * self.per_chunk + self.fill if self.chunks else 0
        out = np.empty(n, self.dtype)
        pos = 0
        while self.chunks:
            ch = self.chunks.pop(0)
            m = self.per_chunk if self.chunks else self.fill
            out[pos:pos + m] = ch[:m]
            pos += m
            del ch
        self.fill = 0
        return out


class _Merger:
    """Bits of consecutive pieces joined at the cuts into one :class:`TapeBits` (step 3)."""

    def __init__(self, kind: str) -> None:
        self.kind = kind
        self.cols = {f: _Column(np.uint8 if f in ("bits", "flags") else np.float64) for f in _FIELDS}
        self.run = _Column(np.int64)
        self.runs: list[list[float]] = []
        self.n_transitions = 0
        self.mismatches = 0
        self.prev: TapeBits | None = None            # the previous piece's bits
        self.prev_open = False                       # its last kept run continues past the cut

    def add(self, tb: TapeBits, times_s: np.ndarray, lo_s: float, hi_s: float) -> None:
        """Keep ``tb``'s bits that start in [lo_s, hi_s) and its transitions there."""
        self.n_transitions += int(np.count_nonzero((times_s >= lo_s) & (times_s < hi_s)))
        if self.prev is not None:
            self._check(self.prev, tb, lo_s)
        keep = (tb.start_s >= lo_s) & (tb.start_s < hi_s)
        local = tb.run[keep]
        if local.size:
            first_run = int(local[0])
            # the run crosses the cut in both pieces: one run
            joined = self.prev_open and bool(np.any((tb.run == first_run) & (tb.start_s < lo_s)))
            ids = np.unique(local)
            base = len(self.runs) - (1 if joined else 0)
            mapping = {int(r): base + k for k, r in enumerate(ids)}
            for r in ids:
                g = mapping[int(r)]
                if g == len(self.runs):
                    self.runs.append([float(tb.runs_s[r, 0]), float(tb.runs_s[r, 1])])
                else:
                    self.runs[g][1] = float(tb.runs_s[r, 1])
            lut = np.zeros(int(tb.run.max()) + 1 if tb.run.size else 1, np.int64)
            lut[ids] = [mapping[int(r)] for r in ids]
            self.run.extend(lut[local])
            for f in _FIELDS:
                self.cols[f].extend(getattr(tb, f)[keep])
            last_run = int(local[-1])
            self.prev_open = bool(np.any((tb.run == last_run) & (tb.start_s >= hi_s)))
        else:
            self.prev_open = False
        self.prev = tb

    def _check(self, a: TapeBits, b: TapeBits, cut_s: float) -> None:
        wa = (a.start_s >= cut_s - CHECK_S) & (a.start_s < cut_s + CHECK_S)
        wb = (b.start_s >= cut_s - CHECK_S) & (b.start_s < cut_s + CHECK_S)
        same = (np.count_nonzero(wa) == np.count_nonzero(wb)
                and all(np.array_equal(getattr(a, f)[wa], getattr(b, f)[wb]) for f in _FIELDS))
        self.mismatches += 0 if same else 1

    def result(self) -> TapeBits:
        c = self.cols
        return TapeBits(c["bits"].join(), c["start_s"].join(), c["end_s"].join(), c["period_s"].join(),
                        c["margin"].join(), c["flags"].join(), self.run.join(),
                        np.asarray(self.runs, float).reshape(-1, 2), self.kind, int(self.n_transitions))


def stream_bits(path: str | os.PathLike, channel: int, lv: TapeLevels, kind: str, *,
                piece_s: float = PIECE_S, margin_s: float = MARGIN_S, progress=None) -> StreamedBits:
    """The biphase bits of ``channel`` decoded piece by piece with detector ``kind`` (``line``
    or ``head``) and the channel's levels ``lv`` (module docstring, steps 2–3).  ``progress``,
    when given, is called with the fraction of the channel done."""
    p = os.fspath(path)
    info = audio_info(p)
    n, rate = info.frames, info.rate_hz
    piece, margin = max(1, int(round(piece_s * rate))), int(round(margin_s * rate))
    if margin < int(round(CHECK_S * rate)) + 1:
        raise ValueError(f"margin_s must exceed {CHECK_S} s, was {margin_s!r}")
    merger = _Merger(kind)
    wild: list[np.ndarray] = []
    cuts = list(range(0, n, piece)) + [n]
    for k, (own_lo, own_hi) in enumerate(zip(cuts[:-1], cuts[1:])):
        lo, hi = max(0, own_lo - margin), min(n, own_hi + margin)
        x, bad = _repair(np.ascontiguousarray(read_span(p, lo, hi)[:, channel]), lv.centre, lv.limit)
        bad = bad + lo
        wild.append(bad[(bad >= own_lo) & (bad < own_hi)])
        times = piece_transitions(x, lo, rate, lv, kind)
        del x
        tb = bits_from_transitions(times, kind=kind)
        lo_s = -np.inf if own_lo == 0 else own_lo / rate
        hi_s = np.inf if own_hi == n else own_hi / rate
        merger.add(tb, times, lo_s, hi_s)
        if progress is not None:
            progress((k + 1) / (len(cuts) - 1))
    return StreamedBits(merger.result(), merger.mismatches, len(cuts) - 1,
                        np.concatenate(wild) if wild else np.zeros(0, np.int64))


def stream_ltc(path: str | os.PathLike, channel: int = 0, *, kind: str = "auto", piece_s: float = PIECE_S,
               margin_s: float = MARGIN_S, min_margin: float = 0.1) -> tuple[LtcRead, int]:
    """The timecode read of ``channel`` of the file at ``path``, streamed (module docstring), and
    the number of cuts where the pieces disagreed (0 when the read is the whole-file one).
    ``kind``: ``auto``, ``line`` or ``head`` (the biphase detector's names)."""
    p = os.fspath(path)
    lv = channel_levels(p, channel, kind)
    sb = stream_bits(p, channel, lv, lv.kind, piece_s=piece_s, margin_s=margin_s)
    if sb.outliers.size:
        # decode_channel's warning for the same samples, once
        warnings.warn(f"{display_path(p)}: channel {channel}: {describe_outliers(sb.outliers, audio_info(p).rate_hz)}",
                      NonPhysicalSampleWarning, stacklevel=2)
    read = read_from_bits(sb.bits, channel=channel, min_margin=min_margin)
    mismatches = sb.cut_mismatches
    if kind == "auto" and (not read.frames or any(e.kind in DAMAGE for e in read.events)):
        other = "head" if lv.kind == "line" else "line"
        sb2 = stream_bits(p, channel, lv, other, piece_s=piece_s, margin_s=margin_s)
        alt = read_from_bits(sb2.bits, channel=channel, min_margin=min_margin)
        if (len(alt.frames), -len(alt.events)) > (len(read.frames), -len(read.events)):
            return alt, sb2.cut_mismatches
    return read, mismatches


_LTC_KINDS = {"auto": "auto", "head": "head", "logic": "line"}


def timecode_channel(path: str | os.PathLike, channel: int, settings, *, piece_s: float = PIECE_S) -> ChannelResult:
    """The timecode family's channel result (:func:`readchan.formats.ltc.channel.decode_ltc_family`)
    for ``channel`` of the file at ``path``, streamed."""
    p = os.fspath(path)
    info = audio_info(p)
    read, _ = stream_ltc(p, channel, kind=_LTC_KINDS[settings.kind.value], piece_s=piece_s)
    r = Read(p, channel, FORMAT, read, bits=read.bits) if read.frames else None
    return tape_channel_result(channel, info.rate_hz, read.signal_kind, "timecode", r)


def _channel_family(path: str, channel: int, n_channels: int, n: int, rate_hz: float, settings) -> str:
    """The family the first active stretch of ``channel`` decodes as (:mod:`readchan.stream`'s
    stretches), ``card`` when it has none."""
    from readchan import stream
    from readchan.channel import decode_channel
    from readchan.survey import survey

    gate = survey(path, [channel], rate_hz, n, audio_info(path).subtype)[0].gate
    for span in gate.spans():
        own_lo, own_hi = stream._pieces(span, gate.energies(), gate.block, rate_hz)[0]
        settle = int(stream.SETTLE_S * rate_hz)
        x = np.ascontiguousarray(read_span(path, max(0, own_lo - settle), min(n, own_hi + settle))[:, channel])
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return decode_channel(x, rate_hz, settings, channel=channel, n_channels=n_channels, source=path).family
    return "card"


def tape_fallback_reads(path: str | os.PathLike, settings, channels: list[int]):
    """The reads of ``channels`` of a long capture one of whose stretches held a tape read
    (:mod:`readchan.stream`): a timecode channel streamed (:func:`timecode_channel`), a
    cassette channel streamed (:func:`readchan.stream_kcs.cassette_channel`); a card channel by
    :mod:`readchan.stream`'s stretches; a channel whose streamed read its family does not claim
    decoded whole, as before."""
    from readchan import stream
    from readchan.channel import decode_capture
    from readchan.formats.ltc.channel import ltc_claims
    from readchan.io.capture import load_capture

    p = os.fspath(path)
    info = audio_info(p)
    whole = []
    for c in channels:
        fam = _channel_family(p, c, info.channels, info.frames, info.rate_hz, settings)
        if fam == "timecode":
            res = timecode_channel(p, c, settings)
            if ltc_claims(res):
                yield from res.reads
                continue
        elif fam == "cassette":
            from readchan.formats.kcs.channel import kcs_claims
            from readchan.stream_kcs import cassette_channel

            res = cassette_channel(p, c)
            if kcs_claims(res):
                yield from res.reads
                continue
        elif fam == "card":
            try:
                reads = list(stream._stretch_reads(p, [c], info.channels, info.frames, info.rate_hz, settings,
                                                   stream._no_progress, None))
            except stream._TapeRead:
                reads = None                # a later stretch holds a tape read: decoded whole
            if reads is not None:
                yield from reads
                continue
        whole.append(c)
    if whole:
        for res in decode_capture(load_capture(p), settings, whole):
            yield from res.reads
