"""Forward model of the read channel: bits → F2F flux transitions → head voltage.

The same physics the decoder inverts, run forward (see :mod:`readchan.synth.head` for the
pulse models and their sources):

1. Each track's bit stream (clocking zeros, characters, LRC, clocking zeros) becomes F2F
   transition positions along the card at the track's density (:mod:`.f2f`), with optional
   density error and per-transition jitter (a uniform displacement in ± ``jitter`` cells).
2. A speed profile (:mod:`.speed`) maps position to time; a reverse swipe mirrors the card.
3. Head voltage: pulses superposed with alternating sign, each shaped in space, so
   intersymbol interference and peak shift arise by themselves, and scaled by the
   instantaneous speed, since the head sees dΦ/dt = v·dΦ/dx (Faraday's law):
   ``V(t) = A · v(t)/v0 · Σ_k s_k · p(x_head(t) − x_k)``.
   The flux output is the magnetisation square wave instead: what a coil must be driven
   with to inject a card-like signal into a reader's head.
4. Impairments: white noise at a stated SNR (20·log10 of the median |peak| over the noise
   RMS), mains hum, baseline wander, DC offset, an AC-coupling first-order high-pass,
   clipping at a fraction of the median peak, polarity inversion.

Everything is seeded: the same spec and seed give the same samples.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import signal as sps

from readchan.errors import ParameterError
from readchan.synth.f2f import f2f_positions
from readchan.synth.head import KarlqvistPulse, LorentzianPulse, PulseModel
from readchan.synth.speed import SpeedProfile

CARD_LENGTH_M = 85.60e-3
"""ISO/IEC 7810 ID-1 card length (85.60 mm)."""

FIRST_TRANSITION_M = 1.0e-3
"""Distance from the card's leading edge to the first recorded transition (our choice)."""

METRES_PER_INCH = 0.0254


@dataclass(frozen=True)
class TrackContent:
    """One track's recorded bit stream.

    Parameters
    ----------
    bits : uint8 array of 0/1, in recording order, clocking zeros included.
    density_bpi : recording density in bits per inch.
    label : a name for reports (e.g. ``"track 1"``).
    """

    bits: np.ndarray
    density_bpi: float
    label: str = ""

    def __post_init__(self) -> None:
        if not math.isfinite(self.density_bpi) or not 1.0 <= self.density_bpi <= 10_000:
            raise ParameterError(f"density must be between 1 and 10000 bpi, was {self.density_bpi!r}")
        if np.asarray(self.bits).size == 0:
            raise ParameterError("a track needs at least one bit")

    @property
    def cell_m(self) -> float:
        """Nominal bit-cell length in metres: 0.0254 / density_bpi."""
        return METRES_PER_INCH / self.density_bpi


@dataclass(frozen=True)
class Impairments:
    """Channel impairments, all off by default.

    Parameters
    ----------
    density_error : fractional error of the recorded density (+0.05 = 5 % denser).
    jitter : per-transition position jitter, uniform in ± this fraction of a bit cell.
    snr_db : white-noise SNR, 20·log10(median |peak| / noise RMS); None for no noise.
    hum_hz, hum_level : mains hum frequency (Hz) and amplitude as a fraction of the median peak.
    wander_hz, wander_level : baseline wander frequency (Hz) and amplitude (fraction of median peak).
    dc_offset : DC offset in output units (full scale for audio).
    highpass_hz : corner of a first-order AC-coupling high-pass (Hz); None for DC coupling.
    clip : clip the signal at this fraction of the median peak; None for no clipping.
    invert : invert the polarity.
    reverse : swipe the card backwards (the head meets the trailing end first).
    """

    density_error: float = 0.0
    jitter: float = 0.0
    snr_db: float | None = None
    hum_hz: float = 50.0
    hum_level: float = 0.0
    wander_hz: float = 2.0
    wander_level: float = 0.0
    dc_offset: float = 0.0
    highpass_hz: float | None = None
    clip: float | None = None
    invert: bool = False
    reverse: bool = False

    def __post_init__(self) -> None:
        checks = {
            "density_error": (self.density_error, -0.5, 0.5),
            "jitter": (self.jitter, 0.0, 0.24),
            "hum_level": (self.hum_level, 0.0, 100.0),
            "wander_level": (self.wander_level, 0.0, 100.0),
            "dc_offset": (self.dc_offset, -100.0, 100.0),
            "hum_hz": (self.hum_hz, 0.0, 1e6),
            "wander_hz": (self.wander_hz, 0.0, 1e6),
        }
        for name, (value, lo, hi) in checks.items():
            if not math.isfinite(value) or not lo <= value <= hi:
                raise ParameterError(f"{name} must be between {lo} and {hi}, was {value!r}")
        if self.snr_db is not None and (not math.isfinite(self.snr_db) or not -20 <= self.snr_db <= 200):
            raise ParameterError(f"snr_db must be between -20 and 200 dB, was {self.snr_db!r}")
        if self.highpass_hz is not None and (not math.isfinite(self.highpass_hz) or self.highpass_hz <= 0):
            raise ParameterError(f"highpass_hz must be > 0, was {self.highpass_hz!r}")
        if self.clip is not None and (not math.isfinite(self.clip) or not 0.01 <= self.clip <= 10):
            raise ParameterError(f"clip must be a fraction between 0.01 and 10, was {self.clip!r}")


