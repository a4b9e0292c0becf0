"""`readchan inspect`: the front-end diagnostics report (registered on the main app).

Each capture is decoded once (:func:`readchan.channel.decode_capture`: the format registry finds
each channel's format).  Card channels are measured by :mod:`readchan.measure.diagnose` and
rendered by :mod:`readchan.report.inspect` and :mod:`readchan.report.plot`; tape reads (timecode,
cassette data) by :mod:`readchan.measure.tape`, :mod:`readchan.report.tape_inspect` and
:mod:`readchan.report.plot_tape`; both go into one JSON object (``--json``) and one plot (``--plot``).
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
TAPE_FAMILIES = ("timecode", "cassette")
"""Channel families measured by :mod:`readchan.measure.tape` (the rest are cards)."""


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
    """Measure every read: cards (amplitude, noise, hum, PW50, speed, timing margin, anomalies) and tape
    (play speed and its changes, decision margins, level, SNR, dropouts, events); a verdict each."""
    from readchan.report.render import exit_code

    kind = renamed("--kind", "--signal", kind_old, signal, Kind.auto)
    rate = renamed("--rate", "--rate-hz", rate_old, rate_hz)
    settings = _settings(fmt, kind, track, notch, lowpass_hz, highpass_hz, field_check)
    targets = _plot_targets(plot, captures, force) if plot is not None else [None] * len(captures)
    doc = {"schema": schema("inspect"), "channels": [], "reads": []}
    all_reads, all_results = [], []
    for path, target in zip(captures, targets):
        cards, tapes, results, units = _inspect_one(path, rate, settings, channel)
        all_results.extend(results)
        all_reads.extend(r.read for ch in cards for r in ch.reads)
        all_reads.extend(rep.read for rep, _ in tapes)
        _add_to_doc(doc, cards, tapes, units, unmask)
        if not as_json:
            _print(path, cards, tapes, units, unmask)
        if target is not None:
            _plot(target, path, cards, tapes, results, unmask, force)
    if as_json:
        print(json.dumps(doc, indent=2, allow_nan=False))
    raise typer.Exit(exit_code(all_reads, all_results))


def _inspect_one(path: Path, rate: Optional[float], settings, channel):
    """Decode a capture once (the registry finds each channel's format) and measure every
    channel: card channels by :mod:`readchan.measure.diagnose`, tape reads by
    :mod:`readchan.measure.tape`.  Returns (card reports, [(tape report, samples)], results, units)."""
    import numpy as np

    from readchan.channel import decode_capture
    from readchan.io.capture import load_capture, repair_outliers
    from readchan.measure.diagnose import inspect_channel

    cap = load_capture(path, rate_hz=rate)
    results = decode_capture(cap, settings, _channels(channel))
    cards, tapes = [], []
    for res in results:
        x = np.ascontiguousarray(cap.channel(res.channel))
        if res.outliers.size:             # measure what was decoded: the channel with its faults repaired
            x = repair_outliers(x)[0]
        if res.family in TAPE_FAMILIES:
            from readchan.measure.tape import measure_tape

            tapes.extend((measure_tape(r, x, cap.rate_hz, source=cap.source), x) for r in res.reads)
        else:
            cards.append(inspect_channel(x, cap.rate_hz, res, highpass_hz=settings.condition.highpass_hz,
                                         units=cap.units, source=cap.source))
    return cards, tapes, results, cap.units


def _add_to_doc(doc: dict, cards, tapes, units: str, unmask: bool) -> None:
    if cards:
        from readchan.report.inspect import channel_dict, read_dict

        doc["channels"].extend(channel_dict(ch) for ch in cards)
        doc["reads"].extend(read_dict(ch, r, unmask=unmask) for ch in cards for r in ch.reads)
    if tapes:
        from readchan.report.tape_inspect import tape_channel_dict, tape_read_dict

        seen = set()
        for rep, _ in tapes:
            if rep.channel not in seen:
                seen.add(rep.channel)
                doc["channels"].append(tape_channel_dict(rep, units))
            doc["reads"].append(tape_read_dict(rep, units))


def _print(path: Path, cards, tapes, units: str, unmask: bool) -> None:
    if cards or not tapes:
        from readchan.report.inspect import print_inspect

        print_inspect(out, str(path), cards, unmask=unmask)
    if tapes:
        from readchan.report.tape_inspect import print_tape_inspect

        print_tape_inspect(out, str(path), [rep for rep, _ in tapes], units)


def _plot(target: Path, path: Path, cards, tapes, results, unmask: bool, force: bool) -> None:
    """Card reads into ``target``; tape reads into it too when the capture has no card channel,
    else into ``<target stem>-tape<suffix>`` beside it."""
    if cards:
        from readchan.report.plot import plot_reports

        panels = plot_reports(cards, target, unmask=unmask, title=str(path), force=force)
        err.print(f"wrote {target}: {panels} panel(s)", highlight=False)
    if tapes:
        from readchan.report.plot_tape import plot_tape

        tape_target = target.with_name(f"{target.stem}-tape{target.suffix}") if cards else target
        panels = plot_tape(tapes, tapes[0][0].rate_hz, tape_target, title=str(path), force=force)
        err.print(f"wrote {tape_target}: {panels} panel(s)", highlight=False)


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
