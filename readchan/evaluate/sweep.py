"""Margin sweeps: read success and character errors as one impairment grows.

A sweep takes a base scenario (track, swipe speed and profile, head pulse, impairments, sample
rate), changes one parameter over a list of values, and at every value ("step") synthesizes
``trials`` captures of random track content, decodes each and scores the result:

* **success**: the first valid read of the trial (parity and LRC good) holds the recorded
  text exactly;
* **character errors**: the edit (Levenshtein) distance between the scored read's text and the
  recorded text, sentinels included, capped at the recorded length; a trial with no read counts
  every character as wrong.  The scored read is the first valid read, else the longest one.
  The character error rate (CER) of a step is its errors over its characters, all trials;
* **false accepts**: valid reads whose text is not the recorded text: the failure that parity
  and LRC exist to prevent, and the one that matters most to a reader's user.

The first failing step is the first step, in sweep order, whose success rate is below 99 %.

Sweepable parameters
--------------------
==========  ===========================================================  ==================
name        meaning                                                      unit
==========  ===========================================================  ==================
snr_db      white-noise SNR, 20·log10(median |peak| / noise RMS)         dB
jitter      per-transition jitter, uniform in ± this fraction of a cell  cell
variation   speed change along the swipe, fraction of the mean speed     of mean speed
pw50_cell   Lorentzian isolated-pulse PW50 as a fraction of the cell     cell
hum_level   mains hum amplitude, fraction of the median pulse peak       of median peak
==========  ===========================================================  ==================

``pw50_cell`` is converted to a length once, from the track's ISO density:
``pw50_m = pw50_cell · 0.0254 / density_bpi`` (ISO/IEC 7811-2: 210 bpi on tracks 1 and 3,
75 bpi on track 2).

Reproducibility
---------------
Every trial draws its content and its synthesizer seed from
``numpy.random.SeedSequence([seed, scenario, trial])``, so a sweep gives the same numbers
whatever the number of worker processes and whatever order the trials finish in.

Reference decoder
-----------------
:func:`reference_reads` frames the same detected transitions as the decoder, but decides the
bits against the true bit period at every bit (``recover_bits(..., period_at=...)``), taken
from the synthesizer's cell boundaries.  Its success rate is the bound a timing-recovery loop
can approach on the same detections.
"""

from __future__ import annotations

import math
import os
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path
from typing import Callable, Sequence

import numpy as np

from readchan.io.atomic import atomic_output, check_output_path
from readchan.channel import DecodeSettings, decode_channel, reads_from
from readchan.errors import ParameterError
from readchan.formats.iso7811.charset import TRACKS
from readchan.formats.iso7811.framing import Frame
from readchan.synth import Impairments, SynthResult, SynthSpec, synthesize
from readchan.synth.card import track_content
from readchan.synth.head import KarlqvistPulse, LorentzianPulse
from readchan.synth.speed import PROFILES, SpeedProfile

__all__ = [
    "PARAMETERS",
    "SUCCESS_TARGET",
    "Scenario",
    "StepResult",
    "SweepResult",
    "SweepSpec",
    "TrialOutcome",
    "linear_values",
    "plot_sweep",
    "random_text",
    "reference_reads",
    "run_sweep",
    "run_trials",
]

PARAMETERS = {
    "snr_db": "dB",
    "jitter": "cell",
    "variation": "of mean speed",
    "pw50_cell": "cell",
    "hum_level": "of median peak",
}
"""Sweepable parameters and the unit of their values."""

SUCCESS_TARGET = 0.99
"""Success rate below which a step fails."""

MIN_SAMPLES_PER_CELL = 10.0
"""Fewest samples per bit cell, at the fastest point of a swipe, a scenario accepts."""

AUTO_SAMPLES_PER_CELL = 12.0
"""Samples per bit cell at the fastest point that an automatic sample rate provides."""

AUTO_RATES_HZ = (48_000.0, 96_000.0, 192_000.0, 384_000.0, 768_000.0, 1_536_000.0, 3_072_000.0)
"""Sample rates an automatic choice picks from (the lowest that is fast enough)."""

MAX_TRIALS = 100_000

