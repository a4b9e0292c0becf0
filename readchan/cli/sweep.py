"""`readchan sweep`: margin sweeps over one impairment (registered on the main app)."""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path
from typing import Optional

import typer
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn
from rich.table import Table
from rich.text import Text

from readchan.cli.common import QUIET, Profile, app, err, out, schema, warn_line
from readchan.errors import ParameterError

SWEPT = {"snr-db": "snr_db", "jitter": "jitter", "variation": "variation", "pw50-cell": "pw50_cell",
         "hum-level": "hum_level"}
"""Swept parameters as the command line spells them (the name of their base option, without
the dashes) and as the library and the JSON spell them."""


def _swept(name: str) -> str:
    """The library name of a swept parameter given on the command line; the old underscore
    spellings (``snr_db``) still work, with a deprecation warning."""
    if name in SWEPT:
        return SWEPT[name]
    if name in SWEPT.values() and name not in SWEPT:
        new = next(k for k, v in SWEPT.items() if v == name)
        warn_line(f"sweep parameter {name} is deprecated and goes in the next release; use {new}")
        return name
    raise ParameterError(f"unknown sweep parameter {name!r}; choose one of {', '.join(SWEPT)}")


def _cli_name(name: str) -> str:
    return next(k for k, v in SWEPT.items() if v == name)


def _values(text: Optional[str], start: Optional[float], stop: Optional[float], steps: Optional[int]):
    """The swept values from ``--values`` or from ``--from/--to/--steps`` (one of the two)."""
    from readchan.evaluate.sweep import linear_values

    ranged = (start, stop, steps)
    if text is not None:
        if any(v is not None for v in ranged):
            raise ParameterError("give either --values or --from/--to/--steps, not both")
        try:
            vals = tuple(float(v) for v in text.split(",") if v.strip())
        except ValueError:
            raise ParameterError(f"--values takes numbers separated by commas, was {text!r}") from None
        if not vals or not all(math.isfinite(v) for v in vals):
            raise ParameterError(f"--values takes finite numbers separated by commas, was {text!r}")
        return vals
    if start is None or stop is None or steps is None:
        raise ParameterError("give the swept values: --from X --to Y --steps N, or --values a,b,c")
    return linear_values(start, stop, steps)


def _step_table(result) -> Table:
    from readchan.evaluate.trial import SUCCESS_TARGET

    spec = result.spec
    fail = result.first_failing_step
    t = Table(title=f"sweep of {_cli_name(spec.parameter)} ({spec.unit}), track {spec.base.track}, "
                    f"{spec.trials} trials per step")
    t.add_column("step", justify="right")
    t.add_column(_cli_name(spec.parameter), justify="right")
    t.add_column("reads ok", justify="right")
    t.add_column("success", justify="right")
    t.add_column("char errors", justify="right")
    t.add_column("false accepts", justify="right")
    t.add_column("")
    for i, s in enumerate(result.steps):
        ok = s.success_rate >= SUCCESS_TARGET
        mark = Text("first below 99 %", style="bold red") if i == fail else Text("")
        t.add_row(str(i), f"{s.value:g}", f"{s.successes}/{s.trials}",
                  Text(f"{100 * s.success_rate:.1f} %", style="green" if ok else "red"),
                  f"{100 * s.char_error_rate:.2f} %",
                  Text(str(s.false_accepts), style="bold red" if s.false_accepts else ""),
                  mark)
    return t


def _base_scenario(track: int, speed_cm_s: float, profile: str, variation: Optional[float],
                   pw50_cell: Optional[float], impairments, rate_hz: Optional[float], demo: bool,
                   chars: Optional[int]):
    """The sweep's base scenario from the command's options (``--demo``: the track's invented text)."""
    from readchan.evaluate.scenario import DEMO_TEXTS, Scenario

    return Scenario(track=track, speed_cm_s=speed_cm_s, profile=profile, variation=variation or 0.0,
                    pw50_cell=pw50_cell, impairments=impairments, rate_hz=rate_hz,
                    text=DEMO_TEXTS[track] if demo else None, n_chars=chars)


def _print_result(result, as_json: bool) -> None:
    """The sweep's result on stdout: one JSON object, or the step table and where success falls."""
    if as_json:
        print(json.dumps({"schema": schema("sweep"), **result.to_dict()}, indent=2))
        return
    spec = result.spec
    out.print(_step_table(result))
    i = result.first_failing_step
    if i is None:
        out.print(f"success stays at or above 99 % over the whole sweep ({result.rate_hz:g} Hz sampling)")
    else:
        out.print(f"success falls below 99 % at step {i}: {_cli_name(spec.parameter)} = {result.steps[i].value:g} "
                  f"{spec.unit}")


