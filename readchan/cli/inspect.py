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

from readchan.cli.common import (CAPTURES, CHANNEL, FIELD_CHECK, FORMAT, HIGHPASS, JSON, LOWPASS, NOTCH, QUIET, RATE_HZ,
                                 RATE_OLD, SIGNAL, SIGNAL_OLD, TRACK, UNMASK, Kind, _channels, _settings, app, err,
                                 out, renamed, schema)
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
    read: Optional[int] = typer.Option(None, "--read", metavar="N",
                                       help="Measure (and plot) only read N, numbered from 0 as decode numbers them "
                                            "(channel by channel, in time), with 0.5 s of capture either side."),
    window: Optional[str] = typer.Option(None, "--window", metavar="A:B",
                                         help="Measure only capture time A to B seconds (A: to the end, : all)."),
    quiet: bool = QUIET,
    kind_old: Optional[Kind] = SIGNAL_OLD,
    rate_old: Optional[float] = RATE_OLD,
) -> None:
    """Measure every read: cards (amplitude, noise, hum, PW50, speed, timing margin, anomalies) and tape
    (play speed and its changes, decision margins, level, SNR, dropouts, events); a verdict each."""
    # over 60 lines only by its option list (typer reads the options from the signature)
    from readchan.cli.inspect_window import check_read_number, parse_window
    from readchan.cli.progress import ProgressBar
    from readchan.report.render import exit_code

    kind = renamed("--kind", "--signal", kind_old, signal, Kind.auto)
    rate = renamed("--rate", "--rate-hz", rate_old, rate_hz)
    settings = _settings(fmt, kind, track, notch, lowpass_hz, highpass_hz, field_check)
    parse_window(window)            # bad values fail before any work
    check_read_number(read)
    targets = _plot_targets(plot, captures, force) if plot is not None else [None] * len(captures)
    doc = {"schema": schema("inspect"), "channels": [], "reads": []}
    all_reads, all_results = [], []
    with ProgressBar(len(captures), err, description="inspecting", quiet=quiet, pause=out.is_terminal) as bar:
        for i, (path, target) in enumerate(zip(captures, targets)):
            part = bar.part(i)
            cards, tapes, results, units, stretch = _inspect_one(path, rate, settings, channel, window, read, part)
            all_results.extend(results)
            all_reads.extend(r.read for ch in cards for r in ch.reads)
            all_reads.extend(rep.read for rep, _ in tapes)
            _add_to_doc(doc, cards, tapes, units, unmask, stretch)
            if not as_json:
                with bar.paused():
                    _print(path, cards, tapes, units, unmask, stretch)
            if target is not None:
                _plot(target, path, cards, tapes, results, unmask, force, stretch)
            part(1.0)
    if as_json:
        print(json.dumps(doc, indent=2, allow_nan=False))
    raise typer.Exit(exit_code(all_reads, all_results))


def _inspect_one(path: Path, rate: Optional[float], settings, channel, window: Optional[str] = None,
                 read: Optional[int] = None, progress=None):
    """Decode a capture's stretch once (:func:`readchan.cli.inspect_window.select`: the whole
    capture, ``--window`` or ``--read``; the registry finds each channel's format) and measure
    every channel: card channels by :mod:`readchan.measure.diagnose`, tape reads by
    :mod:`readchan.measure.tape`.  Returns (card reports, [(tape report, samples)], results,
    units, the stretch)."""
    import numpy as np

    from readchan.channel import decode_capture
    from readchan.cli.inspect_window import select
    from readchan.io.capture import repair_outliers
    from readchan.measure.diagnose import inspect_channel

    progress = progress or (lambda f: None)
    stretch = select(path, rate, settings, _channels(channel), window, read, progress)
    cap = stretch.capture
    chans = _channels(channel) if stretch.read is None else [stretch.read_channel]
    results = [_only_chosen(res, stretch) for res in decode_capture(cap, settings, chans)]
    progress(0.7)
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
    return cards, tapes, results, cap.units, stretch