DEMO_TEXTS = {
    1: "%B9912345678901239^TESSERA/IVO Q^3107101000000000000?",
    2: ";9912345678901239=31071010000000000?",
    3: ";015555000011112227=7247241000000000000303000000000000000000?",
}
"""Invented demo content, one per track (the account number is made up)."""


def linear_values(start: float, stop: float, steps: int) -> tuple[float, ...]:
    """``steps`` evenly spaced values from ``start`` to ``stop`` inclusive."""
    if not isinstance(steps, int) or not 1 <= steps <= 1000:
        raise ParameterError(f"steps must be between 1 and 1000, was {steps!r}")
    for name, v in (("start", start), ("stop", stop)):
        if not math.isfinite(v):
            raise ParameterError(f"sweep {name} must be a finite number, was {v!r}")
    if steps == 1 and start != stop:
        raise ParameterError(f"one step cannot run from {start:g} to {stop:g}; give steps ≥ 2")
    return tuple(float(v) for v in np.linspace(start, stop, steps))


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


@dataclass(frozen=True)
class TrialOutcome:
    """The score of one trial (see the module docstring)."""

    success: bool
    char_errors: int
    chars: int
    false_accepts: int
    reads: int
    ref_success: bool | None = None
    ref_false_accepts: int | None = None


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


def edit_distance(a: str, b: str) -> int:
    """Levenshtein distance: fewest insertions, deletions and substitutions from ``a`` to ``b``."""
    if len(a) < len(b):
        a, b = b, a
    prev = np.arange(len(b) + 1)
    bb = np.frombuffer(b.encode("utf-32-le"), dtype=np.uint32)
    for i, ch in enumerate(a, 1):
        sub = prev[:-1] + (bb != ord(ch))
        cur = np.empty_like(prev)
        cur[0] = i
        cur[1:] = np.minimum(sub, prev[1:] + 1)
        # insertions run along the row: a cumulative minimum of (cur[j] - j) + j
        cur = np.minimum.accumulate(cur - np.arange(cur.size)) + np.arange(cur.size)
        prev = cur
    return int(prev[-1])


def _score(texts_valid: Sequence[tuple[str, bool]], truth: str) -> tuple[bool, int, int]:
    """(success, character errors, false accepts) of a trial's reads ``(text, valid)``."""
    valid = [t for t, ok in texts_valid if ok]
    false_accepts = sum(t != truth for t in valid)
    if valid:
        scored = valid[0]
    elif texts_valid:
        scored = max((t for t, _ in texts_valid), key=len)
    else:
        scored = ""
    errors = min(edit_distance(scored, truth), len(truth))
    return bool(valid) and valid[0] == truth, errors, false_accepts


def true_period_at(cell_times_s: Sequence[np.ndarray]) -> Callable[[np.ndarray], np.ndarray]:
    """A function giving the true bit period (s) at given times, from the cell-boundary times
    of each swipe: the period of every cell, placed at the cell's first boundary and
    interpolated linearly in between (held at the ends)."""
    at = np.concatenate([np.asarray(c, float)[:-1] for c in cell_times_s])
    period = np.concatenate([np.diff(np.asarray(c, float)) for c in cell_times_s])
    order = np.argsort(at, kind="stable")
    at, period = at[order], period[order]
    return lambda t: np.interp(np.asarray(t, float), at, period)


def reference_reads(channel_result, period_at: Callable[[np.ndarray], np.ndarray],
                    settings: DecodeSettings) -> list[Frame]:
    """Frames from a decoded channel's own transitions and segments, with every bit decided
    against the true period ``period_at`` instead of the timing loop's estimate; every other
    step is the decoder's own (:func:`readchan.channel.reads_from`)."""
    reads = reads_from(channel_result.transitions, channel_result.segments, settings, period_at=period_at)
    return [r.frame for r in reads]


def _seed_state(seed: int, index: int, trial: int) -> np.random.SeedSequence:
    return np.random.SeedSequence([int(seed) & 0xFFFFFFFF, index, trial])