@app.command()
def sweep(
    parameter: str = typer.Argument(..., metavar="PARAMETER",
                                    help="Impairment to sweep: snr-db (dB), jitter (cells), variation (of the mean "
                                         "speed), pw50-cell (cells), hum-level (of the peak); the same names as "
                                         "their base options."),
    start: Optional[float] = typer.Option(None, "--from", help="First swept value."),
    stop: Optional[float] = typer.Option(None, "--to", help="Last swept value."),
    steps: Optional[int] = typer.Option(None, "--steps", help="Number of evenly spaced values from --from to --to."),
    values: Optional[str] = typer.Option(None, "--values", help="Swept values, comma separated (instead of --from/--to/--steps)."),
    trials: int = typer.Option(50, "--trials", "-n", help="Synthesized trials per step."),
    track: int = typer.Option(1, "--track", min=1, max=3, help="ISO track (format and density) to record."),
    speed_cm_s: float = typer.Option(30.0, "--speed-cm-s", help="Mean swipe speed in cm/s."),
    profile: Profile = typer.Option(Profile.swipe, help="Speed profile along the card."),
    variation: Optional[float] = typer.Option(None, help="Base speed variation, fraction of the mean (default 0)."),
    snr_db: Optional[float] = typer.Option(None, "--snr-db", help="Base white-noise SNR in dB (default no noise)."),
    jitter: Optional[float] = typer.Option(None, help="Base jitter, ± fraction of a bit cell (default 0)."),
    pw50_cell: Optional[float] = typer.Option(None, "--pw50-cell", help="Base Lorentzian PW50 in bit cells (default: Karlqvist head, PW50 ≈ 42 µm)."),
    hum_level: Optional[float] = typer.Option(None, "--hum-level", help="Base hum amplitude, fraction of the median peak (default 0)."),
    hum_hz: float = typer.Option(50.0, "--hum-hz", help="Mains hum frequency in Hz."),
    density_error: float = typer.Option(0.0, "--density-error", help="Fractional density error (+0.05 = 5 % dense)."),
    clip: Optional[float] = typer.Option(None, help="Clip at this fraction of the median peak."),
    invert: bool = typer.Option(False, help="Invert the polarity."),
    reverse: bool = typer.Option(False, help="Swipe the cards backwards."),
    rate_hz: Optional[float] = typer.Option(None, "--rate-hz", help="Sample rate in Hz (default: ≥ 12 samples per cell at the fastest point)."),
    chars: Optional[int] = typer.Option(None, "--chars", help="Data characters of the random content (default a full track)."),
    demo: bool = typer.Option(False, "--demo", help="Record one fixed invented card text instead of random content."),
    seed: int = typer.Option(0, min=0, help="Base random seed (trials are seeded from seed, step, trial)."),
    workers: Optional[int] = typer.Option(None, "--workers", "-j", help="Worker processes (default: all cores)."),
    as_json: bool = typer.Option(False, "--json", help="Print one JSON object on stdout instead of the table."),
    plot: Optional[Path] = typer.Option(None, "--plot", help="Write a PNG curve of success and character error rate "
                                        "(after the table or JSON is printed)."),
    force: bool = typer.Option(False, help="Overwrite the --plot file if it exists (a regular file only)."),
    quiet: bool = QUIET,
) -> None:
    """Sweep one impairment: success, character errors and false accepts per step; where it drops below 99 %."""
    # over 60 lines only by its option list (typer reads the options from the signature)
    from readchan.evaluate.plot import check_plot_path, plot_sweep
    from readchan.evaluate.sweep import SweepSpec, run_sweep
    from readchan.synth import Impairments

    name = _swept(parameter)
    given = {"snr_db": snr_db, "jitter": jitter, "variation": variation, "pw50_cell": pw50_cell,
             "hum_level": hum_level}
    if given[name] is not None:
        raise ParameterError(f"{_cli_name(name)} is the swept parameter; drop its base option --{_cli_name(name)}")
    if demo and chars is not None:
        raise ParameterError("--chars sets random content; --demo records a fixed text")
    if plot is not None:
        check_plot_path(plot, force=force)   # fail before the work, not after
    imp = Impairments(density_error=density_error, jitter=jitter or 0.0, snr_db=snr_db, hum_hz=hum_hz,
                      hum_level=hum_level or 0.0, clip=clip, invert=invert, reverse=reverse)
    base = _base_scenario(track, speed_cm_s, profile.value, variation, pw50_cell, imp, rate_hz, demo, chars)
    spec = SweepSpec(name, _values(values, start, stop, steps), base=base, trials=trials, seed=seed)

    columns = (TextColumn("sweeping {task.description}"), BarColumn(), MofNCompleteColumn(),
               TimeRemainingColumn())
    # stdout not redirected: rich would otherwise send what is printed there to this stderr console
    with Progress(*columns, console=err, transient=True, disable=quiet or not err.is_terminal,
                  redirect_stdout=False, redirect_stderr=False) as bar:
        task = bar.add_task(name, total=len(spec.values) * spec.trials)
        result = run_sweep(spec, workers=workers, progress=lambda done, total: bar.update(task, completed=done))

    # The results first: a plot that cannot be written must not cost the trials.
    _print_result(result, as_json)
    if plot is not None:
        sys.stdout.flush()
        plot_sweep(result, plot, force=force)
        err.print(f"wrote {plot}")
