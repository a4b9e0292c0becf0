"""Card reads from a reader chip's strobe-and-data outputs: bits decided by the chip, framed here.

Input: :class:`readchan.io.vcd.VcdStrobeData` (one data bit per strobe edge, with its time) and
the decode settings.
Output: one :class:`readchan.results.ChannelResult` (channel 0, kind ``strobe``) whose reads
carry a :class:`readchan.formats.iso7811.card.CardRead` payload (characters, parity, LRC,
fields), or, with ``format="f2f-bits"``, an :class:`readchan.formats.f2f_bits.F2fBits` one.

The strobe edges are cut into bursts (a swipe each) where the gap between edges exceeds
:data:`BURST_GAP` times the median gap.  Each burst is framed by
:func:`readchan.formats.iso7811.framing.frame` (the chosen format) or
:func:`~readchan.formats.iso7811.framing.frame_auto`, in the bits as on the wire and inverted
(reader chips commonly drive an active-low data line; from memory), keeping the better frame
(valid, then complete, then fewer parity failures).  The chip's cell decisions carry no timing
margin: the bits' ``margin`` is NaN.
"""

from __future__ import annotations

import numpy as np

from readchan.errors import ParameterError
from readchan.formats.iso7811.card import CardRead, check_fields, guess_track, mean_speed_cm_s
from readchan.formats.iso7811.charset import KNOWN_FORMATS
from readchan.formats.iso7811.framing import frame, frame_auto
from readchan.formats.iso7813 import parse_fields
from readchan.frontend.detect import Transitions
from readchan.frontend.segment import Segment
from readchan.linecode.f2f import BitStream
from readchan.results import ChannelResult, Read

BURST_GAP = 12.0
"""A gap between strobe edges longer than this many median gaps starts a new burst (the
segmenter's factor, :func:`readchan.frontend.segment.segment`)."""

MIN_BURST_BITS = 24
"""Fewest bits a burst needs to be framed (the segmenter's least read)."""


def bursts(times_s: np.ndarray) -> list[tuple[int, int]]:
    """(start, stop) index ranges of the bursts of strobe edges at ``times_s`` (s)."""
    n = times_s.size
    if n < 2:
        return [(0, n)] if n else []
    gaps = np.diff(times_s)
    breaks = np.flatnonzero(gaps > BURST_GAP * float(np.median(gaps))) + 1
    edges = np.concatenate(([0], breaks, [n]))
    return [(int(a), int(b)) for a, b in zip(edges[:-1], edges[1:]) if b - a >= MIN_BURST_BITS]


def strobe_bitstream(times_s: np.ndarray, bits: np.ndarray) -> BitStream:
    """The chip's bits as a :class:`BitStream`: each bit starts at its strobe edge, its period is
    the time to the next edge (the last repeats the one before); no margin (NaN), no flags."""
    n = bits.size
    period = np.diff(times_s) if n > 1 else np.zeros(n)
    period = np.concatenate((period, period[-1:])) if n > 1 else np.zeros(n)
    return BitStream(bits.astype(np.uint8), times_s.astype(float), period, np.full(n, np.nan), np.zeros(n, np.uint8),
                     np.arange(n, dtype=np.int64), np.ones(max(n - 1, 0)))


def _rank(fr) -> tuple:
    """Valid, then complete, then fewer parity failures per character, then more characters."""
    return (fr.valid, fr.complete, -fr.n_parity_errors / max(fr.n_chars, 1), fr.n_chars)


def _best_frame(bits: np.ndarray, fmt, formats):
    """(frame or None, bits as framed): the wire bits and their inverse, the better frame kept."""
    best = (None, bits)
    for seq in (bits, (1 - bits).astype(np.uint8)):
        fr = frame(seq, fmt) if fmt is not None else frame_auto(seq, formats)
        if fr is not None and (best[0] is None or _rank(fr) > _rank(best[0])):
            best = (fr, seq)
    return best


def _card_read(bs: BitStream, fr, seg: Segment, sub: Transitions, settings, source: str) -> Read:
    track = guess_track(fr.format, len(fr.text), 0, 1, settings.track)
    speed = mean_speed_cm_s(bs, track.density_bpi) if track else None
    fields = parse_fields(fr.text, fr.format) if not (track and track.number == 3) else None
    return Read(source, 0, fr.format, CardRead(fr, fields, track, speed), seg, sub, bs)


def decode_strobe(sd, settings) -> ChannelResult:
    """Frame the bursts of ``sd`` (:class:`readchan.io.vcd.VcdStrobeData`) with ``settings``
    (:class:`readchan.channel.DecodeSettings`): card formats, or ``f2f-bits``."""
    from readchan.formats.f2f_bits import FORMAT as BITS, F2fBits

    if settings.fmt is None and settings.format not in ("auto", BITS):
        raise ParameterError(f"a strobe-and-data capture holds card bits: --format auto, a card format or {BITS}, "
                             f"not {settings.format}")
    n = sd.bits.size
    level = np.where(sd.bits > 0, 1.0, -1.0)
    tr = Transitions(sd.times_s, sd.ticks, level, np.ones(n), np.zeros(n, np.uint8), 1.0 / sd.timescale_s,
                     "strobe", 0.0)
    reads, segs = [], []
    for a, b in bursts(sd.times_s):
        seg = Segment(a, b, float(sd.times_s[a]), float(sd.times_s[b - 1]))
        segs.append(seg)
        raw = sd.bits[a:b]
        if settings.fmt is None and settings.format == BITS:
            bs = strobe_bitstream(sd.times_s[a:b], raw)
            payload = F2fBits(1.0, (), float(np.mean(bs.period_s)))
            reads.append(Read(sd.source, 0, BITS, payload, seg, tr.subset(a, b), bs))
            continue
        fr, seq = _best_frame(raw, settings.fmt, KNOWN_FORMATS)
        if fr is not None:
            bs = strobe_bitstream(sd.times_s[a:b], seq)
            reads.append(_card_read(bs, fr, seg, tr.subset(a, b), settings, sd.source))
    out = tuple(reads)
    if settings.field_check and out and settings.format != BITS:
        out = check_fields(out)
    return ChannelResult(0, "strobe", None, tr, tuple(segs), out, None, family="card")
