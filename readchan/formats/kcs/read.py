"""Kansas City standard cassette data: tone zero crossings to bytes, and bytes to bits.

Input: samples of one channel and the sample rate (decode); bytes (encode).
Output: :class:`KcsRead` (frozen) and its JSON dict by :func:`kcs_json`; the bit stream of bytes.

The standard (BYTE, Feb. 1976; ../shared/REFERENCE.md): a 0 is four cycles of 1200 Hz, a 1
eight cycles of 2400 Hz (300 baud); the 1200-baud variant uses one and two cycles.  Each byte
is a start bit (0), eight data bits least significant first and two stop bits (1); the line
idles at mark (1), and a leader of mark comes first.

Demodulation from zero crossings (each interval between crossings is a half cycle):

1. Band-pass 500–6000 Hz (fourth-order Butterworth, zero phase): hum, DC and rumble go.
2. Crossings with hysteresis at ± 0.35 of the local RMS (2 ms window), so the threshold
   follows the level through dropouts, timed by linear interpolation at the zero crossing.
3. Each interval Δ is put on a log scale where a mark half cycle is 0 and a space half cycle
   1: ``u = log2(Δ · 4800 Hz)``.  Both tones share the fractional part of u, so its circular
   mean over 32 intervals is the local tape-speed offset (speed = 2^−offset), whatever the
   bits: ±10 % speed, wow and flutter are followed.  A second pass averages only the
   intervals within ±0.15 octave of the lattice (those straddling a bit boundary have other
   lengths), and the fraction of such intervals tells a tone from noise or programme audio,
   whose crossing intervals spread continuously.
4. An interval is tone when at least half of the 32 around it are on the lattice, the offset
   is within ±0.35 octave and ``u − offset`` within −0.3..1.3.  It is split into mark time and space time: an
   interval of length Δ, between a local mark half period h and a space half period 2h, holds
   ``m = 2h − Δ`` of mark and ``Δ − m`` of space (a half cycle whose phase advanced at both
   rates in turn); the part that matches the previous interval comes first.  Bit boundaries
   that fall between crossings (tones not starting at a zero crossing, fractional idle) are
   then placed within the interval.
5. A UART on the time axis: a start bit begins where mark turns to space; the bits are judged
   by the mark fraction over the middle 60 % of each of 11 bit cells, at the local bit time
   (1/baud)/speed.  The start cell must be tone (90 % covered) and mostly space, and at least
   6 of the 11 cells must be tone, else there is no byte here (band-limited noise after a
   block can fake a start).  The bit before the start edge must be mark (a stop bit or idle,
   ``MIN_MARK_BEFORE``), as a UART's start is a mark-to-space transition: noise just after
   the trailer, still counted as tone by the 32-interval window that reaches back into the
   trailer, fakes a start edge but not the clean mark before it.  That window and the
   leader's end ``EDGE_SETBACK`` before the edge.  Stop bits that are not mark, or a cell
   without tone, are a framing error.
   The first byte of a block needs ``min_leader_s`` of mark before it.  Where the tone is lost
   for up to ``max_dropout_s`` (a dropout), 1.5 bits of idle mark before a start bit resume the
   block and the loss is recorded as a dropout (bytes cut by it are framing errors, bytes inside
   it are missing, and a start found mid-byte resynchronises within a few bytes, as a UART
   does); after a longer loss the next block needs a leader again.

Baud rate: the capture is read at both rates and the one with the smaller share of bytes
with framing errors or dropouts wins.  On a tie (a 300-baud stream of some bytes, 0xFF for
one, also frames cleanly at 1200, since its tone changes only at 300-baud cell boundaries)
300 wins unless its mean bit margin is below 0.8 of the 1200-baud one: read at 300, a
1200-baud stream puts about 2.4 of its cells in each judged window, which mixes the tones.
The 300-baud margin for this comparison is judged per quarter cell (the middle 60 % of each
1200-baud cell inside it, against the bit of the whole cell): a 1200-baud stream whose runs
happen to fill most of each 300-baud window (0x00 bytes, one idle bit) then shows the 1200-baud
cell of the other tone, where a true 300-baud cell is one tone throughout.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import signal as sps
from scipy.ndimage import uniform_filter1d

from readchan.errors import ParameterError
from readchan.frontend.crossings import hysteresis_crossings
from readchan.formats.ltc.read import channel_samples, check_rate

BAUDS = (300, 1200)
MARK_HZ = 2400.0
SPACE_HZ = 1200.0
BYTE_BITS = 11
FORMAT = "kcs"
MIN_TONE_CELLS = 6
"""A byte needs tone in at least 6 of its 11 cells; fewer is noise after a block, not a byte."""
NEAR_OCTAVE = 0.15
"""An interval is on the tone lattice when log2 of it lies within ±0.15 octave (±11 %) of a tone."""
EDGE_SETBACK = 0.2
"""The mark before a start edge (leader, idle, stop bit) is judged up to 0.2 bit before the edge,
which is placed to about a tenth of a bit: a window up to the edge takes in the start bit's space."""
MIN_MARK_BEFORE = 0.85
"""Mark fraction of the bit before a start edge (a stop bit or idle: mark by the standard)."""
MIN_QUALITY = 0.5
"""Fraction of on-lattice intervals (over 32) that makes a stretch tone; noise gives about 0.3."""