def synthesize_trial(scenario: Scenario, seed: int, index: int, trial: int) -> tuple[str, SynthResult]:
    """The recorded text and the synthesized capture of one trial (deterministic)."""
    ss = _seed_state(seed, index, trial)
    content_ss, synth_ss = ss.spawn(2)
    text = _content(scenario, np.random.default_rng(content_ss))
    spec = SynthSpec(
        tracks=(track_content(text, track=scenario.track),),
        speed=SpeedProfile(scenario.speed_cm_s, scenario.profile, scenario.variation),
        pulse=scenario.pulse(),
        rate_hz=scenario.sample_rate_hz,
        impairments=scenario.impairments,
        seed=int(synth_ss.generate_state(1)[0]),
    )
    return text, synthesize(spec)


def run_trial(scenario: Scenario, seed: int, index: int, trial: int) -> TrialOutcome:
    """Synthesize, decode and score one trial (a top-level function, so workers can run it)."""
    truth, res = synthesize_trial(scenario, seed, index, trial)
    # a sweep measures the read channel: random content follows no ISO/IEC 7813 layout, so
    # reads are judged by their checks and the physical evidence alone
    settings = DecodeSettings(fmt=TRACKS[scenario.track].fmt, track=scenario.track, field_check=False)
    cr = decode_channel(res.samples[:, 0], res.rate_hz, settings, source="<trial>")
    success, errors, fa = _score([(r.frame.text, r.valid) for r in cr.reads], truth)
    ref_ok = ref_fa = None
    if scenario.reference:
        frames = reference_reads(cr, true_period_at(res.cell_times_s[0]), settings)
        ref_ok, _, ref_fa = _score([(f.text, bool(f.valid)) for f in frames], truth)
    return TrialOutcome(success, errors, len(truth), fa, len(cr.reads), ref_ok, ref_fa)


def _run_chunk(scenarios: Sequence[Scenario], seed: int,
               jobs: Sequence[tuple[int, int]]) -> list[tuple[int, int, TrialOutcome]]:
    """Run the trials ``jobs`` = [(scenario index, trial), ...] (a worker's unit of work)."""
    return [(i, k, run_trial(scenarios[i], seed, i, k)) for i, k in jobs]


def _check_workers(workers: int | None) -> int:
    if workers is None:
        return os.cpu_count() or 1
    if not isinstance(workers, int) or not 1 <= workers <= 1024:
        raise ParameterError(f"workers must be between 1 and 1024, was {workers!r}")
    return workers


def run_trials(scenarios: Sequence[Scenario], trials: int, seed: int = 0, *, workers: int | None = None,
               progress: Callable[[int, int], None] | None = None) -> list[list[TrialOutcome]]:
    """Run ``trials`` trials of every scenario; returns the outcomes per scenario, in trial order.

    Parameters
    ----------
    scenarios : the conditions to test.
    trials : trials per scenario.
    seed : base seed; trial k of scenario i is seeded from (seed, i, k).
    workers : worker processes; None for ``os.cpu_count()``; 1 runs in this process.
    progress : called as ``progress(done, total)`` after every finished chunk of trials.
    """
    if not isinstance(trials, int) or not 1 <= trials <= MAX_TRIALS:
        raise ParameterError(f"trials must be between 1 and {MAX_TRIALS}, was {trials!r}")
    n_workers = _check_workers(workers)
    scenarios = tuple(scenarios)
    jobs = [(i, k) for i in range(len(scenarios)) for k in range(trials)]
    total = len(jobs)
    results: list[list[TrialOutcome | None]] = [[None] * trials for _ in scenarios]
    done = 0
    if progress:
        progress(0, total)
    # about eight chunks per worker: few enough to keep process overhead small, enough for
    # the progress bar to move and the load to balance
    size = max(1, math.ceil(total / (8 * n_workers)))
    chunks = [jobs[a:a + size] for a in range(0, total, size)]
    if n_workers == 1 or len(chunks) == 1:
        for chunk in chunks:
            for i, k, outcome in _run_chunk(scenarios, seed, chunk):
                results[i][k] = outcome
            done += len(chunk)
            if progress:
                progress(done, total)
    else:
        with ProcessPoolExecutor(max_workers=min(n_workers, len(chunks))) as pool:
            futures = {pool.submit(_run_chunk, scenarios, seed, chunk): len(chunk) for chunk in chunks}
            for fut in as_completed(futures):
                for i, k, outcome in fut.result():
                    results[i][k] = outcome
                done += futures[fut]
                if progress:
                    progress(done, total)
    return results  # type: ignore[return-value]


