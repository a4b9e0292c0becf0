"""What the synthesizer is asked for and what it gives: the spec, the impairments, the result.

Input: the parameters of a capture (track bit streams, speed profile, pulse model,
impairments, front end, sample rate in Hz, swipes, seed).  Output: a checked
:class:`SynthSpec`; :func:`estimate_samples` sizes its rendering before any is made; the
renderer (:func:`readchan.synth.model.synthesize`) returns a :class:`SynthResult`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from readchan.errors import ParameterError
from readchan.synth.chain import FrontEnd
from readchan.synth.head import KarlqvistPulse, PulseModel
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
        # the ranges below are guards against absurd parameters, not tuned figures
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
        # (value, lowest, highest): guards against absurd parameters, not tuned figures.  Jitter
        # stays under a quarter cell so that two transitions half a cell apart, each moved by
        # it, never swap.
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
        # the ranges below are guards against absurd parameters, not tuned figures
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


def swipe_geometry(spec: SynthSpec) -> tuple[float, float, int]:
    """(card length in metres, seconds for the card to pass the head, output samples) of
    ``spec``: the card is at least an ID-1 card and holds every track's bits after
    :data:`FIRST_TRANSITION_M`; the capture holds the lead time on both sides, the swipes and
    the pauses between them."""
    lengths = [FIRST_TRANSITION_M + (np.asarray(t.bits).size + 1) * t.cell_m / (1 + spec.impairments.density_error)
               for t in spec.tracks]
    card_m = max(CARD_LENGTH_M, max(lengths) + FIRST_TRANSITION_M)
    # time for the whole card to pass, from the speed profile
    swipe_s = float(spec.speed.time_of_position(np.array([card_m]), card_m)[0])
    total_s = 2 * spec.lead_s + spec.swipes * swipe_s + (spec.swipes - 1) * spec.gap_s
    n_out = int(math.ceil(total_s * spec.rate_hz)) + 1
    return card_m, swipe_s, n_out


def estimate_samples(spec: SynthSpec) -> int:
    """Samples :func:`readchan.synth.model.synthesize` would render for ``spec`` (internal
    samples × channels), from the card length, the speed profile, the swipes, pauses and the
    rate, before any is made."""
    n_out = swipe_geometry(spec)[2]
    return ((n_out - 1) * spec.chain.internal_factor + 1) * len(spec.tracks)
