"""Streaming decode of a long cassette-data channel (Kansas City standard): the cassette read of
a capture decoded from its file in pieces, with the whole-file decode's bytes.

Input: the path of an audio capture and a channel index.
Output: :class:`readchan.formats.kcs.read.KcsRead` (:func:`stream_kcs`), or the cassette
family's channel result (:func:`cassette_channel`).

How: the channel is read in pieces of :data:`PIECE_S` that own consecutive spans of the
capture, each with :data:`MARGIN_S` of the capture on either side.  Per piece, the tone's zero
crossings (:func:`readchan.formats.kcs.read.zero_crossings`' band-pass and level-following
hysteresis, positions formed at absolute sample indices) and its tone track
(:func:`readchan.formats.kcs.read.tone_track`); the UART (:class:`readchan.formats.kcs.uart.Uart`,
one per baud rate when the rate is to be found) reads the start edges in the piece's own span and
keeps its state (in a block or not, where the last byte ended) into the next piece.  The baud
rate is then chosen once, over all the bytes (:func:`readchan.formats.kcs.read.read_of_trials`).

What is not bit-exact, and why: the whole-file decoder removes the channel's median, runs the
band-pass forward and backward over the whole channel (``sosfiltfilt``), and takes running
means (``uniform_filter1d``) and cumulative sums of the tone's mark and space time from the
capture's start; a running sum carries its rounding along, so a piece's sums differ from the
whole capture's in the last bits.  The crossings, the speed offset and the cell fractions
therefore agree to rounding (byte times to about 1e-9 s, margins to about 1e-9), and the bytes,
framing errors, dropouts, baud rate and validity are the same unless a decision sits within
rounding of its threshold.  A block's leader is measured back at most :data:`MARGIN_S` before
the piece its first byte falls in.
"""

from __future__ import annotations

import os

import numpy as np
from scipy import signal as sps
from scipy.ndimage import uniform_filter1d

from readchan.errors import ParameterError
from readchan.formats.kcs.read import BAUDS, FORMAT, KcsRead, quarter_signed, read_of_trials, tone_track
from readchan.formats.kcs.uart import Uart
from readchan.io.blocks import audio_info, read_span
from readchan.results import ChannelResult, Read, tape_channel_result
from readchan.stream_tape_detect import line_crossings

PIECE_S = 20.0
"""Capture each piece owns, s (a piece's filter passes and tone track: about 100 MB at 48 kHz;
60 s pieces peaked at 371 MB for a 20-minute capture, 20 s ones at 229 MB, in the same time)."""
MARGIN_S = 5.0
"""Capture read on either side of a piece's own span, s: the band-pass settles in milliseconds
and the running means span 32 half cycles; a byte at 300 baud lasts 37 ms; the rest is for the
UART's look back at a block's leader."""


def piece_crossings(x: np.ndarray, offset: int, rate_hz: float) -> np.ndarray:
    """Zero-crossing times (s, capture time) of the tone in ``x`` whose first sample is sample
    ``offset`` (:func:`readchan.formats.kcs.read.zero_crossings`, the piece's own median removed)."""
    hi = min(6000.0, 0.45 * rate_hz)
    sos = sps.butter(4, [500.0, hi], btype="bandpass", fs=rate_hz, output="sos")
    y = sps.sosfiltfilt(sos, x - np.median(x))
    rms = np.sqrt(np.maximum(uniform_filter1d(y * y, size=max(3, int(2e-3 * rate_hz))), 0.0))
    return line_crossings(y, 0.35 * rms, offset) / rate_hz


def stream_kcs(path: str | os.PathLike, channel: int = 0, *, baud: int | None = None, min_leader_s: float = 0.05,
               max_dropout_s: float = 0.5, piece_s: float = PIECE_S, margin_s: float = MARGIN_S) -> KcsRead:
    """The cassette read of ``channel`` of the file at ``path``, streamed (module docstring);
    the parameters are :func:`readchan.formats.kcs.read.decode_kcs`' ."""
    p = os.fspath(path)
    info = audio_info(p)
    n, rate = info.frames, info.rate_hz
    if rate < 12_000:
        raise ParameterError(f"rate_hz must be at least 12 kHz for cassette tones, was {rate!r}")
    if baud is not None and baud not in BAUDS:
        raise ParameterError(f"baud must be 300 or 1200, was {baud!r}")
    uarts = {b: Uart(b, min_leader_s, max_dropout_s) for b in (BAUDS if baud is None else (baud,))}
    signed: list[np.ndarray] = []
    piece, margin = max(1, int(round(piece_s * rate))), int(round(margin_s * rate))
    cuts = list(range(0, n, piece)) + [n]
    any_track = False
    for own_lo, own_hi in zip(cuts[:-1], cuts[1:]):
        lo, hi = max(0, own_lo - margin), min(n, own_hi + margin)
        x = np.ascontiguousarray(read_span(p, lo, hi)[:, channel])
        track = tone_track(piece_crossings(x, lo, rate)) if x.size > 64 else None
        del x
        if track is None:
            continue
        any_track = True
        lo_s = -np.inf if own_lo == 0 else own_lo / rate
        hi_s = np.inf if own_hi == n else own_hi / rate
        for u in uarts.values():
            u.feed(track, lo_s, hi_s)
        if 300 in uarts and len(uarts) == 2:
            u = uarts[300]
            mine = [i for i, t in enumerate(u.times) if lo_s <= t < hi_s]
            if mine:
                signed.append(quarter_signed(track, [u.out[i] for i in mine], [u.times[i] for i in mine],
                                             [u.speeds[i] for i in mine], 300))
    if not any_track:
        return KcsRead(channel, baud or 300, b"", np.zeros(0), (), np.zeros(0), 1.0, False, 0.0, 0.0, 0.0, ())
    m300 = float(np.mean(np.concatenate(signed))) if signed else 0.0
    return read_of_trials(channel, {b: u.result() for b, u in uarts.items()}, m300)


def cassette_channel(path: str | os.PathLike, channel: int, *, piece_s: float = PIECE_S) -> ChannelResult:
    """The cassette family's channel result (:func:`readchan.formats.kcs.channel.decode_kcs_family`)
    for ``channel`` of the file at ``path``, streamed."""
    p = os.fspath(path)
    read = stream_kcs(p, channel, piece_s=piece_s)
    r = Read(p, channel, FORMAT, read) if read.data else None
    return tape_channel_result(channel, audio_info(p).rate_hz, "tone", "cassette", r)
