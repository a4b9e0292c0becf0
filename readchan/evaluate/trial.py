"""One trial of a margin sweep: synthesize a capture of a :class:`Scenario`, decode it, score it.

Input: scenarios (:class:`readchan.evaluate.scenario.Scenario`), a base seed and the trial
indices.  Output: a :class:`TrialOutcome` per trial (success, character errors, false
accepts; the reference decoder's too when asked), run on worker processes by
:func:`readchan.evaluate.runner.run_jobs`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np

from readchan.channel import DecodeSettings, decode_channel
from readchan.formats.iso7811.card import reads_from
from readchan.errors import ParameterError
from readchan.evaluate.runner import run_jobs
from readchan.evaluate.scenario import Scenario, _content
from readchan.formats.iso7811.charset import TRACKS
from readchan.formats.iso7811.framing import Frame
from readchan.synth import SynthResult, SynthSpec, synthesize
from readchan.synth.card import track_content
from readchan.synth.speed import SpeedProfile


SUCCESS_TARGET = 0.99
"""Success rate below which a step fails."""

MAX_TRIALS = 100_000
"""Most trials per scenario a run accepts (a guard against a typing slip, not a tuned figure)."""


@dataclass(frozen=True)
class TrialOutcome:
    """The score of one trial (see :mod:`readchan.evaluate.sweep` for the definitions)."""

    success: bool
    char_errors: int
    chars: int
    false_accepts: int
    reads: int
    ref_success: bool | None = None
    ref_false_accepts: int | None = None


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


def _trial_job(scenarios: Sequence[Scenario], seed: int, job: tuple[int, int]) -> TrialOutcome:
    """Trial ``job`` = (scenario index, trial) of ``scenarios`` (a job of :func:`run_jobs`)."""
    i, k = job
    return run_trial(scenarios[i], seed, i, k)


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
    scenarios = tuple(scenarios)
    jobs = [(i, k) for i in range(len(scenarios)) for k in range(trials)]
    flat = run_jobs(_trial_job, jobs, shared=(scenarios, seed), workers=workers, progress=progress)
    return [flat[i * trials:(i + 1) * trials] for i in range(len(scenarios))]
