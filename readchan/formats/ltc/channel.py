"""The timecode family in the format registry: one channel's samples to a timecode read.

Input: one channel's samples (any units) and the sample rate (Hz).
Output: :class:`readchan.results.ChannelResult` whose one read (when a frame passed) carries a
:class:`readchan.formats.ltc.read.LtcRead` payload.
"""

from __future__ import annotations

import numpy as np

from readchan.formats.ltc.read import FORMAT, LtcRead, decode_ltc, ltc_json
from readchan.formats.registry import Format, register
from readchan.results import ChannelResult, Read, tape_channel_result

KINDS = {"auto": "auto", "head": "head", "logic": "line"}
"""The channel's signal kinds (``--signal``) as the biphase detector names them: a logic-level
capture is read like a deck's line output (mid-level crossings with hysteresis)."""


def decode_ltc_family(x: np.ndarray, rate_hz: float, settings, formats: tuple, *, kind: str, channel: int = 0,
                      n_channels: int = 1, source: str = "") -> ChannelResult:
    """:func:`readchan.formats.ltc.read.decode_ltc` on one channel; a read only when a frame passed."""
    read = decode_ltc(x, rate_hz, channel=channel, kind=KINDS[str(kind)])
    r = Read(source, channel, FORMAT, read, bits=read.bits) if read.frames else None
    return tape_channel_result(channel, rate_hz, read.signal_kind, "timecode", r)


def ltc_claims(result: ChannelResult) -> bool:
    """A channel holds timecode when a frame passed every check (sync word, BCD ranges,
    polarity bit, margins: :mod:`readchan.formats.ltc.frames`)."""
    return any(isinstance(r.payload, LtcRead) and r.payload.frames for r in result.reads)


def ltc_read_json(read: Read, unmask: bool = False) -> dict:
    """A timecode read's JSON: ``source`` and the contract of :func:`ltc_json`."""
    return {"source": read.source, **ltc_json(read.payload)}


register(Format(FORMAT, "timecode", "f2f", "biphase-mark transitions: level crossings of a line output or pulse "
                "peaks of a raw head, at 0.1–10× play speed either way",
                "linear timecode, SMPTE ST 12-1 / IEC 60461: 80-bit frames with a sync word, 24/25/29.97/30 fps",
                decode_ltc_family, ltc_claims, ltc_read_json))
