"""The cassette family in the format registry: one channel's samples to a cassette read.

Input: one channel's samples (any units) and the sample rate (Hz).
Output: :class:`readchan.results.ChannelResult` whose one read (when bytes were framed) carries
a :class:`readchan.formats.kcs.read.KcsRead` payload.
"""

from __future__ import annotations

import numpy as np

from readchan.formats.kcs.read import FORMAT, KcsRead, decode_kcs, kcs_json
from readchan.formats.registry import Format, register
from readchan.results import ChannelResult, Read, tape_channel_result

MIN_KCS_RATE_HZ = 12_000.0
"""Below this sample rate the cassette tones (up to the 2400 Hz mark's harmonics) are not
sampled well enough to read (:func:`readchan.formats.kcs.read.decode_kcs` refuses it)."""


def decode_kcs_family(x: np.ndarray, rate_hz: float, settings, formats: tuple, *, kind: str, channel: int = 0,
                      n_channels: int = 1, source: str = "") -> ChannelResult:
    """:func:`readchan.formats.kcs.read.decode_kcs` on one channel; a read when bytes were framed.
    A capture sampled below :data:`MIN_KCS_RATE_HZ` holds no cassette read (under ``auto``)."""
    if rate_hz < MIN_KCS_RATE_HZ and settings.format == "auto":
        return tape_channel_result(channel, rate_hz, "tone", "cassette", None)
    read = decode_kcs(x, rate_hz, channel=channel)
    r = Read(source, channel, FORMAT, read) if read.data else None
    return tape_channel_result(channel, rate_hz, "tone", "cassette", r)


def kcs_claims(result: ChannelResult) -> bool:
    """A channel holds cassette data when bytes were framed after a mark leader (the decoder
    needs one before a block's first byte) and at least half of them framed cleanly."""
    return any(isinstance(r.payload, KcsRead) and r.payload.data
               and 2 * len(r.payload.framing_errors) <= len(r.payload.data) for r in result.reads)


def kcs_read_json(read: Read, unmask: bool = False) -> dict:
    """A cassette read's JSON: ``source`` and the contract of :func:`kcs_json`."""
    return {"source": read.source, **kcs_json(read.payload)}


register(Format(FORMAT, "cassette", "fsk", "zero crossings of the tone (1200 Hz space, 2400 Hz mark)",
                "Kansas City standard cassette data (1976): 300 or 1200 baud, start bit, 8 data bits, 2 stop bits",
                decode_kcs_family, kcs_claims, kcs_read_json))
