"""`readchan inspect`: the front-end diagnostics report (registered on the main app).

The measurements are :mod:`readchan.measure.diagnose`'s; :mod:`readchan.report.inspect` renders them
as a rich report and as one JSON object (``--json``), :mod:`readchan.report.plot` as a PNG (``--plot``).
Those modules are imported when the command runs, not when the CLI starts.  Account
numbers are masked everywhere unless ``--unmask`` is given.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Optional

import typer

from readchan.cli.common import (CAPTURES, CHANNEL, FIELD_CHECK, FORMAT, HIGHPASS, JSON, LOWPASS, NOTCH, RATE_HZ, RATE_OLD, SIGNAL,
                                 SIGNAL_OLD, TRACK, UNMASK, Kind, _channels, _settings, app, err, out, renamed,
                                 schema)
from readchan.errors import ParameterError

PLOT_SUFFIXES = (".png", ".pdf", ".svg")


@app.command()
def inspect(
    captures: list[Path] = CAPTURES,
    fmt: str = FORMAT,
    channel: Optional[list[int]] = CHANNEL,
    signal: Kind = SIGNAL,
    track: Optional[int] = TRACK,
    rate_hz: Optional[float] = RATE_HZ,
    notch: str = NOTCH,
    lowpass_hz: Optional[float] = LOWPASS,
    highpass_hz: float = HIGHPASS,
    as_json: bool = JSON,
    unmask: bool = UNMASK,
    field_check: bool = FIELD_CHECK,
    plot: Optional[Path] = typer.Option(None, "--plot", help="Write plots to this .png (.pdf, .svg) file; with "
                                        "several captures, one file each, named FILE-<capture>.png."),
    force: bool = typer.Option(False, help="Overwrite the --plot file(s) if they exist (regular files only)."),
    kind_old: Optional[Kind] = SIGNAL_OLD,
    rate_old: Optional[float] = RATE_OLD,
) -> None:
    """Measure every read: amplitude, noise, hum, PW50, speed, timing margin, anomalies, verdict."""
    from readchan.io.capture import load_capture
    from readchan.measure.diagnose import inspect_capture
    from readchan.report.render import exit_code
    from readchan.report.inspect import channel_dict, print_inspect, read_dict

    kind = renamed("--kind", "--signal", kind_old, signal, Kind.auto)
    rate = renamed("--rate", "--rate-hz", rate_old, rate_hz)
    settings = _settings(fmt, kind, track, notch, lowpass_hz, highpass_hz, field_check)
    targets = _plot_targets(plot, captures, force) if plot is not None else [None] * len(captures)
    doc_reads, doc_channels, all_reads, all_results = [], [], [], []
    for path, target in zip(captures, targets):
        cap = load_capture(path, rate_hz=rate)
        reports = inspect_capture(cap, settings, _channels(channel))
        for ch in reports:
            all_reads.extend(r.read for r in ch.reads)
            all_results.append(ch.result)
            doc_channels.append(channel_dict(ch))
            doc_reads.extend(read_dict(ch, r, unmask=unmask) for r in ch.reads)
        if not as_json:
            print_inspect(out, str(path), reports, unmask=unmask)
        if target is not None:
            from readchan.report.plot import plot_reports

            panels = plot_reports(reports, target, unmask=unmask, title=str(path), force=force)
            err.print(f"wrote {target}: {panels} panel(s)", highlight=False)
    if as_json:
        print(json.dumps({"schema": schema("inspect"), "channels": doc_channels, "reads": doc_reads}, indent=2,
                         allow_nan=False))
    raise typer.Exit(exit_code(all_reads, all_results))


def _plot_targets(plot: Path, captures: list[Path], force: bool) -> list[Path]:
    """The plot file of each capture, each checked before any work (readchan.io.atomic's rules)."""
    from readchan.io.atomic import check_output_path

    if plot.suffix.lower() not in PLOT_SUFFIXES:
        raise ParameterError(f"--plot must name a {', '.join(PLOT_SUFFIXES)} file, was {str(plot)!r}")
    if len(captures) == 1:
        names = [plot]
    else:
        names = [plot.with_name(f"{plot.stem}-{c.stem}{plot.suffix}") for c in captures]
        if len(set(names)) < len(names):
            names = [plot.with_name(f"{plot.stem}-{i}-{c.stem}{plot.suffix}") for i, c in enumerate(captures)]
    for name in names:
        check_output_path(name, force=force, probe=True)
    return names
