"""Level, noise and dropouts of a tape read (the definitions are :mod:`readchan.measure.tape`'s).

Input: the channel's samples (capture units, median removed), the sample rate (Hz), the
:class:`readchan.results.Read` (timecode or cassette payload) and its speed trace.
Output: (level, noise RMS, how it was measured); the envelope; :class:`Dropout` s.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import signal as sps
from scipy.ndimage import median_filter, minimum_filter1d, uniform_filter1d

from readchan.results import Read

DROP_DB = 6.0
"""A dropout is where the envelope stays this far (dB) below its median."""


@dataclass(frozen=True)
class Dropout:
    """A fall of the signal level: from and to its −6 dB crossings (s), depth in dB."""

    start_s: float
    end_s: float
    depth_db: float

    @property
    def duration_s(self) -> float:
        return self.end_s - self.start_s


def _slowest_noise(x, rate_hz, p, t_s: np.ndarray, speed: np.ndarray) -> float | None:
    """The spectral noise floor of a raw-head timecode over the 0.2 s around its slowest play,
    where the pulses' spectrum reaches least high (from 8 × the fastest bit rate in that window)."""
    if speed.size == 0:
        return None
    c = float(t_s[int(np.argmin(speed))])
    a, b = max(0.0, c - 0.1), min(x.size / rate_hz, c + 0.1)
    near = (t_s >= a) & (t_s <= b)
    f_lo = 8 * 80 * (p.rate_fps or p.rate_fps_candidates[0]) * float(np.max(speed[near]))
    return _spectral_noise(x[int(a * rate_hz):int(b * rate_hz)], rate_hz, f_lo)


def level_noise(x, rate_hz, read: Read, kind: str, t_s: np.ndarray, speed: np.ndarray):
    """(level_peak, noise RMS or None, how the noise was measured)."""
    p = read.payload
    if read.format == "ltc":
        tb = p.bits
        if kind == "line":
            # the edges of the passing frames only: a damaged stretch holds edges the parse missed
            k = np.concatenate([np.arange(f.first_bit, f.first_bit + 80) for f in p.frames])
            start, end = tb.start_s[k], tb.end_s[k]
            edges = np.unique(np.concatenate((start, end, (0.5 * (start + end))[tb.bits[k] == 1])))
            return _flat_level_noise(x, rate_hz, edges, float(np.median(tb.period_s[k])))
        idx = np.clip(np.round(tb.start_s * rate_hz).astype(np.int64), 2, x.size - 3)
        peaks = np.max(np.abs(np.stack([x[idx + k] for k in (-2, -1, 0, 1, 2)])), axis=0)
        return float(np.median(peaks)), _slowest_noise(x, rate_hz, p, t_s, speed), "spectrum"
    a, b = (int(v * rate_hz) for v in (p.start_s, p.end_s))
    seg = x[max(0, a):max(a + 1, b)]
    rms = uniform_filter1d(seg * seg, size=max(3, int(1e-3 * rate_hz)))
    level = math.sqrt(2.0 * float(np.median(rms)))
    quiet = _quiet_noise(x, rate_hz, max(0.0, p.start_s - p.leader_s), p.end_s, level)
    if quiet is not None:
        return level, quiet, "quiet"
    return level, _spectral_noise(x, rate_hz, 1.1 * 6000.0 * float(np.max(speed))), "spectrum"


def _quiet_noise(x, rate_hz, a_s: float, b_s: float, level: float, min_s: float = 0.01) -> float | None:
    """RMS over the samples outside [a_s − 5 ms, b_s + 5 ms] whose 4 ms envelope stays below
    0.4 × ``level`` (about half the tone's RMS: the silence before a leader and after a trailer,
    told from tone down to about 8 dB SNR), less 4 ms at each end of every such stretch (the
    envelope still holds tone there), when at least ``min_s`` of it is left; else None."""
    n = max(3, int(1e-3 * rate_hz))
    env = np.sqrt(np.maximum(uniform_filter1d(x * x, size=4 * n), 0.0))
    t = np.arange(x.size) / rate_hz
    use = ((t < a_s - 5e-3) | (t > b_s + 5e-3)) & (env < 0.4 * level)
    use[:n] = use[-n:] = False                           # the filter's ends
    use = minimum_filter1d(use, size=8 * n + 1)
    if np.count_nonzero(use) < min_s * rate_hz:
        return None
    return float(np.sqrt(np.mean(x[use] ** 2)))


