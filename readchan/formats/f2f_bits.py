"""The ``f2f-bits`` format: an F2F stream's bits without character framing.

Input: one channel's samples (any units) and the sample rate (Hz), through the card front end
(pulse peaks of a head signal, or the edges of a logic-level signal) and the F2F line decoder
(:func:`readchan.linecode.f2f.recover_bits`).
Output: :class:`readchan.results.ChannelResult` whose reads carry an :class:`F2fBits` payload:
each regular stretch of F2F transitions (a swipe, a burst) as its bits in reading order, for
streams in no ISO character format (a proprietary track layout, a badge, a test pattern).

Not tried by ``--format auto`` (``auto=False``): a card capture decodes as before, and the
bits of any capture are there with ``--format f2f-bits``.  A read is ``valid`` when no bit of
it was flagged by the line decoder (a lone half cell, an interval over 1.6 cells: a missing or
a spurious transition, :mod:`readchan.linecode.f2f`); there is no parity or LRC to check.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from readchan.formats.iso7811.card import MIN_REGULARITY
from readchan.formats.registry import Format, register
from readchan.frontend.detect import Transitions, classify_kind, detect_logic
from readchan.frontend.head import FrontEndRecord, head_front_end, only_white_noise
from readchan.frontend.segment import Segment, segment
from readchan.linecode.f2f import BitStream, recover_bits
from readchan.results import ChannelResult, Read

FORMAT = "f2f-bits"


@dataclass(frozen=True)
class F2fBits:
    """The payload of an ``f2f-bits`` read.

    Attributes
    ----------
    regularity : fraction of the read's intervals near a half or a full cell
        (:attr:`readchan.linecode.f2f.BitStream.regularity`).
    flagged : indices of the bits the line decoder flagged (lone half cell, long interval).
    mean_period_s : mean bit period over the read, seconds.
    """

    regularity: float
    flagged: tuple[int, ...]
    mean_period_s: float
    direction: str = "forward"
    track_evidence: None = None

    @property
    def valid(self) -> bool:
        """No bit was flagged by the line decoder."""
        return not self.flagged


def bit_string(bits: BitStream) -> str:
    """The bits as a string of ``0`` and ``1`` in reading (time) order."""
    return (np.asarray(bits.bits, np.uint8) + ord("0")).tobytes().decode("ascii")


def _front_end(x: np.ndarray, rate_hz: float, settings, kind: str, channel: int):
    """(conditioned signal or None, transitions, record) of the card front end for ``kind``."""
    if kind == "logic":
        return None, detect_logic(x, rate_hz), FrontEndRecord("logic")
    if only_white_noise(x, rate_hz):
        none = np.zeros(0)
        return None, Transitions(none, np.zeros(0, np.int64), none, none, np.zeros(0, np.uint8), float(rate_hz),
                                 "head", float(np.std(x))), FrontEndRecord("head")
    return head_front_end(x, rate_hz, settings, channel)


def bit_reads(tr: Transitions, segs: list[Segment], loop_gain: float, *, channel: int = 0, source: str = "",
              skipped: list | None = None) -> tuple[Read, ...]:
    """One read per segment of ``tr`` whose F2F intervals are regular (the stretch between the
    first and the last run of regular intervals, as for a card read); ``skipped`` receives a
    :class:`readchan.measure.status.Skipped` for each other segment."""
    from readchan.measure.status import Skipped

    reads = []
    for seg in segs:
        bs = recover_bits(tr.times_s[seg.start:seg.stop], loop_gain=loop_gain)
        span = bs.regular_span()
        if span is not None and span != (0, seg.stop - seg.start):
            bs = bs.between(*span)
        if span is None or bs.regularity < MIN_REGULARITY or len(bs) == 0:
            if skipped is not None:
                skipped.append(Skipped("irregular", seg, len(bs), bs.regularity))
            continue
        a, b = seg.start + span[0], seg.start + span[1]
        cut = Segment(a, b, float(tr.times_s[a]), float(tr.times_s[b - 1]))
        payload = F2fBits(bs.regularity, tuple(int(i) for i in np.flatnonzero(bs.flags)),
                          float(np.mean(bs.period_s)))
        reads.append(Read(source, channel, FORMAT, payload, cut, tr.subset(a, b), bs))
    return tuple(reads)


def decode_bits_family(x: np.ndarray, rate_hz: float, settings, formats: tuple, *, kind: str, channel: int = 0,
                       n_channels: int = 1, source: str = "") -> ChannelResult:
    """The registry's channel decoder for ``f2f-bits``: the card front end, segmentation and
    the F2F line decoder, no framing."""
    from readchan.measure.status import channel_status

    resolved = classify_kind(x) if kind == "auto" else kind
    cond, tr, record = _front_end(x, rate_hz, settings, resolved, channel)
    segs = segment(tr)
    skipped: list = []
    reads = bit_reads(tr, segs, settings.loop_gain, channel=channel, source=source, skipped=skipped)
    status = channel_status(x, rate_hz, channel, tr, segs, reads, skipped, None)
    return ChannelResult(channel, resolved, cond, tr, tuple(segs), reads, record.hum_hz, status, family=FORMAT,
                         front_end=record)


def bits_claim(result: ChannelResult) -> bool:
    """A channel holds an F2F stream when a regular stretch of it gave bits."""
    return bool(result.reads)


def _min_margin(bs: BitStream) -> float | None:
    """The smallest decision margin, or None (no bits, or bits a chip decided: no margins)."""
    m = np.asarray(bs.margin, float)
    m = m[np.isfinite(m)]
    return round(float(m.min()), 4) if m.size else None


def bits_read_json(read: Read, unmask: bool = False) -> dict:
    """An ``f2f-bits`` read's JSON (the README's contract): ``bits`` is a string of 0/1 in
    reading order.  Nothing is masked: without framing, no account number can be told."""
    p, bs = read.payload, read.bits
    return {
        "source": read.source,
        "channel": read.channel,
        "format": read.format,
        "direction": p.direction,
        "valid": bool(p.valid),
        "bits": bit_string(bs),
        "n_bits": int(len(bs)),
        "flagged_bits": list(p.flagged),
        "regularity": round(float(p.regularity), 4),
        "mean_period_s": float(f"{p.mean_period_s:.6g}"),
        "min_margin": _min_margin(bs),
        "start_s": round(float(read.start_s), 6),
        "end_s": round(float(read.end_s), 6),
    }


register(Format(FORMAT, FORMAT, "f2f", "pulse peaks of a head signal, or the edges of a logic-level signal",
                "F2F (Aiken biphase, ISO/IEC 7811-2 line code) bits with no character framing, in reading order",
                decode_bits_family, bits_claim, bits_read_json, auto=False))