def _only_chosen(res, stretch):
    """``res`` with only the read ``--read`` chose (the others in its context dropped)."""
    if stretch.read is None:
        return res
    from dataclasses import replace

    from readchan.cli.inspect_window import START_TOLERANCE_S

    keep = [r for r in res.reads if abs(r.start_s - stretch.read_start_s) <= START_TOLERANCE_S]
    return replace(res, reads=tuple(keep[:1]))


def _add_to_doc(doc: dict, cards, tapes, units: str, unmask: bool, stretch) -> None:
    where = {"window_start_s": round(stretch.start_s, 6), "window_end_s": round(stretch.end_s, 6),
             "selected_read": stretch.read}
    if cards:
        from readchan.report.inspect import channel_dict, read_dict

        doc["channels"].extend({**channel_dict(ch), **where} for ch in cards)
        doc["reads"].extend({**read_dict(ch, r, unmask=unmask), **where} for ch in cards for r in ch.reads)
    if tapes:
        from readchan.report.tape_inspect import tape_channel_dict, tape_read_dict

        seen = set()
        for rep, _ in tapes:
            if rep.channel not in seen:
                seen.add(rep.channel)
                doc["channels"].append({**tape_channel_dict(rep, units), **where})
            doc["reads"].append({**tape_read_dict(rep, units), **where})


def _label(path: Path, stretch) -> str:
    """The capture's name, with the stretch measured when it is not the whole capture."""
    note = stretch.describe()
    return f"{path} ({note})" if note else str(path)


def _print(path: Path, cards, tapes, units: str, unmask: bool, stretch) -> None:
    if cards or not tapes:
        from readchan.report.inspect import print_inspect

        print_inspect(out, _label(path, stretch), cards, unmask=unmask)
    if tapes:
        from readchan.report.tape_inspect import print_tape_inspect

        print_tape_inspect(out, _label(path, stretch), [rep for rep, _ in tapes], units)


PLOT_MAX_READS = 6
"""Most reads one plot draws (each read is a 13 × 11 inch block of five panels: six fill three
rows of two); with more, the first six are drawn, with a warning naming ``--read`` and ``--window``."""


def _plot(target: Path, path: Path, cards, tapes, results, unmask: bool, force: bool, stretch) -> None:
    """Card reads into ``target``; tape reads into it too when the capture has no card channel,
    else into ``<target stem>-tape<suffix>`` beside it.  At most :data:`PLOT_MAX_READS` reads."""
    from readchan.cli.common import warn_line

    n_reads = sum(len(ch.reads) for ch in cards) + len(tapes)
    if n_reads > PLOT_MAX_READS:
        warn_line(f"{path}: {n_reads} reads; the plot draws the first {PLOT_MAX_READS} (choose one with --read N, "
                  f"or a stretch with --window A:B)")
        cards, tapes = _first_reads(cards, tapes, PLOT_MAX_READS)
    title = _label(path, stretch)
    if cards:
        from readchan.report.plot import plot_reports

        panels = plot_reports(cards, target, unmask=unmask, title=title, force=force)
        err.print(f"wrote {target}: {panels} panel(s)", highlight=False)
    if tapes:
        from readchan.report.plot_tape import plot_tape

        tape_target = target.with_name(f"{target.stem}-tape{target.suffix}") if cards else target
        panels = plot_tape(tapes, tapes[0][0].rate_hz, tape_target, title=title, force=force)
        err.print(f"wrote {tape_target}: {panels} panel(s)", highlight=False)


def _first_reads(cards, tapes, limit: int):
    """The card channel reports and tape reads cut to the first ``limit`` reads (channel order)."""
    from dataclasses import replace

    kept = []
    for ch in cards:
        take = ch.reads[:max(0, limit)]
        if take or not ch.reads:
            kept.append(replace(ch, reads=take))
        limit -= len(take)
    return kept, tapes[:max(0, limit)]


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
