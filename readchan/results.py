"""The results the read channel hands between its stages and to the reports.

Input: what the stages produced for one channel (front-end record, transitions, segments) and
each format's payload for a read.
Output: :class:`Read` (one read of any format) and :class:`ChannelResult` (one channel).

A read is generic: where it came from (source, channel), which registered format read it
(:mod:`readchan.formats.registry`), its bits with their timing, its span in the capture and its
validity.  What only one format knows (card characters, parity, LRC and fields; timecode frames;
cassette bytes) is the read's ``payload``, a frozen object of that format's own type.  The
payload's attributes can be read on the read itself (``read.frame`` is ``read.payload.frame``
for a card read), so a report written for one format reads naturally; the JSON of a read comes
from its format (:func:`readchan.formats.registry.read_json`).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:
    from readchan.frontend.condition import Conditioned
    from readchan.frontend.detect import Transitions
    from readchan.frontend.head import FrontEndRecord
    from readchan.frontend.segment import Segment
    from readchan.measure.status import ChannelStatus


@dataclass(frozen=True)
class Read:
    """One read: a swipe of one card track, or a stretch of tape holding one format.

    Attributes
    ----------
    source : the capture's path ("" for an in-memory capture).
    channel : channel index, from 0.
    format : the registered format's name (``iso-alpha``, ``iso-bcd``, ``ltc``, ``kcs``, ...).
    payload : the format's own result (card: :class:`readchan.formats.iso7811.card.CardRead`;
        timecode: :class:`readchan.formats.ltc.read.LtcRead`; cassette:
        :class:`readchan.formats.kcs.read.KcsRead`).  It defines ``valid`` and ``direction``.
    segment : the read's span in the channel's transitions, or None (tape reads).
    transitions : the read's transitions (times in seconds, absolute sample positions), or None.
    bits : the recovered bits with their start times, periods (s) and margins, or None.
    """

    source: str
    channel: int
    format: str
    payload: Any
    segment: "Segment | None" = None
    transitions: "Transitions | None" = None
    bits: Any = None

    def __getattr__(self, name: str) -> Any:
        # only called for names the read itself lacks: the payload's own attributes
        if name.startswith("__") or name == "payload":
            raise AttributeError(name)
        return getattr(self.payload, name)

    @property
    def valid(self) -> bool:
        """The format's verdict: every check passed and nothing speaks against it."""
        return bool(self.payload.valid)

    @property
    def direction(self) -> str:
        """``forward`` or ``reverse``: the order the medium passed the head in."""
        return str(self.payload.direction)

    @property
    def start_s(self) -> float:
        """Capture time of the read's first transition, seconds."""
        return float(self.segment.start_s if self.segment is not None else self.payload.start_s)

    @property
    def end_s(self) -> float:
        """Capture time of the read's last transition, seconds."""
        return float(self.segment.end_s if self.segment is not None else self.payload.end_s)


@dataclass(frozen=True)
class ChannelResult:
    """Everything decoded from one channel: its stages' outputs and its reads.

    ``family`` names the registered format family that read the channel (``card``,
    ``timecode``, ``cassette``); ``front_end`` is the one record of the front end's decisions
    (:class:`readchan.frontend.head.FrontEndRecord`) that decoding made and diagnostics reuse."""

    channel: int
    kind: str
    conditioned: "Conditioned | None"
    transitions: "Transitions"
    segments: tuple["Segment", ...]
    reads: tuple[Read, ...]
    hum_hz: float | None
    status: "ChannelStatus | None" = None
    """What the channel holds, and why it gave no read (:mod:`readchan.measure.status`)."""
    outliers: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    """Indices of the non-physical samples replaced before decoding."""
    family: str = "card"
    front_end: "FrontEndRecord | None" = None


def tape_channel_result(channel: int, rate_hz: float, kind: str, family: str, read: Read | None) -> ChannelResult:
    """A tape family's channel result: its one read (or none), no card stages.  A tape read
    keeps its bits with their times in its payload, so ``transitions`` is empty here."""
    from readchan.frontend.detect import Transitions

    return ChannelResult(channel, kind, None, Transitions.empty(kind, rate_hz), (), () if read is None else (read,), None, family=family)


def streamed_channel_result(channel: int, rate_hz: float, reads: tuple[Read, ...]) -> ChannelResult:
    """A channel decoded span by span (:mod:`readchan.stream`): its reads, in time order, and no
    channel-wide stages (transitions, segments, state); the family is its reads' (card when none)."""
    from readchan.formats.registry import all_formats

    families = {f.name: f.family for f in all_formats()}
    family = families.get(reads[0].format, "card") if reads else "card"      # a custom card format: card
    kind = reads[0].transitions.kind if reads and reads[0].transitions is not None else "head"
    result = tape_channel_result(channel, rate_hz, kind, family, None)
    return replace(result, reads=tuple(sorted(reads, key=lambda r: r.start_s)))
