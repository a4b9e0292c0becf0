"""Stage 2, transition detection: flux transitions from a head signal or a logic-level signal.

Head signal (the inductive head's voltage): each flux transition is a pulse; successive
transitions alternate in polarity (the medium's magnetisation can only flip back and forth).
The detector

1. finds candidate peaks of both polarities with ``scipy.signal.find_peaks`` above a floor set
   from the noise (the RMS of the quietest stretches) and from the signal's own size;
2. walks the candidates in time order (a loop over candidates, not samples) keeping an
   amplitude envelope that follows the local pulse amplitude, which rises and falls with swipe
   speed; a candidate counts when it exceeds ``threshold × envelope`` (the hysteresis: a
   new pulse must be of the opposite polarity to the last one accepted);
3. applies the alternation rule: two accepted candidates of the same polarity in a row mean
   either a noise peak (the smaller one, close to the other, is dropped and flagged ``EXTRA``)
   or a missed opposite pulse, which is rescued from the deepest opposite excursion between
   them when that exceeds half the threshold (flagged ``WEAK``), else flagged ``MISSING``;
4. places each peak in time to a fraction of a sample by fitting a parabola to the three
   samples around it.

Logic signal (a comparator's two-level output, or a flux waveform): transitions are the
crossings of the mid level with hysteresis, timed by linear interpolation.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import signal as sps

FLAG_EXTRA = np.uint8(1)
"""A same-polarity neighbour of this transition was dropped as a noise peak."""
FLAG_WEAK = np.uint8(2)
"""This transition was rescued below threshold between two pulses of the same polarity."""
FLAG_MISSING = np.uint8(4)
"""The transition before this one has the same polarity: one (or an odd number) is missing."""


@dataclass(frozen=True)
class Transitions:
    """Detected flux transitions of one channel.

    Attributes
    ----------
    times_s : transition times in seconds from the capture's first sample (sub-sample).
    index : nearest sample index of each transition.
    amplitude : signed peak value at each transition (capture units); logic: the level after.
    envelope : the local pulse-amplitude estimate when the transition was accepted.
    flags : per-transition bit mask of ``FLAG_*``.
    rate_hz : sample rate in Hz.
    kind : ``"head"`` or ``"logic"``.
    noise_rms : noise RMS estimated from the quietest stretches (capture units).
    """

    times_s: np.ndarray
    index: np.ndarray
    amplitude: np.ndarray
    envelope: np.ndarray
    flags: np.ndarray
    rate_hz: float
    kind: str
    noise_rms: float

    def __len__(self) -> int:
        return int(self.times_s.size)

    def subset(self, start: int, stop: int) -> "Transitions":
        """Transitions ``start:stop`` as a new object."""
        sl = slice(start, stop)
        return Transitions(self.times_s[sl], self.index[sl], self.amplitude[sl], self.envelope[sl],
                           self.flags[sl], self.rate_hz, self.kind, self.noise_rms)


def classify_kind(x: np.ndarray) -> str:
    """``"logic"`` when nearly all samples sit at two levels, else ``"head"``.

    A comparator output or flux waveform spends its time at its two rails; a head signal
    spends it near the baseline between pulses (common practice).
    """
    lo, hi = np.percentile(x, [1.0, 99.0])
    span = hi - lo
    if not span > 0:
        return "head"
    near = (np.abs(x - lo) < 0.2 * span) | (np.abs(x - hi) < 0.2 * span)
    mid = np.abs(x - 0.5 * (lo + hi)) < 0.2 * span
    frac_lo = np.mean(np.abs(x - lo) < 0.2 * span)
    two_level = near.mean() > 0.9 and mid.mean() < 0.05 and 0.02 < frac_lo < 0.98
    return "logic" if two_level else "head"


def noise_rms(x: np.ndarray, rate_hz: float) -> float:
    """Noise RMS from the quietest stretches: the 10th percentile of 1 ms block RMS values."""
    block = max(16, int(rate_hz * 1e-3))
    nb = x.size // block
    if nb < 4:
        return float(np.std(x))
    r = np.sqrt(np.mean(x[: nb * block].reshape(nb, block) ** 2, axis=1))
    return float(np.percentile(r, 10))


def detect_head(x: np.ndarray, rate_hz: float, *, threshold: float = 0.4,
                envelope_gain: float = 0.15, floor_sigma: float = 4.5) -> Transitions:
    """Detect pulse peaks in a conditioned head signal ``x``.

    Parameters
    ----------
    x : conditioned head signal (baseline at 0).
    rate_hz : sample rate in Hz.
    threshold : fraction of the local envelope a pulse must exceed.
    envelope_gain : gain of the envelope's exponential tracking, per accepted pulse.
    floor_sigma : candidate floor in units of the noise RMS.
    """
    x = np.asarray(x, dtype=float)
    sigma = noise_rms(x, rate_hz)
    big = float(np.percentile(np.abs(x), 99.9)) if x.size else 0.0
    floor = max(floor_sigma * sigma, 0.02 * big)
    floor = min(floor, 0.3 * big) if big > 0 else floor
    if not big > 0:
        return _empty("head", rate_hz, sigma)
    pos, _ = sps.find_peaks(x, height=floor, prominence=0.5 * floor)
    neg, _ = sps.find_peaks(-x, height=floor, prominence=0.5 * floor)
    idx = np.concatenate((pos, neg))
    order = np.argsort(idx, kind="stable")
    idx = idx[order]
    sgn = np.concatenate((np.ones(pos.size, np.int8), -np.ones(neg.size, np.int8)))[order]
    amp = np.abs(x[idx])
    keep_i, keep_env, keep_flag = _walk(x, idx, sgn, amp, rate_hz, threshold, envelope_gain)
    keep_i = np.asarray(keep_i, dtype=np.int64)
    times = _parabolic_times(x, keep_i) / rate_hz
    return Transitions(times, keep_i, x[keep_i] if keep_i.size else np.zeros(0),
                       np.asarray(keep_env, float), np.asarray(keep_flag, np.uint8), float(rate_hz), "head", sigma)


def _walk(x, idx, sgn, amp, rate_hz, threshold, gain):
    """The per-candidate state machine of :func:`detect_head` (a loop over candidates)."""
    out_i: list[int] = []
    out_env: list[float] = []
    out_flag: list[int] = []
    env = 0.0
    interval = np.inf          # running transition interval, samples (inf until known)
    run = 0                    # transitions accepted since the last reset
    reset_gap = 0.03 * rate_hz
    for j in range(idx.size):
        i = int(idx[j])
        if run == 0 or i - out_i[-1] > max(reset_gap, 20 * interval):
            ahead = amp[j: j + 12]
            env = float(np.median(np.sort(ahead)[-8:]))
            interval, run = np.inf, 0
        if amp[j] < threshold * env:
            continue
        flag = 0
        if run and sgn[j] == np.sign(x[out_i[-1]]):
            prev = out_i[-1]
            seg = x[prev:i + 1]
            k = int(np.argmin(seg) if sgn[j] > 0 else np.argmax(seg))
            dip = -sgn[j] * seg[k]
            if dip > 0.5 * threshold * env:
                out_i.append(prev + k)
                out_env.append(env)
                out_flag.append(int(FLAG_WEAK))
                run += 1
            elif not np.isfinite(interval) or (i - prev) < 0.6 * interval:
                if amp[j] > abs(x[prev]):
                    out_i[-1] = i
                out_flag[-1] |= int(FLAG_EXTRA)
                continue
            else:
                flag = int(FLAG_MISSING)
        out_i.append(i)
        out_env.append(env)
        out_flag.append(flag)
        run += 1
        if run >= 2:
            d = out_i[-1] - out_i[-2]
            interval = d if not np.isfinite(interval) else interval + 0.2 * (d - interval)
        if amp[j] > 0.6 * env:      # weak pulses (and noise) do not drag the envelope down
            env = env + gain * (min(float(amp[j]), 3 * env) - env)
    return out_i, out_env, out_flag


def auto_lowpass_hz(tr: Transitions, rate_hz: float, *, factor: float = 1.0) -> float | None:
    """Low-pass corner (Hz) matched to the pulse rate: ``factor`` / the 10th-percentile interval.

    The shortest F2F interval is a half cell h; a pulse's spectrum lies mostly below 1/h for the
    PW50 of a working channel (PW50 ≲ 0.6 of a cell), so a corner at 1/h keeps the pulses and
    drops the noise above them (common practice).  None when there are too few transitions or
    the corner would sit near Nyquist anyway.
    """
    d = np.diff(tr.times_s)
    d = d[(d > 0) & (d < 0.02)]
    if d.size < 16:
        return None
    f = factor / float(np.percentile(d, 10))
    return f if f < 0.4 * rate_hz else None


def _parabolic_times(x: np.ndarray, i: np.ndarray) -> np.ndarray:
    """Sub-sample peak positions (in samples) from a parabola through samples i−1, i, i+1."""
    if i.size == 0:
        return np.zeros(0)
    ic = np.clip(i, 1, x.size - 2)
    ym, y0, yp = x[ic - 1], x[ic], x[ic + 1]
    den = ym - 2 * y0 + yp
    with np.errstate(divide="ignore", invalid="ignore"):
        d = np.where(np.abs(den) > 1e-300, 0.5 * (ym - yp) / den, 0.0)
    return ic + np.clip(d, -0.5, 0.5)


def detect_logic(x: np.ndarray, rate_hz: float, *, hysteresis: float = 0.2) -> Transitions:
    """Transitions of a two-level signal: mid-level crossings with ± ``hysteresis`` × span."""
    x = np.asarray(x, dtype=float)
    lo, hi = np.percentile(x, [1.0, 99.0])
    mid, span = 0.5 * (lo + hi), hi - lo
    if not span > 0:
        return _empty("logic", rate_hz, 0.0)
    s = np.where(x > mid + hysteresis * span, 1, np.where(x < mid - hysteresis * span, -1, 0)).astype(np.int8)
    pos = np.where(s != 0, np.arange(s.size), 0)
    np.maximum.accumulate(pos, out=pos)
    state = s[pos]
    first = np.flatnonzero(state != 0)
    if first.size == 0:
        return _empty("logic", rate_hz, 0.0)
    change = np.flatnonzero(np.diff(state[first[0]:]) != 0) + first[0] + 1
    times = np.empty(change.size)
    for n, k in enumerate(change):
        j = k
        while j > 0 and (x[j - 1] - mid) * state[k] > 0:
            j -= 1
        a, b = x[j - 1] - mid, x[j] - mid
        times[n] = (j - 1 + a / (a - b)) if j > 0 and a != b else j
    lvl = np.where(state[change] > 0, hi, lo)
    env = np.full(change.size, 0.5 * span)
    return Transitions(times / rate_hz, change.astype(np.int64), lvl - mid, env,
                       np.zeros(change.size, np.uint8), float(rate_hz), "logic", 0.0)


def _empty(kind: str, rate_hz: float, sigma: float) -> Transitions:
    z = np.zeros(0)
    return Transitions(z, np.zeros(0, np.int64), z, z, np.zeros(0, np.uint8), float(rate_hz), kind, sigma)
