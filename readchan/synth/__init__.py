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
4. Impairments at the head: white noise at a stated SNR (20·log10 of the median |peak| over
   the noise RMS in the band up to the output's Nyquist frequency), mains hum, baseline
   wander, clipping at a fraction of the median peak, DC offset, polarity inversion.
5. The reader's front end (:mod:`.chain`): AC coupling, a causal preamp low-pass, anti-alias
   decimation and quantisation.  With a preamp low-pass, steps 1–5 run at ``oversample`` × the
   output rate and the chain decimates to it.

Everything is seeded: the same spec and seed give the same samples.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import signal as sps

from readchan.errors import ParameterError
from readchan.synth.chain import FrontEnd, filter_chain, quantise
from readchan.linecode.f2f import f2f_positions
from readchan.synth.head import KarlqvistPulse, LorentzianPulse, PulseModel
from readchan.synth.speed import SpeedProfile
from readchan.units import bit_cell_m

CARD_LENGTH_M = 85.60e-3
"""ISO/IEC 7810 ID-1 card length (85.60 mm)."""

FIRST_TRANSITION_M = 1.0e-3
"""Distance from the card's leading edge to the first recorded transition (our choice)."""

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
            raise ParameterError(f"density_bpi must be between 1 and 10000 bpi, was {self.density_bpi!r}")
        if np.asarray(self.bits).size == 0:
            raise ParameterError("a track needs at least one bit")

    @property
    def cell_m(self) -> float:
        """Nominal bit-cell length in metres: 0.0254 / density_bpi."""
        return bit_cell_m(self.density_bpi)


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
        The older spelling of ``FrontEnd.ac_coupling_hz``, used when that is not set.
    clip : clip the signal at this fraction of the median peak; None for no clipping.
    invert : invert the polarity.
    reverse : swipe the card backwards (the head meets the trailing end first).
    edge_pulses : the stripe is magnetised up to the card's edges, so each edge, where the
        magnetisation steps between zero and ±Mr (half a full transition's 2·Mr), gives an
        isolated pulse of half the size (superposition of the isolated-pulse response).
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
    edge_pulses: bool = False

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
            object.__setattr__(self, name, float(value) + 0.0)     # -0.0 becomes 0.0
        if self.snr_db is not None and (not math.isfinite(self.snr_db) or not -20 <= self.snr_db <= 200):
            raise ParameterError(f"snr_db must be between -20 and 200 dB, was {self.snr_db!r}")
        if self.highpass_hz is not None and not (math.isfinite(self.highpass_hz) and self.highpass_hz >= 0.01):
            raise ParameterError(f"highpass_hz must be at least 0.01 Hz, was {self.highpass_hz!r}")
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
    front_end : the reader's analog front end and converter (:class:`.chain.FrontEnd`).
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
    front_end: FrontEnd = field(default_factory=FrontEnd)

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
        if isinstance(self.seed, bool) or not isinstance(self.seed, (int, np.integer)) or not 0 <= self.seed < 2 ** 63:
            raise ParameterError(f"seed must be an integer from 0 to 2**63 - 1, was {self.seed!r}")
        self.chain.check_rate(self.rate_hz)

    @property
    def chain(self) -> FrontEnd:
        """The front end as rendered: ``front_end``, with ``Impairments.highpass_hz`` as the AC
        coupling when the front end sets none."""
        fe = self.front_end
        if fe.ac_coupling_hz is None and self.impairments.highpass_hz is not None:
            from dataclasses import replace
            fe = replace(fe, ac_coupling_hz=self.impairments.highpass_hz)
        return fe


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
    noise_rms : per channel, the RMS of the added white noise in the band up to the output's
        Nyquist frequency, at the head (output units).
    output_median_peak : per channel, median |peak| of the noiseless pulses after the front
        end (output units): the extreme of each pulse, found after the chain's delay.
    output_noise_rms : per channel, RMS of the noise after the front end: the added white
        noise as filtered by the chain, plus the quantisation noise step/√12 in quadrature.
    chain_delay_s : the front end's low-frequency group delay (s): pulses leave the chain this
        much later than ``transition_times_s``.
    """

    samples: np.ndarray
    rate_hz: float
    transition_times_s: tuple[np.ndarray, ...]
    cell_times_s: tuple[tuple[np.ndarray, ...], ...]
    swipe_windows_s: tuple[tuple[float, float], ...]
    pw50_m: float
    median_peak: tuple[float, ...]
    noise_rms: tuple[float, ...]
    output_median_peak: tuple[float, ...] = ()
    output_noise_rms: tuple[float, ...] = ()
    chain_delay_s: float = 0.0

    @property
    def duration_s(self) -> float:
        return self.samples.shape[0] / self.rate_hz

    @property
    def output_snr_db(self) -> tuple[float, ...]:
        """Per channel, the SNR of the capture as stored: 20·log10(output peak / output noise RMS)
        (inf without noise)."""
        return tuple(20 * math.log10(p / r) if r > 0 else math.inf
                     for p, r in zip(self.output_median_peak, self.output_noise_rms))


SAMPLE_LIMIT = 50_000_000
"""Most samples (internal samples × channels) :func:`synthesize` renders unless told otherwise
(``synth --force``): 400 MB per float64 array, of which rendering holds a few at once."""

HARD_SAMPLE_LIMIT = 500_000_000
"""Most samples rendered even when forced."""


def estimate_samples(spec: SynthSpec) -> int:
    """Samples :func:`synthesize` would render for ``spec`` (internal samples × channels), from
    the card length, the speed profile, the swipes, pauses and the rate, before any is made."""
    lengths = [FIRST_TRANSITION_M + (np.asarray(t.bits).size + 1) * t.cell_m / (1 + spec.impairments.density_error)
               for t in spec.tracks]
    card_m = max(CARD_LENGTH_M, max(lengths) + FIRST_TRANSITION_M)
    swipe_s = float(spec.speed.time_of_position(np.array([card_m]), card_m)[0])
    total_s = 2 * spec.lead_s + spec.swipes * swipe_s + (spec.swipes - 1) * spec.gap_s
    n_out = math.ceil(total_s * spec.rate_hz) + 1
    return ((n_out - 1) * spec.chain.internal_factor + 1) * len(spec.tracks)


def synthesize(spec: SynthSpec, *, max_samples: int | None = SAMPLE_LIMIT) -> SynthResult:
    """Render ``spec`` into samples; see the module docstring for the model.

    Refuses (:class:`ParameterError`) a capture of more than ``max_samples`` samples
    (:func:`estimate_samples`, checked before anything is computed; None: up to
    :data:`HARD_SAMPLE_LIMIT`).
    """
    need = estimate_samples(spec)
    limit = HARD_SAMPLE_LIMIT if max_samples is None else min(int(max_samples), HARD_SAMPLE_LIMIT)
    if need > limit:
        gb = need * 8 / 1e9
        hint = "" if limit == HARD_SAMPLE_LIMIT else "; pass max_samples=None to render it anyway"
        raise ParameterError(f"the capture would hold {need:,} samples ({gb:.1f} GB as float64), over the limit of "
                             f"{limit:,}; lower the rate, the number of swipes, the pauses, or raise the speed or "
                             f"density{hint}")
    rng = np.random.default_rng(spec.seed)
    imp = spec.impairments
    fe = spec.chain
    k_os = fe.internal_factor
    fs = spec.rate_hz * k_os                      # internal rate (the output rate without oversampling)
    lengths = [FIRST_TRANSITION_M + (np.asarray(t.bits).size + 1) * t.cell_m / (1 + imp.density_error)
               for t in spec.tracks]
    card_m = max(CARD_LENGTH_M, max(lengths) + FIRST_TRANSITION_M)
    # time for the whole card to pass, from the speed profile
    swipe_s = float(spec.speed.time_of_position(np.array([card_m]), card_m)[0])
    total_s = 2 * spec.lead_s + spec.swipes * swipe_s + (spec.swipes - 1) * spec.gap_s
    n_out = int(math.ceil(total_s * spec.rate_hz)) + 1
    n = (n_out - 1) * k_os + 1
    if n * len(spec.tracks) > 500_000_000:
        raise ParameterError(f"the capture would hold {n} internal samples; lower the rate, the oversampling "
                             "or the number of swipes")
    t = np.arange(n) / fs
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
            if imp.edge_pulses:
                _add_edge_pulses(out[:, ch], t, tg, xg, card_m, sign, spec)
    transitions = tuple(np.concatenate(tr) for tr in trans)
    if spec.output == "flux":
        for ch, tk in enumerate(transitions):
            level = (np.searchsorted(tk, t) % 2) * 2.0 - 1.0
            out[:, ch] = spec.amplitude * level
        median_peak = tuple(spec.amplitude for _ in spec.tracks)
    else:
        median_peak = tuple(
            float(np.median(np.abs(out[np.clip(np.round(tk * fs).astype(int), 0, n - 1), ch])))
            for ch, tk in enumerate(transitions)
        )
    chained = fe != FrontEnd()
    clean = filter_chain(-out if imp.invert else out, fs, fe) if chained else None
    noise = np.zeros_like(out) if chained else None
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
            # the same noise density at any internal rate: rms over the band up to rate_hz / 2
            w = rng.normal(0.0, rms * math.sqrt(k_os), n)
            out[:, ch] += w
            if chained:
                noise[:, ch] = w
        noise_rms.append(rms)
        if imp.clip is not None:
            out[:, ch] = np.clip(out[:, ch], -imp.clip * peak, imp.clip * peak)
    out += imp.dc_offset
    if imp.invert:
        out = -out
    if chained:
        out = quantise(filter_chain(out, fs, fe), fe)
        delay_s = fe.delay_s()
        q2 = fe.quantisation_noise_rms ** 2
        out_noise = tuple(float(math.sqrt(v + q2)) for v in np.var(filter_chain(noise, fs, fe), axis=0))
        out_peak = tuple(_pulse_peaks(clean[:, ch], tk + delay_s, spec.rate_hz) if spec.output == "head"
                         else float(np.median(np.abs(clean[:, ch]))) for ch, tk in enumerate(transitions))
    else:
        delay_s, out_noise, out_peak = 0.0, tuple(noise_rms), median_peak
    return SynthResult(
        samples=np.ascontiguousarray(out),
        rate_hz=float(spec.rate_hz),
        transition_times_s=transitions,
        cell_times_s=tuple(tuple(c) for c in cells),
        swipe_windows_s=tuple(windows),
        pw50_m=float(spec.pulse.pw50_m),
        median_peak=median_peak,
        noise_rms=tuple(noise_rms),
        output_median_peak=out_peak,
        output_noise_rms=out_noise,
        chain_delay_s=delay_s,
    )


def _pulse_peaks(y: np.ndarray, times_s: np.ndarray, rate_hz: float) -> float:
    """Median over pulses of max |y| between the midpoints to the neighbouring pulse times."""
    if times_s.size == 0:
        return 0.0
    c = np.clip(np.round(times_s * rate_hz).astype(np.int64), 0, y.size - 1)
    first = int(c[0]) - (int(c[1] - c[0]) // 2 if c.size > 1 else 1)
    edges = np.concatenate(([max(0, first)], (c[1:] + c[:-1]) // 2))
    edges = np.maximum.accumulate(np.clip(edges, 0, y.size - 1))
    peaks = np.maximum.reduceat(np.abs(y), edges)
    return float(np.median(peaks))


def _add_edge_pulses(y: np.ndarray, t: np.ndarray, tg: np.ndarray, xg: np.ndarray,
                     card_m: float, sign: np.ndarray, spec: SynthSpec) -> None:
    """Add the two card-edge pulses of one swipe to ``y`` in place.

    Before the first transition the stripe holds −s₀·Mr, after the last +s_last·Mr (s the
    transitions' signs, a transition stepping 2·Mr); at the edges it steps from and to zero,
    i.e. −½·s₀ and −½·s_last of a full transition.  Each pulse is rendered at the speed the
    edge passes the head, the head position continued beyond the card in a straight line.
    """
    v_ref = spec.reference_cm_s or spec.speed.mean_cm_s
    reach_m = 40.0 * spec.pulse.pw50_m
    for x_e, s_e in ((0.0, -0.5 * sign[0]), (card_m, -0.5 * sign[-1])):
        v_cm_s = float(spec.speed.speed_cm_s(np.array([x_e / card_m]))[0])
        t_e = float(np.interp(x_e, xg, tg))
        a, b = np.searchsorted(t, [t_e - reach_m / (v_cm_s / 100), t_e + reach_m / (v_cm_s / 100)])
        dx = (t[a:b] - t_e) * v_cm_s / 100
        y[a:b] += spec.amplitude * (v_cm_s / v_ref) * s_e * spec.pulse.shape(dx)


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
    "FrontEnd",
    "Impairments",
    "KarlqvistPulse",
    "LorentzianPulse",
    "SpeedProfile",
    "SynthResult",
    "SynthSpec",
    "SAMPLE_LIMIT",
    "TrackContent",
    "estimate_samples",
    "synthesize",
]
