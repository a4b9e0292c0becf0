"""Kansas City standard synthesizer: bytes on a data cassette played back, with the ground truth.

Input: :class:`KcsSpec` (bytes, baud, tone shape, bit phase, idle gaps, leader, play speed,
playback impairments, seed).
Output: :class:`KcsSynth` – samples (1-D float64), rate, and each byte's start-bit time.

Model: the recording is a sequence of tone segments in tape time – quiet, a leader of mark,
then per byte 11 bits (:func:`readchan.formats.kcs.read.kcs_bits`), each 1/baud long at 2400 Hz
(mark, 1) or 1200 Hz (space, 0) (BYTE, Feb. 1976), with ``idle_bits`` of mark (whole or
fractional bits) after each byte, then a trailer of mark.  The tone is phase-continuous,
starting at ``bit_phase_deg``; after a fractional idle gap the next bit begins away from a
zero crossing.  Playback maps capture time to tape time τ(t) (:mod:`readchan.synth.playback`),
so a speed offset, wow and flutter scale both the tone frequencies and the bit times.  The
``square`` shape is band-limited: its Fourier series ``(4/π) Σ sin(kφ)/k`` over odd k whose
frequency stays below ``harmonics_hz``.

Seeded: the same spec gives the same samples.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from readchan.errors import ParameterError
from readchan.formats.kcs.read import BAUDS, BYTE_BITS, MARK_HZ, SPACE_HZ, kcs_bits
from readchan.synth.playback import Playback, PlaySpeed

SHAPES = ("sine", "square")


@dataclass(frozen=True)
class KcsSpec:
    """Everything that defines a synthetic cassette capture.

    Parameters
    ----------
    data : the bytes.
    baud : 300 or 1200.
    shape : ``"sine"`` or ``"square"`` (band-limited at ``harmonics_hz``).
    bit_phase_deg : tone phase at the first bit, degrees.
    idle_bits : mark after each byte, in bits (fractional allowed); a tuple cycles over the gaps.
    leader_s, trailer_s : mark before the first and after the last byte, seconds of tape.
    quiet_s : silence before the leader and after the trailer, seconds of tape.
    speed : :class:`PlaySpeed` (a speed offset is ``PlaySpeed.constant(1.1)``).
    amplitude : tone peak, output units.
    playback : :class:`Playback` impairments.
    rate_hz : sample rate in Hz.
    seed : random seed.
    """

    data: bytes = b"KCS"
    baud: int = 300
    shape: str = "sine"
    bit_phase_deg: float = 0.0
    idle_bits: float | tuple[float, ...] = 0.0
    leader_s: float = 0.2
    trailer_s: float = 0.02
    quiet_s: float = 0.02
    speed: PlaySpeed = field(default_factory=PlaySpeed)
    amplitude: float = 0.5
    harmonics_hz: float = 12_000.0
    playback: Playback = field(default_factory=Playback)
    rate_hz: float = 48_000.0
    seed: int = 0

    def __post_init__(self) -> None:
        if self.baud not in BAUDS:
            raise ParameterError(f"baud must be 300 or 1200, was {self.baud!r}")
        if self.shape not in SHAPES:
            raise ParameterError(f"shape must be 'sine' or 'square', was {self.shape!r}")
        idle = self.idle_bits if isinstance(self.idle_bits, tuple) else (self.idle_bits,)
        if not idle or any(not math.isfinite(v) or not 0 <= v <= 10_000 for v in idle):
            raise ParameterError(f"idle_bits must be between 0 and 10000 bits, was {self.idle_bits!r}")
        for name in ("leader_s", "trailer_s", "quiet_s"):
            v = getattr(self, name)
            if not math.isfinite(v) or not 0 <= v <= 600:
                raise ParameterError(f"{name} must be between 0 and 600 s, was {v!r}")
        if not math.isfinite(self.rate_hz) or not 12_000 <= self.rate_hz <= 10e6:
            raise ParameterError(f"rate_hz must be between 12 kHz and 10 MHz, was {self.rate_hz!r}")
        if not math.isfinite(self.amplitude) or not 0 < self.amplitude <= 100:
            raise ParameterError(f"amplitude must be above 0 and at most 100, was {self.amplitude!r}")
        if not math.isfinite(self.harmonics_hz) or not 2400 <= self.harmonics_hz <= 1e7:
            raise ParameterError(f"harmonics_hz must be between 2400 Hz and 10 MHz, was {self.harmonics_hz!r}")
        if not math.isfinite(self.bit_phase_deg) or abs(self.bit_phase_deg) > 3600:
            raise ParameterError(f"bit_phase_deg must be finite (within ±3600), was {self.bit_phase_deg!r}")
        if len(self.data) > 1_000_000:
            raise ParameterError("at most a million bytes per capture")


@dataclass(frozen=True)
class KcsSynth:
    """A synthetic cassette capture and its ground truth.

    Attributes
    ----------
    samples : float64 (n,).
    rate_hz : sample rate in Hz.
    data : the bytes recorded.
    baud : the baud rate.
    byte_times_s : capture time of each start bit's leading edge, seconds.
    noise_rms : RMS of the added white noise, output units.
    """

    samples: np.ndarray
    rate_hz: float
    data: bytes
    baud: int
    byte_times_s: np.ndarray
    noise_rms: float


def _segments(spec: KcsSpec):
    """(start τ, duration, frequency) of the tone segments and the τ of each start bit."""
    bit_s = 1.0 / spec.baud
    idle = spec.idle_bits if isinstance(spec.idle_bits, tuple) else (spec.idle_bits,)
    n = len(spec.data)
    bits = kcs_bits(spec.data).reshape(n, BYTE_BITS) if n else np.zeros((0, BYTE_BITS), np.uint8)
    dur = [spec.quiet_s, spec.leader_s]
    freq = [0.0, MARK_HZ]
    starts_rel = []
    for k in range(n):
        starts_rel.append(len(dur))
        dur.extend([bit_s] * BYTE_BITS)
        freq.extend(np.where(bits[k] == 1, MARK_HZ, SPACE_HZ).tolist())
        gap = idle[k % len(idle)] * bit_s
        if gap > 0 and k < n - 1:
            dur.append(gap)
            freq.append(MARK_HZ)
    dur.extend([spec.trailer_s, spec.quiet_s])
    freq.extend([MARK_HZ, 0.0])
    dur_a, freq_a = np.asarray(dur), np.asarray(freq)
    start = np.concatenate(([0.0], np.cumsum(dur_a)[:-1]))
    return start, dur_a, freq_a, start[np.asarray(starts_rel, np.int64)]


def synthesize_kcs(spec: KcsSpec) -> KcsSynth:
    """Render ``spec`` into samples with its ground truth (see the module docstring)."""
    rng = np.random.default_rng(spec.seed)
    start, dur, freq, byte_tau = _segments(spec)
    tape_total = float(start[-1] + dur[-1])
    # capture long enough to play the whole tape at the slowest speed of the profile
    slowest = min(s for _, s in spec.speed.points) * (1 - spec.speed.wow_depth - spec.speed.flutter_depth)
    duration = tape_total / max(slowest, 0.05) * 1.02
    if duration * spec.rate_hz > 500_000_000:
        raise ParameterError("the capture would hold over 500 million samples; send fewer bytes")
    tg, taug = spec.speed.tape_grid(duration)
    n = int(np.searchsorted(taug, tape_total) / (tg.size - 1) * duration * spec.rate_hz)
    t = np.arange(n) / spec.rate_hz
    tau = np.interp(t, tg, taug)
    phase0 = math.radians(spec.bit_phase_deg) + np.concatenate(([0.0], np.cumsum(2 * np.pi * freq * dur)[:-1]))
    seg = np.clip(np.searchsorted(start, tau, side="right") - 1, 0, start.size - 1)
    f_seg = freq[seg]
    phase = phase0[seg] + 2 * np.pi * f_seg * (tau - start[seg])
    if spec.shape == "sine":
        x = np.sin(phase)
    else:
        inst_hz = f_seg * spec.speed.speed(t)
        x = np.zeros(n)
        for k in range(1, 64, 2):
            ok = k * inst_hz < min(spec.harmonics_hz, 0.45 * spec.rate_hz)
            if not ok.any():
                break
            x += np.where(ok, np.sin(k * phase) / k, 0.0)
        x *= 4 / np.pi
    x = np.where(f_seg > 0, spec.amplitude * x, 0.0)
    samples, rms = spec.playback.apply(x, spec.rate_hz, spec.amplitude, rng)
    byte_t = np.interp(byte_tau, taug, tg)
    return KcsSynth(np.ascontiguousarray(samples), float(spec.rate_hz), bytes(spec.data), spec.baud,
                    byte_t, float(rms))