def _flat_level_noise(x, rate_hz, edges_s, period_s: float):
    """Level and residual RMS of straight lines fitted to the flat stretches between edges."""
    guard = max(3.0 / rate_hz, 0.1 * period_s)
    a = np.ceil((edges_s[:-1] + guard) * rate_hz).astype(np.int64)
    b = np.floor((edges_s[1:] - guard) * rate_hz).astype(np.int64) + 1
    # only between neighbouring edges of one frame's cells (at most a cell apart), never across a gap
    keep = (b - a >= 4) & (a >= 0) & (b <= x.size) & (np.diff(edges_s) <= 1.5 * _local_cell(edges_s))
    a, b = a[keep], b[keep]
    if a.size < 4:
        return float(np.max(np.abs(x))), None, "flat"
    n = b - a
    seg = np.repeat(np.arange(a.size), n)
    i = np.arange(n.sum()) - np.repeat(np.cumsum(n) - n, n)     # index within its stretch
    y = x[np.repeat(a, n) + i]
    t = i.astype(float)
    sums = [np.bincount(seg, w, a.size) for w in (t, y, t * t, t * y, y * y)]
    st, sy, stt, sty, syy = sums
    cov_ty = sty - st * sy / n
    var_t = stt - st * st / n
    rss = (syy - sy * sy / n) - cov_ty * cov_ty / np.maximum(var_t, 1e-12)
    noise = math.sqrt(max(float(rss.sum()) / float((n - 2).sum()), 0.0))
    means = sy / n
    hi, lo = means[means > 0], means[means <= 0]
    level = 0.5 * (float(np.median(hi)) - float(np.median(lo))) if hi.size and lo.size else float(np.max(np.abs(means)))
    return level, noise, "flat"


def _local_cell(edges_s: np.ndarray) -> np.ndarray:
    """An upper bound of the bit cell at each interval between sorted biphase edges (s): twice the
    median of the 9 intervals around it (each interval is a half or a full cell)."""
    d = np.diff(edges_s)
    return 2.0 * median_filter(d, size=min(9, d.size), mode="nearest")


def _spectral_noise(x: np.ndarray, rate_hz: float, f_lo: float) -> float | None:
    """RMS of white noise from the median Welch density over [f_lo, 0.45 rate] (None if empty)."""
    f_hi = 0.45 * rate_hz
    if f_lo >= 0.9 * f_hi or x.size < 4096:
        return None
    f, pxx = sps.welch(x, fs=rate_hz, nperseg=1024)
    band = (f >= f_lo) & (f <= f_hi)
    if np.count_nonzero(band) < 8:
        return None
    return math.sqrt(float(np.median(pxx[band])) * rate_hz / 2.0)


def envelope(x, rate_hz, read: Read, kind: str, t_s, speed):
    """(times s, envelope / its median, window W s), every 0.25 ms or W/4."""
    w_s = 1e-3
    if kind == "head":
        # two cells at the slowest play: a slow head's pulses stand apart, and a shorter window dips between them
        w_s = max(w_s, 2 * float(np.percentile(read.payload.bits.period_s, 99)))
    n = max(3, int(w_s * rate_hz))
    env = np.sqrt(np.maximum(uniform_filter1d(x * x, size=n), 0.0))
    step = max(1, n // 4)
    t = np.arange(0, x.size, step) / rate_hz
    env = env[::step]
    if kind == "head":                                  # the head's level grows with speed
        env = env / np.interp(t, t_s, speed)
    ref = float(np.median(env))
    return t, (env / ref if ref > 0 else env), w_s


def find_dropouts(t, env, span, window_s) -> tuple[Dropout, ...]:
    inside = (t >= span[0] + window_s) & (t <= span[1] - window_s)
    inner = env[inside]
    if inner.size == 0:
        return ()
    ref = float(np.median(inner))
    low = inside & (env < ref * 10 ** (-DROP_DB / 20))
    edges = np.diff(np.concatenate(([0], low.astype(np.int8), [0])))
    starts, stops = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)
    out = []
    for a, b in zip(starts, stops):
        if t[b - 1] - t[a] < 0.5 * window_s:
            continue
        depth = -20 * math.log10(max(float(np.min(env[a:b])) / ref, 1e-6))
        out.append(Dropout(float(t[a]), float(t[b - 1]), depth))
    return tuple(out)