@dataclass(frozen=True)
class SynthSpec:
    """Everything that defines a synthetic capture.

    Parameters
    ----------
    tracks : one ``TrackContent`` per output channel, all read in the same swipe.
    speed : the swipe speed profile.
    pulse : the isolated-pulse model (``KarlqvistPulse`` or ``LorentzianPulse``).
    rate_hz : sample rate in Hz.
    amplitude : isolated-pulse peak at the reference speed, in output units.
    reference_cm_s : the speed at which an isolated pulse peaks at ``amplitude``; None for
        the profile's mean speed (so that ``amplitude`` sets the capture's level).
    impairments : see :class:`Impairments`.
    swipes : number of identical swipes in the capture.
    lead_s : quiet time before the first and after the last swipe, in seconds.
    gap_s : quiet time between swipes, in seconds.
    output : ``"head"`` (pulse voltage) or ``"flux"`` (magnetisation square wave).
    seed : random seed.
    """

    tracks: tuple[TrackContent, ...]
    speed: SpeedProfile = field(default_factory=SpeedProfile)
    pulse: PulseModel = field(default_factory=KarlqvistPulse)
    rate_hz: float = 48_000.0
    amplitude: float = 0.5
    reference_cm_s: float | None = None
    impairments: Impairments = field(default_factory=Impairments)
    swipes: int = 1
    lead_s: float = 0.02
    gap_s: float = 0.25
    output: str = "head"
    seed: int = 0

    def __post_init__(self) -> None:
        if not self.tracks:
            raise ParameterError("give at least one track")
        if not math.isfinite(self.rate_hz) or not 1_000 <= self.rate_hz <= 100e6:
            raise ParameterError(f"sample rate must be between 1 kHz and 100 MHz, was {self.rate_hz!r}")
        if not math.isfinite(self.amplitude) or not 0 < self.amplitude <= 1e6:
            raise ParameterError(f"amplitude must be > 0, was {self.amplitude!r}")
        if self.reference_cm_s is not None and not (math.isfinite(self.reference_cm_s) and self.reference_cm_s > 0):
            raise ParameterError(f"reference speed must be > 0 cm/s, was {self.reference_cm_s!r}")
        if not 1 <= self.swipes <= 1000:
            raise ParameterError(f"swipes must be between 1 and 1000, was {self.swipes!r}")
        for name in ("lead_s", "gap_s"):
            v = getattr(self, name)
            if not math.isfinite(v) or not 0 <= v <= 3600:
                raise ParameterError(f"{name} must be between 0 and 3600 s, was {v!r}")
        if self.output not in ("head", "flux"):
            raise ParameterError(f"output must be 'head' or 'flux', was {self.output!r}")


@dataclass(frozen=True)
class SynthResult:
    """A synthetic capture and the ground truth behind it.

    Attributes
    ----------
    samples : float64 array (n_samples, n_channels).
    rate_hz : sample rate in Hz.
    transition_times_s : per channel, the true transition times (all swipes), seconds.
    cell_times_s : per channel and swipe, the times of the nominal (jitter-free) bit-cell
        boundaries in time order, seconds; their differences are the true bit periods.
    swipe_windows_s : per swipe, (start_s, end_s) of the card passing the head.
    pw50_m : isolated-pulse PW50 in metres.
    median_peak : per channel, median |V| at the transitions before noise (output units).
    noise_rms : per channel, the RMS of the added white noise (output units).
    """

    samples: np.ndarray
    rate_hz: float
    transition_times_s: tuple[np.ndarray, ...]
    cell_times_s: tuple[tuple[np.ndarray, ...], ...]
    swipe_windows_s: tuple[tuple[float, float], ...]
    pw50_m: float
    median_peak: tuple[float, ...]
    noise_rms: tuple[float, ...]

    @property
    def duration_s(self) -> float:
        return self.samples.shape[0] / self.rate_hz


