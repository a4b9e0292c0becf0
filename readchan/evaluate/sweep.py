"""Margin sweeps: read success and character errors as one impairment grows.

Input: a :class:`SweepSpec` (one parameter over a list of values, a base
:class:`~readchan.evaluate.scenario.Scenario`, trials per step, a seed).  Output: a
:class:`SweepResult` (one :class:`StepResult` per step; JSON-ready with ``to_dict``).  The
trials are :mod:`readchan.evaluate.trial`'s, run by :mod:`readchan.evaluate.runner`; the plot
is :mod:`readchan.evaluate.plot`'s.

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
from dataclasses import dataclass, field, replace
from typing import Callable

import numpy as np

from readchan.errors import ParameterError
from readchan.evaluate.plot import check_plot_path, plot_sweep
from readchan.evaluate.scenario import DEMO_TEXTS, Scenario, random_text
from readchan.evaluate.trial import (MAX_TRIALS, SUCCESS_TARGET, TrialOutcome, edit_distance, reference_reads, run_trial, run_trials,
                                     synthesize_trial, true_period_at)

__all__ = [
    "DEMO_TEXTS",
    "PARAMETERS",
    "SUCCESS_TARGET",
    "Scenario",
    "StepResult",
    "SweepResult",
    "SweepSpec",
    "TrialOutcome",
    "check_plot_path",
    "edit_distance",
    "linear_values",
    "plot_sweep",
    "random_text",
    "reference_reads",
    "run_sweep",
    "run_trial",
    "run_trials",
    "synthesize_trial",
    "true_period_at",
]


PARAMETERS = {
    "snr_db": "dB",
    "jitter": "cell",
    "variation": "of mean speed",
    "pw50_cell": "cell",
    "hum_level": "of median peak",
}
"""Sweepable parameters and the unit of their values."""

MAX_STEPS = 1000
"""Most steps a sweep takes (a guard against a typing slip, not a tuned figure)."""


def linear_values(start: float, stop: float, steps: int) -> tuple[float, ...]:
    """``steps`` evenly spaced values from ``start`` to ``stop`` inclusive."""
    if not isinstance(steps, int) or not 1 <= steps <= MAX_STEPS:
        raise ParameterError(f"steps must be between 1 and {MAX_STEPS}, was {steps!r}")
    for name, v in (("start", start), ("stop", stop)):
        if not math.isfinite(v):
            raise ParameterError(f"sweep {name} must be a finite number, was {v!r}")
    if steps == 1 and start != stop:
        raise ParameterError(f"one step cannot run from {start:g} to {stop:g}; give steps ≥ 2")
    return tuple(float(v) for v in np.linspace(start, stop, steps))


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
        if len(vals) > MAX_STEPS:
            raise ParameterError(f"at most {MAX_STEPS} steps, were {len(vals)}")
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
