"""Tape diagnostics: a timecode or cassette read measured in physical units, and a verdict.

Input: a :class:`readchan.results.Read` whose payload is a
:class:`readchan.formats.ltc.read.LtcRead` or a :class:`readchan.formats.kcs.read.KcsRead`, the
channel's samples (capture units) and the sample rate (Hz).
Output: :class:`TapeReport` (frozen).

Level, noise and dropouts are measured by :mod:`readchan.measure.tape_level`.
Definitions (each also in the docstring of the field that holds it):

* **play speed** (relative to nominal, 1 = the recording speed).  Timecode: over 16 cells of
  each passing frame, every 8 cells, 16 / (80 · fps · Δt) with Δt the time between the cell
  boundaries 16 cells apart and fps the read's rate (its first candidate when undecided, as the
  frames' ``speed``; ``speed_basis_fps`` in the JSON).  Cassette: the local tape speed of the
  tone track (:func:`readchan.formats.kcs.read.tone_track`: the circular mean of log2 of 32
  half-cycle lengths) on the tone's half cycles.
  The trace leaves out the dropouts (below), where the timing is the noise's.
* **speed changes**: turning points of the speed trace with 5 % hysteresis (our choice: above
  the 0.3 % wow and flutter of a deck, below any deliberate change); each change between two
  turning points more than 5 % apart is reported from where it has covered 10 % of the way to
  where it has covered 90 % (the 10–90 % convention of a rise time, common practice).
* **decision margin**: per bit of a timecode frame the biphase margin (1 ideal, 0 on the
  decision boundary, :mod:`readchan.linecode.f2f`); per cassette byte the smallest
  |2·mark fraction − 1| over its 11 bits.  The worst frame (timecode) or byte, and the 1st
  percentile over the bits (timecode) or bytes (cassette).
* **level** ``level_peak`` (capture units): line-level timecode, half the step between the
  medians of the high and the low flat stretches; raw-head timecode, the median |peak| at the
  cell boundaries; cassette tone, √2 × the median of the envelope over the read.
* **noise** ``noise_rms``: line-level timecode (``noise_from: "flat"``), the RMS residual of a
  straight line fitted to each flat stretch between transitions (more than a tenth of a cell,
  and 3 samples, from every transition; residual sums of squares over n − 2), so AC-coupling
  tilt is not counted; otherwise (``"spectrum"``) the white-noise floor above the signal band,
  the median of a Welch spectrum from 8 × the fastest bit rate (timecode; a Lorentzian pulse
  train's spectrum is down e⁻⁸ there at a PW50 of a third of a cell) or 1.1 × 6 kHz × the
  fastest speed (cassette) to 0.45 × the sample rate, times the band up to Nyquist (a median
  ignores the harmonics' lines).  Null when no such band is left.  A playback band or preamp
  that narrows the noise makes the spectral estimate the noise above it.  SNR =
  20·log10(level / noise RMS), the synthesizers' definition.
* **dropouts**: the envelope sqrt(running mean of (x − median)² over W) (W = 1 ms, or two bit
  cells at the slowest play, the 99th percentile of the bit period, for a raw-head timecode,
  whose level is divided by the play speed, Faraday's law),
  against its median over the signal; a dropout is where it stays below half (−6 dB) for at
  least W/2, from and to the −6 dB crossings (a deep dropout reads about W/2 shorter than its
  half-level width), depth = −20·log10(least envelope / median).
* **verdict**: each check has a headroom (value/limit for a lower limit, limit/value for an
  upper one, 10^((SNR − limit)/20) for SNR, 10^((limit − depth)/20) for a dropout's depth); the
  quantity of least headroom is always named.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.ndimage import median_filter

from readchan.measure.tape_level import Dropout, envelope, find_dropouts, level_noise
from readchan.results import Read

LIMITS = {
    "margin_min": (0.3, "lower", "common practice, as for cards: 0.3 leaves 0.075 cell to the boundary"),
    "snr_db": (20.0, "lower", "common practice, as for cards"),
    "speed_min_ltc": (0.1, "lower", "the timecode decoder's documented range, 0.1–10×"),
    "speed_max_ltc": (10.0, "upper", "same"),
    "speed_min_kcs": (0.9, "lower", "the cassette decoder's documented range, ±10 %"),
    "speed_max_kcs": (1.1, "upper", "same"),
    "dropout_depth_db": (20.0, "upper", "our choice: deeper than 20 dB the tone or edges sink into typical noise"),
}
"""Verdict thresholds: (limit, kind, source)."""
CHANGE_HYSTERESIS = 0.05


@dataclass(frozen=True)
class SpeedChange:
    """A change of play speed from ``from_speed`` to ``to_speed`` (relative), its 10–90 % span in s."""

    start_s: float
    end_s: float
    from_speed: float
    to_speed: float


@dataclass(frozen=True)
class TapeEvent:
    """An event of the read at ``position_s`` (s): a timecode event, a framing error, a loss of tone."""

    kind: str
    position_s: float
    detail: str = ""


@dataclass(frozen=True)
class TapeCheck:
    """One verdict check: the value, its limit (``kind`` lower or upper), headroom (< 1 fails)."""

    name: str
    value: float
    limit: float
    kind: str
    headroom: float
    unit: str = ""

    @property
    def ok(self) -> bool:
        return self.headroom >= 1.0


@dataclass(frozen=True)
class TapeReport:
    """The measurements of one tape read (module docstring for every definition).

    ``speed_t_s``/``speed`` are the speed trace (s, relative to nominal); ``unit`` is ``frame``
    or ``byte`` and ``unit_t_s``/``unit_margin``/``unit_labels`` the margin of each; ``worst``
    indexes them; ``envelope_t_s``/``envelope`` the level relative to its median."""

    source: str
    channel: int
    format: str
    signal_kind: str
    rate_hz: float
    valid: bool
    speed_t_s: np.ndarray
    speed: np.ndarray
    speed_mean: float
    speed_min: float
    speed_max: float
    changes: tuple[SpeedChange, ...]
    unit: str
    unit_t_s: np.ndarray
    unit_margin: np.ndarray
    unit_labels: tuple[str, ...]
    margin_min: float
    margin_p1: float
    worst: int
    level_peak: float
    noise_rms: float | None
    noise_from: str
    snr_db: float | None
    envelope_t_s: np.ndarray
    envelope: np.ndarray
    dropouts: tuple[Dropout, ...]
    events: tuple[TapeEvent, ...]
    checks: tuple[TapeCheck, ...]
    read: Read

    @property
    def least(self) -> TapeCheck:
        """The check of least headroom."""
        return min(self.checks, key=lambda c: c.headroom)

    @property
    def failed(self) -> tuple[TapeCheck, ...]:
        return tuple(c for c in self.checks if not c.ok)


def measure_tape(read: Read, x: np.ndarray, rate_hz: float, source: str = "") -> TapeReport:
    """Measure the tape read ``read`` of the channel samples ``x`` (capture units) at ``rate_hz``."""
    x = np.asarray(x, float)
    x = x - np.median(x)
    p = read.payload
    ltc = read.format == "ltc"
    if ltc:
        t_s, speed = _ltc_speed(p)
        unit_t, unit_m, labels, bit_m = _ltc_margins(p)
        span = (float(p.bits.runs_s[0, 0]), float(p.bits.runs_s[-1, 1])) if p.bits.runs_s.size else (0.0, 0.0)
        kind = p.signal_kind
    else:
        span = (max(0.0, p.start_s - p.leader_s), p.end_s)
        t_s, speed = _kcs_speed(x, rate_hz, span)
        unit_t, unit_m = np.asarray(p.byte_times_s, float), np.asarray(p.margins, float)
        labels, bit_m = tuple(str(i) for i in range(unit_t.size)), unit_m
        kind = "tone"
    if t_s.size == 0:
        t_s, speed = np.array([span[0]]), np.array([float(getattr(p, "speed", 1.0))])
    level, noise, noise_from = level_noise(x, rate_hz, read, kind, t_s, speed)
    env_t, env, window_s = envelope(x, rate_hz, read, kind, t_s, speed)
    drops = find_dropouts(env_t, env, span, window_s)
    t_s, speed = _outside(t_s, speed, drops, window_s)
    snr = 20 * math.log10(level / noise) if noise and level > 0 else None
    worst = int(np.argmin(unit_m)) if unit_m.size else -1
    m_min = float(unit_m[worst]) if unit_m.size else math.nan
    m_p1 = float(np.percentile(bit_m, 1)) if bit_m.size else math.nan
    s_min, s_max = float(np.min(speed)), float(np.max(speed))
    checks = _checks(read.format, m_min, snr, s_min, s_max, drops)
    return TapeReport(source, read.channel, read.format, kind, float(rate_hz), read.valid, t_s, speed,
                      float(np.mean(speed)), s_min, s_max, speed_changes(t_s, speed), "frame" if ltc else "byte",
                      unit_t, unit_m, labels, m_min, m_p1, worst, level, noise, noise_from, snr, env_t, env,
                      drops, _events(read), checks, read)


def _ltc_speed(p) -> tuple[np.ndarray, np.ndarray]:
    """Speed over 16 cells of each passing frame, every 8 cells: 16 nominal bit periods over the
    time between the boundaries 16 cells apart (9 points a frame, at the windows' middles)."""
    tb = p.bits
    if not p.frames:
        return np.zeros(0), np.zeros(0)
    fps = p.rate_fps if p.rate_fps is not None else p.rate_fps_candidates[0]
    idx = np.stack([np.arange(f.first_bit, f.first_bit + 80) for f in p.frames])
    edges = np.concatenate((tb.start_s[idx], tb.end_s[idx[:, -1:]]), axis=1)     # 81 boundaries a frame
    a, b = edges[:, 0:-16:8], edges[:, 16::8]
    return (0.5 * (a + b)).ravel(), (16.0 / (80.0 * fps * (b - a))).ravel()


def _outside(t_s: np.ndarray, speed: np.ndarray, drops, window_s: float) -> tuple[np.ndarray, np.ndarray]:
    """The speed trace without its points inside a dropout (widened by the envelope window on
    each side), where the timing is the noise's; all of it if nothing would be left."""
    keep = np.ones(t_s.size, bool)
    for d in drops:
        keep &= (t_s < d.start_s - window_s) | (t_s > d.end_s + window_s)
    return (t_s[keep], speed[keep]) if keep.any() else (t_s, speed)


def _ltc_margins(p):
    """Per frame: time, least margin, timecode; and every bit margin of the frames."""
    frames = p.frames
    t = np.array([f.position_s for f in frames], float)
    m = np.array([f.min_margin for f in frames], float)
    if frames:
        idx = np.concatenate([np.arange(f.first_bit, f.first_bit + 80) for f in frames])
        bit_m = p.bits.margin[idx]
    else:
        bit_m = np.zeros(0)
    return t, m, tuple(f.timecode for f in frames), bit_m


def _kcs_speed(x: np.ndarray, rate_hz: float, span: tuple[float, float]) -> tuple[np.ndarray, np.ndarray]:
    from readchan.formats.kcs.read import tone_track, zero_crossings

    track = tone_track(zero_crossings(x, rate_hz))
    if track is None or not track.tone.any():
        return np.zeros(0), np.zeros(0)
    mid = 0.5 * (track.times_s[1:] + track.times_s[:-1])
    k = np.flatnonzero(track.tone & (mid >= span[0]) & (mid <= span[1]))
    if k.size > 96:
        k = k[32:-32]               # the 32-interval means reach into the quiet at both ends
    if k.size == 0:
        return np.zeros(0), np.zeros(0)
    v = median_filter(track.speed[k], size=min(65, k.size), mode="nearest")   # the edges of tone stretches
    return mid[k][::4], v[::4]


def speed_changes(t_s: np.ndarray, speed: np.ndarray, hysteresis: float = CHANGE_HYSTERESIS
                  ) -> tuple[SpeedChange, ...]:
    """Changes between turning points of ``speed`` (module docstring), 10–90 % spans in seconds."""
    if speed.size < 3:
        return ()
    ls = np.log(speed)
    h = math.log1p(hysteresis)
    pivots = _turning_points(ls, h)
    out = []
    for a, b in zip(pivots[:-1], pivots[1:]):
        va, vb = float(speed[a]), float(speed[b])
        if abs(math.log(vb / va)) <= h:
            continue
        frac = (speed[a:b + 1] - va) / (vb - va)
        i10 = a + int(np.argmax(frac >= 0.1))
        i90 = a + int(np.argmax(frac >= 0.9))
        out.append(SpeedChange(float(t_s[i10]), float(t_s[i90]), va, vb))
    return tuple(out)


def _turning_points(ls: np.ndarray, h: float) -> list[int]:
    """Indices of the turning points of ``ls`` with hysteresis ``h`` (a zigzag: a new extreme is
    confirmed once the series has turned back by more than ``h``); first and last included."""
    lo = hi = 0
    trend = 0
    pivots: list[int] = []
    ext = 0
    for i in range(1, ls.size):                        # over trace points (a few thousand at most)
        if trend == 0:
            lo = i if ls[i] < ls[lo] else lo
            hi = i if ls[i] > ls[hi] else hi
            if ls[i] - ls[lo] > h:
                pivots, trend, ext = [lo], 1, i
            elif ls[hi] - ls[i] > h:
                pivots, trend, ext = [hi], -1, i
        elif (ls[i] - ls[ext]) * trend > 0:
            ext = i
        elif (ls[ext] - ls[i]) * trend > h:
            pivots.append(ext)
            ext, trend = i, -trend
    return pivots + [ext] if trend else [0, ls.size - 1]


def _events(read: Read) -> tuple[TapeEvent, ...]:
    p = read.payload
    if read.format == "ltc":
        out = []
        for e in p.events:
            d = f"{e.from_timecode or '?'} → {e.to_timecode or '?'}" if (e.from_timecode or e.to_timecode) else ""
            if e.frames is not None:
                d += f" ({e.frames} frames)"
            out.append(TapeEvent(e.kind, float(e.position_s), d.strip()))
        return tuple(out)
    out = [TapeEvent("framing_error", float(p.byte_times_s[i]), f"byte {i}") for i in p.framing_errors]
    out += [TapeEvent("tone_lost", float(a), f"{(b - a) * 1e3:.1f} ms") for a, b in p.dropouts]
    return tuple(sorted(out, key=lambda e: e.position_s))


def _check(name: str, key: str, value: float, unit: str = "") -> TapeCheck:
    limit, kind, _ = LIMITS[key]
    if name == "SNR":
        head = 10 ** ((value - limit) / 20)
    elif name == "dropout depth":
        head = 10 ** ((limit - value) / 20)
    elif kind == "lower":
        head = value / limit
    else:
        head = limit / value if value > 0 else math.inf
    return TapeCheck(name, float(value), limit, kind, float(head), unit)


def _checks(fmt, m_min, snr, s_min, s_max, drops) -> tuple[TapeCheck, ...]:
    out = []
    if math.isfinite(m_min):
        out.append(_check("decision margin", "margin_min", m_min))
    if snr is not None:
        out.append(_check("SNR", "snr_db", snr, "dB"))
    out.append(_check("slowest play", f"speed_min_{fmt}", s_min, "×"))
    out.append(_check("fastest play", f"speed_max_{fmt}", s_max, "×"))
    if drops:
        out.append(_check("dropout depth", "dropout_depth_db", max(d.depth_db for d in drops), "dB"))
    return tuple(out)