def synthesize(spec: SynthSpec) -> SynthResult:
    """Render ``spec`` into samples; see the module docstring for the model."""
    rng = np.random.default_rng(spec.seed)
    imp = spec.impairments
    lengths = [FIRST_TRANSITION_M + (np.asarray(t.bits).size + 1) * t.cell_m / (1 + imp.density_error)
               for t in spec.tracks]
    card_m = max(CARD_LENGTH_M, max(lengths) + FIRST_TRANSITION_M)
    # time for the whole card to pass, from the speed profile
    swipe_s = float(spec.speed.time_of_position(np.array([card_m]), card_m)[0])
    total_s = 2 * spec.lead_s + spec.swipes * swipe_s + (spec.swipes - 1) * spec.gap_s
    n = int(math.ceil(total_s * spec.rate_hz)) + 1
    if n > 500_000_000:
        raise ParameterError(f"the capture would hold {n} samples; lower the rate or the number of swipes")
    t = np.arange(n) / spec.rate_hz
    out = np.zeros((n, len(spec.tracks)))
    trans: list[list[np.ndarray]] = [[] for _ in spec.tracks]
    cells: list[list[np.ndarray]] = [[] for _ in spec.tracks]
    windows = []
    xg = np.linspace(0.0, card_m, 20001)
    for s in range(spec.swipes):
        t0 = spec.lead_s + s * (swipe_s + spec.gap_s)
        windows.append((t0, t0 + swipe_s))
        tg = t0 + spec.speed.time_of_position(xg, card_m)
        i0, i1 = np.searchsorted(t, [t0, t0 + swipe_s])
        ts = t[i0:i1]
        x_head = np.interp(ts, tg, xg)
        v_rel = spec.speed.speed_cm_s(x_head / card_m) / (spec.reference_cm_s or spec.speed.mean_cm_s)
        for ch, track in enumerate(spec.tracks):
            cell = track.cell_m / (1 + imp.density_error)
            nominal = FIRST_TRANSITION_M + f2f_positions(track.bits, cell)
            x = nominal + rng.uniform(-imp.jitter, imp.jitter, nominal.size) * cell
            bounds = FIRST_TRANSITION_M + np.arange(np.asarray(track.bits).size + 1) * cell
            if imp.reverse:
                x, bounds = card_m - x[::-1], card_m - bounds[::-1]
            tk = np.interp(x, xg, tg)
            trans[ch].append(tk)
            cells[ch].append(np.interp(bounds, xg, tg))
            if spec.output == "flux":
                continue
            sign = np.where(np.arange(x.size) % 2 == 0, 1.0, -1.0)
            if imp.reverse:
                sign = -sign
            out[i0:i1, ch] += spec.amplitude * v_rel * _superpose(x_head, x, sign, spec.pulse)
    transitions = tuple(np.concatenate(tr) for tr in trans)
    if spec.output == "flux":
        for ch, tk in enumerate(transitions):
            level = (np.searchsorted(tk, t) % 2) * 2.0 - 1.0
            out[:, ch] = spec.amplitude * level
        median_peak = tuple(spec.amplitude for _ in spec.tracks)
    else:
        median_peak = tuple(
            float(np.median(np.abs(out[np.clip(np.round(tk * spec.rate_hz).astype(int), 0, n - 1), ch])))
            for ch, tk in enumerate(transitions)
        )
    noise_rms = []
    for ch in range(out.shape[1]):
        peak = median_peak[ch]
        if imp.hum_level:
            out[:, ch] += imp.hum_level * peak * np.sin(2 * np.pi * imp.hum_hz * t + rng.uniform(0, 2 * np.pi))
        if imp.wander_level:
            out[:, ch] += imp.wander_level * peak * np.sin(2 * np.pi * imp.wander_hz * t + rng.uniform(0, 2 * np.pi))
        rms = 0.0
        if imp.snr_db is not None:
            rms = peak / 10 ** (imp.snr_db / 20)
            out[:, ch] += rng.normal(0.0, rms, n)
        noise_rms.append(rms)
        if imp.clip is not None:
            out[:, ch] = np.clip(out[:, ch], -imp.clip * peak, imp.clip * peak)
    out += imp.dc_offset
    if imp.highpass_hz is not None:
        b, a = sps.butter(1, imp.highpass_hz, btype="highpass", fs=spec.rate_hz)
        out = sps.lfilter(b, a, out, axis=0)
    if imp.invert:
        out = -out
    return SynthResult(
        samples=np.ascontiguousarray(out),
        rate_hz=float(spec.rate_hz),
        transition_times_s=transitions,
        cell_times_s=tuple(tuple(c) for c in cells),
        swipe_windows_s=tuple(windows),
        pw50_m=float(spec.pulse.pw50_m),
        median_peak=median_peak,
        noise_rms=tuple(noise_rms),
    )


def _superpose(x_head: np.ndarray, x_m: np.ndarray, sign: np.ndarray, pulse: PulseModel) -> np.ndarray:
    """Σ_k sign_k · p(x_head − x_k), each pulse evaluated over ±40 PW50 around its centre.

    ``x_head`` must be non-decreasing (the head moves one way during a swipe).
    """
    acc = np.zeros_like(x_head)
    reach = 40.0 * pulse.pw50_m
    lo = np.searchsorted(x_head, x_m - reach)
    hi = np.searchsorted(x_head, x_m + reach)
    for k in range(x_m.size):
        a, b = lo[k], hi[k]
        if b > a:
            acc[a:b] += sign[k] * pulse.shape(x_head[a:b] - x_m[k])
    return acc


__all__ = [
    "Impairments",
    "KarlqvistPulse",
    "LorentzianPulse",
    "SpeedProfile",
    "SynthResult",
    "SynthSpec",
    "TrackContent",
    "synthesize",
]
