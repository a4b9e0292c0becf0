"""Test conditions of the margin sweeps: a :class:`Scenario` and the track content of its trials.

Input: the parameters of one synthesized condition (track, swipe speed and profile, head
pulse, :class:`readchan.synth.Impairments`, sample rate in Hz, content).  Output: a checked
:class:`Scenario` (with its sample rate, bit cell in metres and pulse model) and the text a
trial records (:func:`random_text`, invented, never card numbers).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

import numpy as np

from readchan.errors import ParameterError
from readchan.formats.iso7811.charset import TRACKS
from readchan.synth import Impairments
from readchan.synth.card import track_content
from readchan.synth.head import KarlqvistPulse, LorentzianPulse
from readchan.synth.speed import PROFILES, SpeedProfile


MIN_SAMPLES_PER_CELL = 10.0
"""Fewest samples per bit cell, at the fastest point of a swipe, a scenario accepts."""

AUTO_SAMPLES_PER_CELL = 12.0
"""Samples per bit cell at the fastest point that an automatic sample rate provides."""

AUTO_RATES_HZ = (48_000.0, 96_000.0, 192_000.0, 384_000.0, 768_000.0, 1_536_000.0, 3_072_000.0)
"""Sample rates an automatic choice picks from (the lowest that is fast enough)."""

DEMO_TEXTS = {
    1: "%B9912345678901239^TESSERA/IVO Q^3107101000000000000?",
    2: ";9912345678901239=31071010000000000?",
    3: ";015555000011112227=7247241000000000000303000000000000000000?",
}
"""Invented demo content, one per track (the account number is made up)."""


@dataclass(frozen=True)
class Scenario:
    """One synthesized test condition.

    Parameters
    ----------
    track : ISO track 1–3 (its format and density).
    speed_cm_s : mean swipe speed in cm/s.
    profile : speed profile along the card (see :mod:`readchan.synth.speed`).
    variation : speed variation along the card, a fraction of the mean.
    pw50_cell : Lorentzian PW50 as a fraction of the bit cell; None for the default
        Karlqvist head (g = 12 µm, d = 5 µm, a = 15 µm: PW50 ≈ 42 µm).
    impairments : everything else (noise, jitter, hum, clipping, direction ...).
    rate_hz : sample rate in Hz, or None to pick one from :data:`AUTO_RATES_HZ`.
    text : fixed track text for every trial; None for random content.
    n_chars : data characters of random content (between the sentinels); None for a full
        track (the track's maximum less sentinels and LRC).
    reference : also run the reference decoder on every trial.
    """

    track: int = 1
    speed_cm_s: float = 30.0
    profile: str = "swipe"
    variation: float = 0.0
    pw50_cell: float | None = None
    impairments: Impairments = field(default_factory=Impairments)
    rate_hz: float | None = None
    text: str | None = None
    n_chars: int | None = None
    reference: bool = False

    def __post_init__(self) -> None:
        # the ranges below are guards against absurd parameters, not tuned figures
        if self.track not in TRACKS:
            raise ParameterError(f"track must be 1, 2 or 3, was {self.track!r}")
        if self.profile not in PROFILES:
            raise ParameterError(f"profile must be one of {', '.join(PROFILES)}, was {self.profile!r}")
        SpeedProfile(self.speed_cm_s, self.profile, self.variation)  # validates speed and variation
        if self.pw50_cell is not None and (not math.isfinite(self.pw50_cell) or not 0.01 <= self.pw50_cell <= 5.0):
            raise ParameterError(f"pw50_cell must be between 0.01 and 5 bit cells, was {self.pw50_cell!r}")
        limit = TRACKS[self.track].max_chars - 3
        if self.n_chars is not None and (not isinstance(self.n_chars, int) or not 1 <= self.n_chars <= limit):
            raise ParameterError(f"track {self.track} holds 1 to {limit} data characters, n_chars was {self.n_chars!r}")
        if self.text is not None:
            track_content(self.text, track=self.track)  # raises FormatError for text the track cannot hold
        if self.rate_hz is not None:
            if not math.isfinite(self.rate_hz) or self.rate_hz <= 0:
                raise ParameterError(f"sample rate must be > 0 Hz, was {self.rate_hz!r}")
            need = MIN_SAMPLES_PER_CELL / self.fastest_cell_s
            if self.rate_hz < need:
                raise ParameterError(
                    f"{self.rate_hz:g} Hz gives {self.rate_hz * self.fastest_cell_s:.1f} samples per bit cell at "
                    f"the fastest point of the swipe; give at least {need:.0f} Hz or leave the rate automatic")

    @property
    def cell_m(self) -> float:
        """Nominal bit cell of the track in metres."""
        return TRACKS[self.track].bit_cell_m

    @property
    def fastest_cell_s(self) -> float:
        """Shortest bit-cell duration of a swipe in seconds (highest speed, densest recording)."""
        v_max = self.speed_cm_s * (1.0 + abs(self.variation)) * 0.01 if self.profile != "constant" \
            else self.speed_cm_s * 0.01
        return self.cell_m / (1.0 + max(self.impairments.density_error, 0.0)) / v_max

    @property
    def sample_rate_hz(self) -> float:
        """The given rate, or the lowest of :data:`AUTO_RATES_HZ` with 12 samples per cell."""
        if self.rate_hz is not None:
            return float(self.rate_hz)
        need = AUTO_SAMPLES_PER_CELL / self.fastest_cell_s
        for r in AUTO_RATES_HZ:
            if r >= need:
                return r
        raise ParameterError(f"the swipe is too fast for an automatic sample rate ({need:.0f} Hz needed)")

    def pulse(self):
        """The isolated-pulse model of the scenario."""
        if self.pw50_cell is None:
            return KarlqvistPulse()
        return LorentzianPulse(pw50_m=self.pw50_cell * self.cell_m)

    def describe(self) -> dict:
        """The scenario as JSON-ready values, units in the key names."""
        imp = {k: v for k, v in asdict(self.impairments).items()}
        return {
            "track": self.track,
            "density_bpi": TRACKS[self.track].density_bpi,
            "speed_cm_s": self.speed_cm_s,
            "profile": self.profile,
            "variation": self.variation,
            "pw50_cell": self.pw50_cell,
            "pw50_um": self.pulse().pw50_m * 1e6,
            "rate_hz": self.sample_rate_hz,
            "content": "fixed" if self.text is not None else "random",
            "impairments": imp,
        }


def random_text(track: int, n_chars: int, rng: np.random.Generator) -> str:
    """Random valid text for ``track``, sentinels included: ``n_chars`` characters of the
    track's format other than the start and end sentinels; invented, not card numbers."""
    fmt = TRACKS[track].fmt
    codes = [c for c in range(fmt.n_codes) if c not in (fmt.start_code, fmt.end_code)]
    body = "".join(fmt.char_of(int(c)) for c in rng.choice(codes, n_chars))
    return fmt.start_char + body + fmt.end_char


def _content(scenario: Scenario, rng: np.random.Generator) -> str:
    """The scenario's fixed text, or random text (a full track unless ``n_chars``)."""
    if scenario.text is not None:
        return _full_text(scenario.text, scenario.track)
    n = scenario.n_chars if scenario.n_chars is not None else TRACKS[scenario.track].max_chars - 3
    return random_text(scenario.track, n, rng)


def _full_text(text: str, track: int) -> str:
    """``text`` with the start and end sentinels added where missing, as it is recorded."""
    fmt = TRACKS[track].fmt
    full = text if text.startswith(fmt.start_char) else fmt.start_char + text
    return full if len(full) >= 2 and full.endswith(fmt.end_char) else full + fmt.end_char