@dataclass(frozen=True)
class SweepSpec:
    """A margin sweep: one parameter over ``values``, everything else from the base scenario.

    Parameters
    ----------
    parameter : one of :data:`PARAMETERS`.
    values : the swept values, in sweep order (see :func:`linear_values` for start/stop/steps).
    base : the base scenario; its value of ``parameter`` is replaced at every step.
    trials : trials per step.
    seed : base seed of the trials.
    """

    parameter: str
    values: tuple[float, ...]
    base: Scenario = field(default_factory=Scenario)
    trials: int = 50
    seed: int = 0

    def __post_init__(self) -> None:
        if self.parameter not in PARAMETERS:
            raise ParameterError(f"cannot sweep {self.parameter!r}; choose one of {', '.join(PARAMETERS)}")
        vals = tuple(self.values)
        if not vals:
            raise ParameterError("give at least one value to sweep")
        if len(vals) > 1000:
            raise ParameterError(f"at most 1000 steps, were {len(vals)}")
        for v in vals:
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                raise ParameterError(f"sweep values must be finite numbers, got {v!r}")
        object.__setattr__(self, "values", tuple(float(v) for v in vals))
        if not isinstance(self.trials, int) or not 1 <= self.trials <= MAX_TRIALS:
            raise ParameterError(f"trials must be between 1 and {MAX_TRIALS}, was {self.trials!r}")
        if not isinstance(self.seed, int) or self.seed < 0:
            raise ParameterError(f"seed must be a non-negative integer, was {self.seed!r}")
        self.scenarios()  # every step must be a valid scenario

    @classmethod
    def linear(cls, parameter: str, start: float, stop: float, steps: int, **kw) -> "SweepSpec":
        """A sweep over ``steps`` evenly spaced values from ``start`` to ``stop``."""
        return cls(parameter, linear_values(start, stop, steps), **kw)

    @property
    def unit(self) -> str:
        return PARAMETERS[self.parameter]

    def scenario_at(self, value: float) -> Scenario:
        """The base scenario with the swept parameter set to ``value``."""
        b = self.base
        if self.parameter == "snr_db":
            return replace(b, impairments=replace(b.impairments, snr_db=value))
        if self.parameter == "jitter":
            return replace(b, impairments=replace(b.impairments, jitter=value))
        if self.parameter == "hum_level":
            return replace(b, impairments=replace(b.impairments, hum_level=value))
        if self.parameter == "variation":
            if b.profile == "constant":
                raise ParameterError("a constant speed profile has no variation; sweep it with profile ramp or swipe")
            return replace(b, variation=value)
        return replace(b, pw50_cell=value)

    def scenarios(self) -> list[Scenario]:
        """One scenario per step.  A sweep keeps one sample rate over all its steps, the
        automatic rate of its fastest step, unless the base scenario fixes the rate."""
        steps = [self.scenario_at(v) for v in self.values]
        if self.base.rate_hz is None:
            rate = max(s.sample_rate_hz for s in steps)
            steps = [replace(s, rate_hz=rate) for s in steps]
        return steps


@dataclass(frozen=True)
class StepResult:
    """The scores of one sweep step."""

    value: float
    trials: int
    successes: int
    char_errors: int
    chars: int
    false_accepts: int

    @property
    def success_rate(self) -> float:
        return self.successes / self.trials

    @property
    def char_error_rate(self) -> float:
        return self.char_errors / self.chars if self.chars else 0.0

    def to_dict(self) -> dict:
        return {
            "value": self.value,
            "trials": self.trials,
            "successes": self.successes,
            "success_rate": self.success_rate,
            "char_errors": self.char_errors,
            "chars": self.chars,
            "char_error_rate": self.char_error_rate,
            "false_accepts": self.false_accepts,
        }


