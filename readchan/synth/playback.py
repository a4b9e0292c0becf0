"""Tape playback for the synthesizers: play-speed profiles and the playback channel's impairments.

Input: a play-speed profile and capture times (seconds); a clean signal (samples).
Output: speed and tape time at those times; the signal with the playback impairments.

Play speed is relative to nominal (1.0 = the recording speed).  A profile is piecewise linear
through ``points`` (time_s, speed), held constant beyond its ends, multiplied by wow and
flutter: ``s(t) = p(t) · (1 + w·sin(2π f_w t + φ_w) + f·sin(2π f_f t + φ_f))``.  Wow is the slow
part (below about 4 Hz), flutter the fast part (about 4–200 Hz) of speed variation (common
practice; the split from memory).  Tape time τ(t) = ∫₀ᵗ s dt' (trapezoid rule on a grid of at
least 20 points per period of the fastest variation, like the card synthesizer's
position-to-time integration) is how far the recording has moved, in seconds of nominal play.

Impairments, applied in the order a playback chain meets them: dropouts (the tape signal
falls by ``depth_db`` with 1 ms raised-cosine edges; noise added later stays), white noise at
``snr_db`` below the signal's peak, mains hum, DC offset, a first-order AC-coupling high-pass,
a playback band (second-order Butterworth band-pass, causal like an analog filter),
polarity inversion, and last the reader's analog chain (:class:`readchan.synth.chain.FrontEnd`:
AC coupling, a causal preamp low-pass, quantisation), rendered at the output rate: the tape
synthesizers draw their signal there, so the chain's filters run without the card
synthesizer's oversampling (their bilinear-transform images are exact at the corner and close
to the analog response well below the output's Nyquist frequency).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy import signal as sps

from readchan.errors import ParameterError
from readchan.synth.chain import FrontEnd, filter_chain, quantise

MIN_SPEED, MAX_SPEED = 0.05, 20.0


def _finite(name: str, value: float, lo: float, hi: float) -> float:
    v = float(value)
    if not math.isfinite(v) or not lo <= v <= hi:
        raise ParameterError(f"{name} must be between {lo} and {hi}, was {value!r}")
    return v


@dataclass(frozen=True)
class PlaySpeed:
    """A play-speed profile (see the module docstring).

    Parameters
    ----------
    points : (time_s, speed) pairs, times increasing; speed relative to nominal, 0.05–20.
    wow_depth, wow_hz : peak fractional speed variation of wow and its frequency (Hz).
    flutter_depth, flutter_hz : the same for flutter.
    wow_phase, flutter_phase : their phases φ_w, φ_f at t = 0 (radians).
    """

    points: tuple[tuple[float, float], ...] = ((0.0, 1.0),)
    wow_depth: float = 0.0
    wow_hz: float = 0.5
    flutter_depth: float = 0.0
    flutter_hz: float = 8.0
    wow_phase: float = 0.0
    flutter_phase: float = 1.0

    def __post_init__(self) -> None:
        if not self.points:
            raise ParameterError("a speed profile needs at least one point")
        times = [_finite("profile time", t, 0.0, 1e6) for t, _ in self.points]
        for _, s in self.points:
            _finite("play speed", s, MIN_SPEED, MAX_SPEED)
        if any(b <= a for a, b in zip(times[:-1], times[1:])):
            raise ParameterError("profile times must increase")
        _finite("wow_depth", self.wow_depth, 0.0, 0.3)
        _finite("flutter_depth", self.flutter_depth, 0.0, 0.3)
        _finite("wow_hz", self.wow_hz, 0.0, 100.0)
        _finite("flutter_hz", self.flutter_hz, 0.0, 1000.0)

    @classmethod
    def constant(cls, speed: float = 1.0, **kw) -> "PlaySpeed":
        """Steady play at ``speed``."""
        return cls(((0.0, speed),), **kw)

    @classmethod
    def ramp(cls, start: float, end: float, ramp_s: float, *, at_s: float = 0.0, **kw) -> "PlaySpeed":
        """From ``start`` to ``end`` over ``ramp_s`` seconds beginning at ``at_s`` (e.g. spin-up)."""
        return cls(((at_s, start), (at_s + ramp_s, end)), **kw)

    @classmethod
    def shuttle(cls, base: float, top: float, ramp_s: float, hold_s: float, *, at_s: float = 0.0,
                **kw) -> "PlaySpeed":
        """``base`` → ``top`` over ``ramp_s``, held ``hold_s``, back to ``base`` over ``ramp_s``."""
        t1 = at_s + ramp_s
        return cls(((at_s, base), (t1, top), (t1 + hold_s, top), (t1 + hold_s + ramp_s, base)), **kw)

    def speed(self, t_s: np.ndarray) -> np.ndarray:
        """Play speed at capture times ``t_s``."""
        t = np.asarray(t_s, float)
        pt, ps = zip(*self.points)
        s = np.interp(t, pt, ps)
        pw, pf = self.wow_phase, self.flutter_phase
        mod = 1.0
        if self.wow_depth:
            mod = mod + self.wow_depth * np.sin(2 * np.pi * self.wow_hz * t + pw)
        if self.flutter_depth:
            mod = mod + self.flutter_depth * np.sin(2 * np.pi * self.flutter_hz * t + pf)
        return s * mod

    def tape_grid(self, duration_s: float) -> tuple[np.ndarray, np.ndarray]:
        """(capture time grid, tape time τ on it) over ``[0, duration_s]``, both seconds."""
        fastest = max(self.wow_hz if self.wow_depth else 0.0, self.flutter_hz if self.flutter_depth else 0.0)
        n = int(min(2_000_000, max(20_001, duration_s * 40 * fastest, duration_s * 2000)))
        tg = np.linspace(0.0, duration_s, n)
        sg = self.speed(tg)
        tau = np.concatenate(([0.0], np.cumsum(0.5 * (sg[1:] + sg[:-1]) * np.diff(tg))))
        return tg, tau


@dataclass(frozen=True)
class Playback:
    """Impairments of the playback channel (all off by default; see the module docstring).

    Parameters
    ----------
    snr_db : white noise 20·log10(peak / noise RMS) below the signal's peak; None for none.
    hum_hz, hum_level : mains hum frequency (Hz) and amplitude as a fraction of the peak.
    dc_offset : DC offset in output units.
    highpass_hz : corner of a first-order AC-coupling high-pass (Hz); None for DC coupling.
    band_hz : (low, high) corners of the playback band (Hz); None for a flat band.
    dropouts : ((start_s, duration_s, depth_db), ...) where the tape signal falls.
    invert : invert the polarity.
    chain : the reader's analog chain (:class:`readchan.synth.chain.FrontEnd`), or None.
    """

    snr_db: float | None = None
    hum_hz: float = 50.0
    hum_level: float = 0.0
    dc_offset: float = 0.0
    highpass_hz: float | None = None
    band_hz: tuple[float, float] | None = None
    dropouts: tuple[tuple[float, float, float], ...] = ()
    invert: bool = False
    chain: FrontEnd | None = None

    def __post_init__(self) -> None:
        if self.chain is not None and not isinstance(self.chain, FrontEnd):
            raise ParameterError(f"chain must be a readchan.synth.chain.FrontEnd, was {type(self.chain).__name__}")
        if self.snr_db is not None:
            _finite("snr_db", self.snr_db, -20.0, 200.0)
        _finite("hum_hz", self.hum_hz, 0.0, 1e6)
        _finite("hum_level", self.hum_level, 0.0, 100.0)
        _finite("dc_offset", self.dc_offset, -100.0, 100.0)
        if self.highpass_hz is not None:
            _finite("highpass_hz", self.highpass_hz, 1e-3, 1e6)
        if self.band_hz is not None:
            lo, hi = self.band_hz
            _finite("band low corner", lo, 1.0, 1e6)
            _finite("band high corner", hi, 1.0, 1e7)
            if hi <= lo:
                raise ParameterError(f"the playback band must have low < high, was {self.band_hz!r}")
        for start, dur, depth in self.dropouts:
            _finite("dropout start", start, 0.0, 1e6)
            _finite("dropout duration", dur, 0.0, 1e6)
            _finite("dropout depth", depth, 0.0, 200.0)

    def apply(self, x: np.ndarray, rate_hz: float, peak: float, rng: np.random.Generator
              ) -> tuple[np.ndarray, float]:
        """(impaired copy of ``x``, noise RMS) for a signal whose peak is ``peak``."""
        y = np.array(x, float)
        n = y.size
        t = np.arange(n) / rate_hz
        if self.dropouts:
            y *= dropout_gain(t, self.dropouts)
        rms = 0.0
        if self.snr_db is not None:
            rms = peak / 10 ** (self.snr_db / 20)
            y += rng.normal(0.0, rms, n)
        if self.hum_level:
            y += self.hum_level * peak * np.sin(2 * np.pi * self.hum_hz * t + rng.uniform(0, 2 * np.pi))
        y += self.dc_offset
        if self.highpass_hz is not None:
            b, a = sps.butter(1, self.highpass_hz, btype="highpass", fs=rate_hz)
            y = sps.lfilter(b, a, y)
        if self.band_hz is not None:
            lo, hi = self.band_hz
            hi = min(hi, 0.45 * rate_hz)
            sos = sps.butter(2, [lo, hi], btype="bandpass", fs=rate_hz, output="sos")
            y = sps.sosfilt(sos, y)
        if self.invert:
            y = -y
        if self.chain is not None:
            fe = replace(self.chain, oversample=1)      # drawn at the output rate (module docstring)
            fe.check_rate(rate_hz)
            y = quantise(filter_chain(y[:, None], rate_hz, fe)[:, 0], fe)
        return y, rms


def dropout_gain(t_s: np.ndarray, dropouts) -> np.ndarray:
    """Gain at times ``t_s``: 1 outside the dropouts, 10^(−depth/20) inside, 1 ms raised-cosine edges."""
    g = np.ones_like(t_s)
    edge = 1e-3
    for start, dur, depth in dropouts:
        floor = 10 ** (-depth / 20)
        a = np.clip((t_s - (start - edge)) / edge, 0, 1)          # ramp down into the dropout
        b = np.clip(((start + dur + edge) - t_s) / edge, 0, 1)    # ramp back up after it
        inside = np.minimum(0.5 - 0.5 * np.cos(np.pi * a), 0.5 - 0.5 * np.cos(np.pi * b))
        g *= 1 - (1 - floor) * inside
    return g