def kcs_bits(data: bytes) -> np.ndarray:
    """The bit stream of ``data``: per byte 0, eight data bits LSB first, 1, 1 (uint8)."""
    b = np.frombuffer(bytes(data), np.uint8)
    out = np.ones((b.size, BYTE_BITS), np.uint8)
    out[:, 0] = 0
    out[:, 1:9] = (b[:, None] >> np.arange(8)) & 1
    return out.ravel()


@dataclass(frozen=True)
class ToneTrack:
    """Zero-crossing intervals of an FSK tone, with their mark and space content.

    Attributes
    ----------
    times_s : crossing times (n + 1), seconds.
    speed : local tape speed relative to nominal per interval (n).
    tone : per interval, True when it is part of a tone (module docstring, step 4).
    breaks_s, mark_cum_s, tone_cum_s : breakpoints (2n + 1) of the piecewise-constant tone,
        with the cumulative mark time and tone time at each, seconds.
    onsets_s : times where mark turns to space, seconds.
    """

    times_s: np.ndarray
    speed: np.ndarray
    tone: np.ndarray
    breaks_s: np.ndarray
    mark_cum_s: np.ndarray
    tone_cum_s: np.ndarray
    onsets_s: np.ndarray

    def fractions(self, a_s: np.ndarray, b_s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(mark fraction of the tone, tone coverage) over windows [a_s, b_s]."""
        m = np.interp(b_s, self.breaks_s, self.mark_cum_s) - np.interp(a_s, self.breaks_s, self.mark_cum_s)
        v = np.interp(b_s, self.breaks_s, self.tone_cum_s) - np.interp(a_s, self.breaks_s, self.tone_cum_s)
        with np.errstate(divide="ignore", invalid="ignore"):
            frac = np.where(v > 0, m / v, 0.5)
        return frac, v / np.maximum(b_s - a_s, 1e-12)

    def speed_at(self, t_s: float) -> float:
        i = int(np.clip(np.searchsorted(self.times_s, t_s) - 1, 0, self.speed.size - 1))
        return float(self.speed[i])


def zero_crossings(x: np.ndarray, rate_hz: float) -> np.ndarray:
    """Zero-crossing times (s) of the band-passed tone with level-following hysteresis."""
    hi = min(6000.0, 0.45 * rate_hz)
    sos = sps.butter(4, [500.0, hi], btype="bandpass", fs=rate_hz, output="sos")
    y = sps.sosfiltfilt(sos, x)
    rms = np.sqrt(np.maximum(uniform_filter1d(y * y, size=max(3, int(2e-3 * rate_hz))), 0.0))
    return hysteresis_crossings(y, 0.35 * rms) / rate_hz


def _circular_mean(z: np.ndarray, w: np.ndarray, window: int) -> np.ndarray:
    """Running weighted circular mean of unit phasors ``z`` over ``window``, in turns (−½..½]."""
    zr = uniform_filter1d(z.real * w, window, mode="nearest")
    zi = uniform_filter1d(z.imag * w, window, mode="nearest")
    return np.arctan2(zi, zr) / (2 * np.pi)


def tone_track(times_s: np.ndarray, *, window: int = 32) -> ToneTrack | None:
    """The :class:`ToneTrack` of crossing times (module docstring, steps 3–4), or None."""
    c = np.asarray(times_s, float)
    d = np.diff(c)
    if d.size < window:
        return None
    u = np.log2(np.maximum(d, 1e-9) * 2 * MARK_HZ)
    z = np.exp(2j * np.pi * u)
    offset = _circular_mean(z, np.ones(d.size), window)
    # second pass: only the intervals on the lattice (not those straddling a bit boundary)
    near = (np.abs((u - offset) - np.round(u - offset)) < NEAR_OCTAVE).astype(float)
    offset = _circular_mean(z, near, window)
    quality = uniform_filter1d(near, window, mode="nearest")
    q = u - offset
    tone = (quality >= MIN_QUALITY) & (np.abs(offset) <= 0.35) & (q > -0.3) & (q < 1.3)
    h_mark = 2.0 ** offset / (2 * MARK_HZ)
    mark = np.clip(2 * h_mark - d, 0.0, d)
    mark = np.where(tone, mark, 0.0)
    space = np.where(tone, d - mark, 0.0)
    mark_frac = np.where(tone, mark / d, 0.0)
    first_mark = np.concatenate(([True], mark_frac[:-1] >= 0.5))
    first = np.where(first_mark, mark, space)
    n = d.size
    breaks = np.empty(2 * n + 1)
    breaks[0::2] = c
    breaks[1::2] = c[:-1] + first
    gain_m = np.empty(2 * n)
    gain_m[0::2] = np.where(first_mark, mark, 0.0)
    gain_m[1::2] = np.where(first_mark, 0.0, mark)
    gain_v = np.empty(2 * n)
    gain_v[0::2] = first * tone
    gain_v[1::2] = (d - first) * tone
    mark_cum = np.concatenate(([0.0], np.cumsum(gain_m)))
    tone_cum = np.concatenate(([0.0], np.cumsum(gain_v)))
    onset = first_mark & tone & (space >= 0.25 * 2 * h_mark)
    onsets = c[:-1][onset] + mark[onset]
    return ToneTrack(c, 2.0 ** (-offset), tone, breaks, mark_cum, tone_cum, onsets)


@dataclass(frozen=True)
class KcsRead:
    """Bytes read from a Kansas City standard capture.

    Attributes
    ----------
    channel : channel index.
    baud : 300 or 1200.
    data : the bytes, framing errors included.
    byte_times_s : capture time of each start bit's leading edge, seconds.
    framing_errors : indices of bytes whose stop bits were not mark or whose cells lacked tone.
    margins : per byte, the smallest bit decision margin |2·mark fraction − 1| (1 ideal).
    speed : median tape speed relative to nominal over the bytes.
    valid : at least one byte, no framing error and no dropout inside a block.
    start_s, end_s : span of the bytes (first start edge, last stop bit's end), seconds.
    leader_s : length of mark before the first byte, seconds.
    dropouts : (from_s, to_s) of each loss of tone inside a block, after which reading resumed;
        bytes may be missing there.
    """

    channel: int
    baud: int
    data: bytes
    byte_times_s: np.ndarray
    framing_errors: tuple[int, ...]
    margins: np.ndarray
    speed: float
    valid: bool
    start_s: float
    end_s: float
    leader_s: float
    dropouts: tuple[tuple[float, float], ...] = ()

    @property
    def direction(self) -> str:
        """Always ``forward``: the decoder reads the tape in capture order."""
        return "forward"


def _leader_s(track: ToneTrack, t: float, min_s: float) -> float:
    """Length of nearly unbroken mark ending at ``t`` (checked in ``min_s`` steps back), seconds."""
    length = 0.0
    while True:
        a = np.array([t - length - min_s])
        frac, cov = track.fractions(a, a + min_s)
        if a[0] < track.times_s[0] or frac[0] < 0.9 or cov[0] < 0.9:
            return length
        length += min_s
        if length > 60.0:
            return length


def _uart(track: ToneTrack, baud: int, min_leader_s: float, max_dropout_s: float):
    """Bytes, start times, framing errors, margins, speeds, the leader and the dropouts inside
    blocks (module docstring), the whole track read at once."""
    from readchan.formats.kcs.uart import Uart

    u = Uart(baud, min_leader_s, max_dropout_s)
    u.feed(track)
    return u.result()


def quarter_signed(track: ToneTrack, data: list[int], times: list[float], speeds: list[float],
                   baud: int) -> np.ndarray:
    """Per byte, the smallest signed margin (2·mark fraction − 1, sign of the cell's bit) over
    the middle 60 % of each quarter of the 11 cells (module docstring, baud rate)."""
    if not data:
        return np.zeros(0)
    t = np.asarray(times, float)[:, None]
    quarter_s = 1.0 / (4 * baud * np.asarray(speeds, float))[:, None]
    q = np.arange(4 * BYTE_BITS)[None, :]
    frac, cov = track.fractions((t + (q + 0.2) * quarter_s).ravel(), (t + (q + 0.8) * quarter_s).ravel())
    bits = kcs_bits(bytes(data)).reshape(-1, BYTE_BITS).repeat(4, axis=1).astype(float)
    signed = np.where(cov.reshape(bits.shape) >= 0.5, (2 * frac.reshape(bits.shape) - 1) * (2 * bits - 1), 1.0)
    return signed.min(axis=1)


def _quarter_margin(track: ToneTrack, data: list[int], times: list[float], speeds: list[float],
                    baud: int) -> float:
    """The mean over bytes of :func:`quarter_signed`; 0 for none."""
    return float(np.mean(quarter_signed(track, data, times, speeds, baud))) if data else 0.0


def decode_kcs(samples: np.ndarray, rate_hz: float, *, channel: int = 0, baud: int | None = None,
               min_leader_s: float = 0.05, max_dropout_s: float = 0.5) -> KcsRead:
    """Read Kansas City standard bytes from ``samples`` (1-D, or samples × channels).

    Parameters
    ----------
    samples : the capture, any units.
    rate_hz : sample rate in Hz (at least 12 kHz: the band reaches 6 kHz).
    channel : channel index for a 2-D capture.
    baud : 300 or 1200; None to detect it.
    min_leader_s : mark a block's first byte needs before it, seconds.
    max_dropout_s : a loss of tone up to this long (seconds) does not end a block.

    Raises
    ------
    CaptureError : empty, wrong shape or non-finite samples.
    ParameterError : bad rate, channel, baud or leader length.
    """
    rate = check_rate(rate_hz)
    if rate < 12_000:
        raise ParameterError(f"rate_hz must be at least 12 kHz for cassette tones, was {rate_hz!r}")
    if baud is not None and baud not in BAUDS:
        raise ParameterError(f"baud must be 300 or 1200, was {baud!r}")
    if not 0.001 <= min_leader_s <= 60:
        raise ParameterError(f"min_leader_s must be between 0.001 and 60 s, was {min_leader_s!r}")
    x = channel_samples(samples, channel)
    track = tone_track(zero_crossings(x - np.median(x), rate)) if x.size > 64 else None
    if track is None:
        return KcsRead(channel, baud or 300, b"", np.zeros(0), (), np.zeros(0), 1.0, False, 0.0, 0.0, 0.0, ())
    if baud is None:
        trials = {b: _uart(track, b, min_leader_s, max_dropout_s) for b in BAUDS}
        m300 = _quarter_margin(track, trials[300][0], trials[300][1], trials[300][4], 300)
    else:
        trials, m300 = {baud: _uart(track, baud, min_leader_s, max_dropout_s)}, 0.0
    return read_of_trials(channel, trials, m300)


def read_of_trials(channel: int, trials: dict, m300: float) -> KcsRead:
    """The :class:`KcsRead` of the UART's results at one baud rate, or at both (``trials``: baud
    → :meth:`readchan.formats.kcs.uart.Uart.result`), with the 300-baud quarter-cell margin
    ``m300`` (:func:`_quarter_margin`) for a tie."""
    if len(trials) == 2:
        # the one with the smaller share of framing errors and dropouts wins; on a tie 300
        # unless its bit margins are poor (module docstring)
        share = {b: (len(u[2]) + len(u[6])) / max(1, len(u[0])) if u[0] else 2.0 for b, u in trials.items()}
        if share[300] == share[1200]:
            m1200 = float(np.mean(trials[1200][3])) if trials[1200][3] else 0.0
            used = 300 if m300 >= 0.8 * m1200 else 1200
        else:
            used = min(share, key=share.get)
    else:
        (used,) = trials
    data, times, errors, margins, speeds, leader, lost = trials[used]
    t = np.asarray(times, float)
    sp = float(np.median(speeds)) if speeds else 1.0
    end = float(t[-1] + BYTE_BITS / (used * speeds[-1])) if times else 0.0
    return KcsRead(channel, used, bytes(data), t, tuple(errors), np.asarray(margins), sp,
                   bool(data) and not errors and not lost, float(t[0]) if times else 0.0, end, leader,
                   tuple(lost))


def kcs_json(read: KcsRead) -> dict:
    """The JSON dict of a cassette read: common keys ``channel``, ``format`` (``"kcs"``),
    ``direction`` (always ``"forward"``), ``valid``, ``start_s``, ``end_s``; ``data_hex``,
    ``baud``, ``framing_errors`` (byte indices), ``byte_times_s`` (start-bit leading edges); and
    ``dropouts`` (``from_s``, ``to_s``: losses of tone inside a block, where bytes may be missing).
    ``valid`` is true when there is at least one byte, no framing error and no dropout."""
    return {
        "channel": read.channel,
        "format": FORMAT,
        "direction": "forward",
        "valid": read.valid,
        "start_s": round(read.start_s, 7),
        "end_s": round(read.end_s, 7),
        "data_hex": read.data.hex(),
        "baud": read.baud,
        "framing_errors": list(read.framing_errors),
        "byte_times_s": [round(float(v), 7) for v in read.byte_times_s],
        "dropouts": [{"from_s": round(a, 7), "to_s": round(b, 7)} for a, b in read.dropouts],
    }