@dataclass(frozen=True)
class SweepResult:
    """What a sweep found: one :class:`StepResult` per step, in sweep order."""

    spec: SweepSpec
    steps: tuple[StepResult, ...]
    rate_hz: float

    @property
    def first_failing_step(self) -> int | None:
        """Index of the first step whose success rate is below 99 %, or None."""
        for i, s in enumerate(self.steps):
            if s.success_rate < SUCCESS_TARGET:
                return i
        return None

    @property
    def first_failing_value(self) -> float | None:
        i = self.first_failing_step
        return None if i is None else self.steps[i].value

    def to_dict(self) -> dict:
        """JSON-ready result with stable keys (units in the key names or in ``unit``)."""
        base = self.spec.base.describe()
        base["rate_hz"] = self.rate_hz
        return {
            "parameter": self.spec.parameter,
            "unit": self.spec.unit,
            "trials_per_step": self.spec.trials,
            "seed": self.spec.seed,
            "success_target": SUCCESS_TARGET,
            "first_failing_step": self.first_failing_step,
            "first_failing_value": self.first_failing_value,
            "base": base,
            "steps": [s.to_dict() for s in self.steps],
        }


def run_sweep(spec: SweepSpec, workers: int | None = None,
              progress: Callable[[int, int], None] | None = None) -> SweepResult:
    """Run the sweep ``spec``: ``spec.trials`` trials per step on ``workers`` processes
    (default ``os.cpu_count()``); ``progress(done, total)`` is called as trials finish."""
    scenarios = spec.scenarios()
    outcomes = run_trials(scenarios, spec.trials, spec.seed, workers=workers, progress=progress)
    steps = tuple(
        StepResult(value=v, trials=len(o), successes=sum(t.success for t in o),
                   char_errors=sum(t.char_errors for t in o), chars=sum(t.chars for t in o),
                   false_accepts=sum(t.false_accepts for t in o))
        for v, o in zip(spec.values, outcomes)
    )
    return SweepResult(spec, steps, scenarios[0].sample_rate_hz)


def plot_sweep(result: SweepResult, path: str | os.PathLike, *, force: bool = False) -> Path:
    """Draw success rate and character error rate against the swept value as a PNG.

    The 99 % success line and the first failing step are marked.  Refuses to replace an
    existing file unless ``force``; writes through a temporary file in the same folder.
    """
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    path = Path(path)
    check_plot_path(path, force=force)
    x = np.array([s.value for s in result.steps])
    success = np.array([100 * s.success_rate for s in result.steps])
    cer = np.array([100 * s.char_error_rate for s in result.steps])
    spec = result.spec
    fig, ax = plt.subplots(figsize=(7.5, 4.5), dpi=120)
    ax.plot(x, success, "o-", color="tab:blue", label="read success")
    ax.plot(x, cer, "s--", color="tab:red", label="character error rate")
    ax.axhline(100 * SUCCESS_TARGET, color="tab:blue", ls=":", lw=1, label="99 % success")
    ax.set_ylim(-3, 103)
    ax.set_xlabel(f"{spec.parameter} ({spec.unit})")
    ax.set_ylabel("percent of trials / of characters")
    if x.size > 1 and x[0] > x[-1]:
        ax.invert_xaxis()   # read the curve in sweep order
    i = result.first_failing_step
    if i is not None:
        ax.axvline(x[i], color="k", ls="--", lw=1, label="first step below 99 %")
        lo, hi = ax.get_xlim()
        right_half = hi != lo and (x[i] - lo) / (hi - lo) > 0.5
        ax.annotate(f"{spec.parameter} = {x[i]:g}", (x[i], 50),
                    xytext=(-6 if right_half else 6, 0), textcoords="offset points", fontsize=8,
                    ha="right" if right_half else "left",
                    bbox={"boxstyle": "round", "fc": "white", "ec": "0.7"})
    b = spec.base
    ax.set_title(f"track {b.track}, {b.speed_cm_s:g} cm/s {b.profile}, {spec.trials} trials/step, "
                 f"{result.rate_hz / 1000:g} kHz", fontsize=9)
    ax.legend(loc="best", fontsize=8)
    ax.grid(alpha=0.3)
    fig.tight_layout()
    try:
        with atomic_output(path, force=force) as tmp:
            fig.savefig(tmp, format="png")
    finally:
        plt.close(fig)
    return path


def check_plot_path(path: Path, *, force: bool = False) -> None:
    """Raise a ReadchanError (exit code 2) unless ``path`` can take a new PNG: the rules of
    :func:`readchan.io.atomic.check_output_path`, and the directory takes a file now."""
    if Path(path).suffix.lower() != ".png":
        raise ParameterError(f"the plot is written as PNG; give a file name ending in .png, was {str(path)!r}")
    check_output_path(path, force=force, probe=True)
