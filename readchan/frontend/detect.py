"""Stage 3, transition detection: flux transitions from a head signal or a logic-level signal.

Head signal (the inductive head's voltage): each flux transition is a pulse; successive
transitions alternate in polarity (the medium's magnetisation can only flip back and forth).
The detector

1. finds candidate peaks of both polarities with ``scipy.signal.find_peaks`` above a floor set
   from the noise (the RMS of the quietest stretches) and from the signal's own size;
2. keeps an amplitude envelope that follows the local pulse amplitude, which rises and falls
   with swipe speed (a running percentile over neighbouring candidates, each first raised to
   the largest of its close neighbours, so that the ringing lobes a band-limited front end
   leaves between pulses cannot drag it down); a candidate counts
   when it exceeds ``threshold × envelope``;
3. applies the alternation rule: two accepted candidates of the same polarity in a row mean
   either a noise peak (the smaller one, close to the other, is dropped and flagged ``EXTRA``)
   or a missed opposite pulse, which is rescued from the deepest opposite excursion between
   them when that exceeds half the threshold (flagged ``WEAK``), else flagged ``MISSING``;
4. places each peak in time to a fraction of a sample by fitting a parabola to the three
   samples around it.

Logic signal (a comparator's two-level output, or a flux waveform): transitions are the
crossings of the mid level with hysteresis, timed by linear interpolation.

Input: one channel's conditioned samples (float64, capture units) and the sample rate (Hz).
Output: :class:`Transitions`.  Memory: the detector holds one full-length float64 array of
its own at a time (the magnitudes the candidates are found in) besides its input; the
signal is not converted to float32, since the candidates' order and the parabola's sub-sample
times would then round differently from the reads decoding has given.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import signal as sps
from scipy.ndimage import maximum_filter1d, median_filter, percentile_filter

from readchan._compiled import kernel
from readchan.frontend.scan import lobe_scan, parabola

# Transition flags (``Transitions.flags``).  The line decoder's per-bit flags are ``BIT_*`` in
# readchan.linecode.f2f: the two sets share values, so each has its own prefix and mask.
TR_EXTRA = np.uint8(1)
"""A same-polarity neighbour of this transition was dropped as a noise peak."""
TR_WEAK = np.uint8(2)
"""This transition was rescued below threshold between two pulses of the same polarity."""
TR_MISSING = np.uint8(4)
"""The transition before this one has the same polarity: one (or an odd number) is missing."""


@dataclass(frozen=True)
class Transitions:
    """Detected flux transitions of one channel.

    Attributes
    ----------
    times_s : transition times in seconds from the capture's first sample (sub-sample).
    index : nearest sample index of each transition.
    amplitude : signed peak value at each transition (capture units); logic: the level after.
    envelope : the local pulse-amplitude estimate each transition was accepted against (see
        :func:`detect_head`).
    flags : per-transition bit mask of ``TR_*`` (transition flags; bit flags are the line decoder's ``BIT_*``).
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

    @classmethod
    def empty(cls, kind: str, rate_hz: float, noise_rms: float = 0.0) -> "Transitions":
        """No transitions: a channel with nothing detected (or not detected at all)."""
        z = np.zeros(0)
        return cls(z, np.zeros(0, np.int64), z, z, np.zeros(0, np.uint8), float(rate_hz), kind, float(noise_rms))

    def subset(self, start: int, stop: int) -> "Transitions":
        """Transitions ``start:stop`` as a new object."""
        sl = slice(start, stop)
        flags = self.flags[sl].copy()
        if flags.size:
            # polarity against a transition outside the subset says nothing about this one
            flags[0] &= ~TR_MISSING
        return Transitions(self.times_s[sl], self.index[sl], self.amplitude[sl], self.envelope[sl],
                           flags, self.rate_hz, self.kind, self.noise_rms)


def classify_kind(x: np.ndarray) -> str:
    """``"logic"`` when nearly all samples sit at two levels, else ``"head"``.

    A comparator output or flux waveform spends its time at its two rails; a head signal
    spends it near the baseline between pulses (common practice).
    """
    x = x[:: max(1, x.size // 200_000)]
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
    rows = x[: nb * block].reshape(nb, block)
    step = max(1, (1 << 18) // block)     # squared a quarter-million samples at a time, not all at once
    ms = np.concatenate([np.mean(rows[a:a + step] ** 2, axis=1) for a in range(0, nb, step)])
    return float(np.percentile(np.sqrt(ms), 10))


def quantisation_step(x: np.ndarray) -> float:
    """The converter's step when the samples lie on a uniform grid (an 8-bit scope export, a
    16-bit WAV), else 0: the smallest difference between distinct values, accepted when 99 % of
    the differences between neighbouring distinct values are whole multiples of it (within 1 %)."""
    sub = np.asarray(x[:: max(1, x.size // 200_000)], float)
    u = np.unique(sub)
    if u.size < 2 or u.size > max(16, sub.size // 4):
        return 0.0
    d = np.diff(u)
    q = float(d.min())
    if not q > 0:
        return 0.0
    k = d / q
    return q if np.mean(np.abs(k - np.round(k)) < 0.01) >= 0.99 else 0.0


def detect_head(x: np.ndarray, rate_hz: float, *, threshold: float = 0.4,
                floor_sigma: float = 4.5, window: int = 15, timing: str = "peak",
                quant_step: float = 0.0, noise: float | None = None) -> Transitions:
    """Detect pulse peaks in a conditioned head signal ``x``.

    Parameters
    ----------
    x : conditioned head signal (baseline at 0).
    rate_hz : sample rate in Hz.
    threshold : fraction of the local envelope a pulse must exceed.
    floor_sigma : candidate floor in units of the noise RMS.
    window : number of neighbouring candidates the local envelope is taken over.
    timing : ``"peak"`` (parabola through the three samples at the peak) or ``"midpoint"``
        (:func:`level_midpoint_times`, for clipped captures).
    quant_step : the capture's quantisation step (capture units; :func:`quantisation_step`),
        0 when unknown.  Noise finer than the step reaches the samples as sparse one-level
        toggles, which leave most 1 ms blocks at zero and fool the block-RMS noise estimate, so
        the noise is taken as at least step/√12 (the uniform-error model; Widrow & Kollár,
        *Quantization Noise*, 2008) and the candidate floor as at least two steps: a one-level
        excursion is the converter's rounding, never a pulse.
    noise : the noise RMS (capture units) to set the floor from, instead of measuring it here
        (:func:`noise_rms`): a capture's own, decided once for all its stretches.

    Notes
    -----
    Candidates are *lobes*: stretches between crossings of ± half the floor (hysteresis), one
    candidate at each lobe's extreme, so noise ripple on a pulse's crest is never a second
    pulse and candidates alternate in polarity by construction.  The local envelope at a
    candidate is the 75th percentile, over the ``window`` candidates around it
    (``scipy.ndimage.percentile_filter``), of the largest |peak| among each candidate and its
    two neighbours on either side (``maximum_filter1d``, size 5), so it follows the amplitude as
    it rises and falls with swipe speed without a per-sample loop.  The maximum first matters on
    band-limited captures: a causal preamp low-pass (and the decoder's own low-pass) leaves small
    ringing lobes after every pulse, up to four between two pulses, which as candidates would
    outnumber the pulses and pull a plain percentile down to their own level, and then pass
    the threshold as pulses themselves.  A candidate is a pulse when it exceeds
    ``threshold × envelope``; where two pulses of one polarity then follow each other, the
    alternation rule is resolved one case at a time (the only loop, over those cases).
    """
    x = np.asarray(x, dtype=float)
    sigma = max(noise_rms(x, rate_hz) if noise is None else float(noise), quant_step / np.sqrt(12.0))
    step = max(1, x.size // 500_000)
    big = float(np.percentile(np.abs(x[::step]), 99.9)) if x.size else 0.0
    if not big > 0:
        return Transitions.empty("head", rate_hz, sigma)
    floor = min(max(floor_sigma * sigma, 0.02 * big, 2.0 * quant_step), 0.3 * big)
    idx, sgn = _lobe_peaks(x, 0.5 * floor, floor)
    amp = np.abs(x[idx])
    if idx.size == 0:
        return Transitions.empty("head", rate_hz, sigma)
    env = percentile_filter(maximum_filter1d(amp, size=min(5, idx.size), mode="nearest"), 75,
                            size=min(window, idx.size), mode="nearest")
    strong = amp >= threshold * env
    idx, env, flags = _alternate(x, idx, sgn, amp, env, strong, threshold)
    times = (level_midpoint_times(x, idx) if timing == "midpoint" else _parabolic_times(x, idx)) / rate_hz
    return Transitions(times, idx, x[idx], env, flags, float(rate_hz), "head", sigma)


def _lobe_peaks(x: np.ndarray, h: float, floor: float) -> tuple[np.ndarray, np.ndarray]:
    """Index and sign of the tallest peak above ``floor`` in every lobe of ``x`` (hysteresis
    ± ``h``), vectorised.

    Peaks come from ``find_peaks`` on |x|.  Two neighbouring peaks of one sign lie in the same
    lobe when the signal between them never crosses the opposite hysteresis level, which the
    minimum (or maximum) of each stretch between peaks tells (``np.minimum.reduceat``).  Once
    enough samples have gone this way, the compiled one-pass scan
    (:func:`readchan.frontend.scan.lobe_scan`, the same values) runs instead.
    """
    if lobe_scan.ready(x.size):
        return lobe_scan(x, float(h), float(floor))
    a = np.abs(x)
    a[a <= floor] = 0.0                                    # zeroing below the floor: fewer maxima
    idx, _ = sps.find_peaks(a)
    del a
    if idx.size == 0:
        return np.zeros(0, np.int64), np.zeros(0, np.int8)
    sgn = np.where(x[idx] > 0, 1, -1).astype(np.int8)
    if idx.size == 1:
        return idx.astype(np.int64), sgn
    low = np.minimum.reduceat(x, idx)[:-1]      # min over [idx_k, idx_k+1)
    high = np.maximum.reduceat(x, idx)[:-1]
    same = (sgn[1:] == sgn[:-1]) & np.where(sgn[1:] > 0, low > -h, high < h)
    group = np.concatenate(([0], np.cumsum(~same)))
    order = np.lexsort((-np.abs(x[idx]), group))
    first = np.concatenate(([True], group[order][1:] != group[order][:-1]))
    keep = np.sort(order[first])
    return idx[keep].astype(np.int64), sgn[keep]


def _alternate(x, idx, sgn, amp, env, strong, threshold):
    """Keep the strong candidates and enforce the alternation rule between them.

    Between two strong candidates of the same polarity, the largest weaker candidate of the
    opposite polarity is taken as a (weak) pulse if it exceeds half the threshold; else the
    two are one pulse if closer than 0.6 of the local interval (the smaller dropped, flag
    ``EXTRA``), or a pulse is missing between them (flag ``MISSING``).
    """
    S = np.flatnonzero(strong)
    flags = np.zeros(S.size, np.uint8)
    if S.size < 2:
        return idx[S].astype(np.int64), env[S], flags
    same = np.flatnonzero(sgn[S[1:]] == sgn[S[:-1]])
    if same.size == 0:
        return idx[S].astype(np.int64), env[S], flags
    d = np.diff(idx[S]).astype(float)
    interval = median_filter(d, size=min(9, d.size), mode="nearest")
    keep, flags, extra, extra_env, extra_flag = _alternation_cases(S, same, idx, sgn, amp, env, interval,
                                                                   float(threshold))
    cand = np.concatenate((S[keep], extra))
    envs = np.concatenate((env[S][keep], extra_env))
    fl = np.concatenate((flags[keep], extra_flag))
    order = np.argsort(cand, kind="stable")
    return idx[cand[order]].astype(np.int64), envs[order], fl[order]


@kernel
def _alternation_cases(S, same, idx, sgn, amp, env, interval, threshold):
    """The cases of :func:`_alternate`, one at a time: the strong candidates kept, their flags,
    and the weak candidates rescued (candidate, envelope, flag)."""
    keep = np.ones(S.size, np.bool_)
    flags = np.zeros(S.size, np.uint8)
    extra = np.empty(same.size, np.int64)
    extra_env = np.empty(same.size)
    n_extra = 0
    for k in same:
        a, b = S[k], S[k + 1]
        if not keep[k]:
            continue
        best, best_amp = -1, 0.0
        for c in range(a + 1, b):          # the largest candidate of the opposite polarity between
            if sgn[c] != sgn[a] and (best < 0 or amp[c] > best_amp):
                best, best_amp = c, amp[c]
        if best >= 0 and best_amp > 0.5 * threshold * env[b]:
            extra[n_extra] = best
            extra_env[n_extra] = env[b]
            n_extra += 1
        elif idx[b] - idx[a] < 0.6 * interval[k]:
            drop = k if amp[b] > amp[a] else k + 1
            keep[drop] = False
            flags[k if drop == k + 1 else k + 1] |= 1            # TR_EXTRA
        else:
            flags[k + 1] |= 4                                    # TR_MISSING
    extra_flag = np.full(n_extra, 2, np.uint8)                  # TR_WEAK
    return keep, flags, extra[:n_extra].copy(), extra_env[:n_extra].copy(), extra_flag


def clipped_fraction(x: np.ndarray) -> float:
    """Fraction of samples sitting at either extreme of the signal (within 0.1 % of its span of
    the largest or of the smallest value), the larger of the two: a clipped front end flattens
    the pulse crests there.  Each rail on its own, since a baseline offset ahead of the clipper
    (wander, DC) brings one polarity to its rail long before the other."""
    x = x[:: max(1, x.size // 500_000)]
    if x.size == 0:
        return 0.0
    lo, hi = float(x.min()), float(x.max())
    span = hi - lo
    if not span > 0:
        return 0.0
    return float(max(np.mean(x >= hi - 1e-3 * span), np.mean(x <= lo + 1e-3 * span)))


def level_midpoint_times(x: np.ndarray, idx: np.ndarray, *, level: float = 0.75) -> np.ndarray:
    """Pulse times (in samples) as the midpoint of the crossings of ``level`` × each pulse's
    peak on either side of it, linearly interpolated.

    For a symmetric pulse this is the peak; for a clipped pulse, whose crest is flat, it is
    the middle of the plateau, where the peak itself is undefined.  A loop over pulses.
    """
    out = np.empty(idx.size)
    n = x.size
    # search as far as the neighbouring pulses: they have the opposite sign, so the signal
    # crosses the level on the way to each.  (Half-way to them is not enough: a flat crest's
    # extreme sample, which ``idx`` holds, may sit at either end of the crest, and half-way to
    # the neighbour then falls inside the crest.)
    bounds = np.concatenate(([0], idx.astype(np.int64), [n - 1]))
    for k in range(idx.size):
        i = int(idx[k])
        s = 1.0 if x[i] >= 0 else -1.0
        thr = level * s * x[i]
        lo, hi = int(bounds[k]), int(bounds[k + 2])
        left = s * x[lo:i + 1] < thr
        right = s * x[i:hi + 1] < thr
        if not left.any() or not right.any():
            out[k] = i
            continue
        a = lo + int(np.flatnonzero(left)[-1])            # last sample below, left of the peak
        b = i + int(np.flatnonzero(right)[0])             # first sample below, right of it
        ya, ya1 = s * x[a], s * x[a + 1]
        yb0, yb = s * x[b - 1], s * x[b]
        ta = a + (thr - ya) / (ya1 - ya) if ya1 != ya else a
        tb = b - 1 + (yb0 - thr) / (yb0 - yb) if yb0 != yb else b
        out[k] = 0.5 * (ta + tb)
    return out


def _parabolic_times(x: np.ndarray, i: np.ndarray) -> np.ndarray:
    """Sub-sample peak positions (in samples) from a parabola through samples i−1, i, i+1
    (compiled, :func:`readchan.frontend.scan.parabola`, once enough peaks have gone through; the same values)."""
    if i.size == 0:
        return np.zeros(0)
    if x.size >= 3 and parabola.ready(i.size):
        return parabola(np.ascontiguousarray(i, dtype=np.int64), x)
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
        return Transitions.empty("logic", rate_hz)
    s = np.where(x > mid + hysteresis * span, 1, np.where(x < mid - hysteresis * span, -1, 0)).astype(np.int8)
    pos = np.where(s != 0, np.arange(s.size), 0)
    np.maximum.accumulate(pos, out=pos)
    state = s[pos]
    first = np.flatnonzero(state != 0)
    if first.size == 0:
        return Transitions.empty("logic", rate_hz)
    change = np.flatnonzero(np.diff(state[first[0]:]) != 0) + first[0] + 1
    times = _logic_times(np.ascontiguousarray(x), float(mid), state[change].astype(np.float64), change)
    lvl = np.where(state[change] > 0, hi, lo)
    env = np.full(change.size, 0.5 * span)
    return Transitions(times / rate_hz, change.astype(np.int64), lvl - mid, env,
                       np.zeros(change.size, np.uint8), float(rate_hz), "logic", 0.0)


@kernel
def _logic_times(x, mid, state_after, change):
    """Each change of state at sample ``change[n]`` timed at the crossing of ``mid`` just before
    it, walking back over the samples already past the mid level, linearly interpolated."""
    times = np.empty(change.size)
    for n in range(change.size):
        k = change[n]
        j = k
        while j > 0 and (x[j - 1] - mid) * state_after[n] > 0:
            j -= 1
        a, b = x[j - 1] - mid, x[j] - mid
        times[n] = (j - 1 + a / (a - b)) if j > 0 and a != b else j
    return times
