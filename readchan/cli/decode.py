"""`readchan decode`: the tracks of capture files as a table or JSON (registered on the app).

Many captures in one call (paths, directories, quoted globs, ``-`` for standard input) are a
batch (:mod:`readchan.cli.batch`): one bad capture gets its own error line and record, the
others go on; ``--jsonl`` streams one JSON object per capture; ``--jobs N`` spreads them over
processes.  The exit code is the most severe per-capture code (4, 2, 1, 0, 3 in that order:
:data:`readchan.batch.SEVERITY`).
"""

from __future__ import annotations

import json
import os
from enum import Enum
from pathlib import Path
from typing import Optional

import typer

from readchan.cli.common import (CHANNEL, FIELD_CHECK, HIGHPASS, JSON, LOWPASS, NOTCH, QUIET, RATE_HZ, RATE_OLD,
                                 SIGNAL, SIGNAL_OLD, TRACK, UNMASK, Kind, _channels, _settings, app, err, out,
                                 renamed, schema)

CAPTURES = typer.Argument(..., help="Captures: WAV/FLAC/AIFF audio, CSV tables or VCD files; directories (every "
                                    "capture below), quoted globs, or - for standard input.")
FORMAT = typer.Option("auto", "--format", "-f",
                      help="Format: auto (try every registered format), iso-alpha, iso-bcd, track1..3, ltc (timecode), "
                           "kcs (cassette data), f2f-bits (F2F bits, no framing), or a card format custom:bits=..,...")


class Edge(str, Enum):
    falling = "falling"
    rising = "rising"


@app.command()
# Over 60 lines because typer reads the options from the signature, one parameter a line; the
# body itself is some 30 lines.
def decode(
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
    jsonl: bool = typer.Option(False, "--jsonl", help="Print one JSON object per capture, one a line, each as soon as "
                                                      "it is done."),
    jobs: int = typer.Option(1, "--jobs", "-j", min=1, max=256, help="Decode the captures in N processes (output "
                                                                     "stays in input order); one long capture: its "
                                                                     "stretches (the same reads)."),
    unmask: bool = UNMASK,
    field_check: bool = FIELD_CHECK,
    kind_old: Optional[Kind] = SIGNAL_OLD,
    rate_old: Optional[float] = RATE_OLD,
    signal_name: Optional[str] = typer.Option(None, "--signal-name", metavar="NAME",
                                              help="VCD: the comparator output to decode."),
    strobe_name: Optional[str] = typer.Option(None, "--strobe-name", metavar="NAME",
                                              help="VCD: a reader chip's strobe (with --data-name)."),
    data_name: Optional[str] = typer.Option(None, "--data-name", metavar="NAME",
                                            help="VCD: a reader chip's data, sampled on the strobe edge."),
    strobe_edge: Edge = typer.Option(Edge.falling, "--strobe-edge", help="VCD: the strobe edge the data is taken on."),
    bytes_out: Optional[Path] = typer.Option(None, "--bytes-out", metavar="FILE",
                                             help="Write the bytes of the cassette (kcs) read to FILE."),
    vcd_out: Optional[Path] = typer.Option(None, "--vcd-out", metavar="FILE",
                                           help="Write transitions, bit cells, bits and characters to FILE as VCD."),
    bits_csv: Optional[Path] = typer.Option(None, "--bits-csv", metavar="FILE", help="Write one row per bit to FILE."),
    transitions_csv: Optional[Path] = typer.Option(None, "--transitions-csv", metavar="FILE",
                                                   help="Write one row per transition to FILE."),
    force: bool = typer.Option(False, help="Overwrite the output files (--bytes-out, --vcd-out, --bits-csv, "
                                           "--transitions-csv) if they exist (regular files only)."),
    quiet: bool = QUIET,
) -> None:
    """Decode what CAPTURE files hold: card tracks (characters, parity, LRC, fields), timecode
    frames, cassette bytes or raw F2F bits."""
    from readchan.batch import BatchOptions
    from readchan.cli.batch import RenderOptions, batch_code, run_batch
    from readchan.errors import ParameterError
    from readchan.io.sources import expand_sources

    kind = renamed("--kind", "--signal", kind_old, signal, Kind.auto)
    rate = renamed("--rate", "--rate-hz", rate_old, rate_hz)
    settings = _settings(fmt, kind, track, notch, lowpass_hz, highpass_hz, field_check)
    if as_json and jsonl:
        raise ParameterError("give --json (one object) or --jsonl (one object per capture), not both")
    sources = expand_sources([os.fspath(c) for c in captures])
    files = {"--bytes-out": bytes_out, "--vcd-out": vcd_out, "--bits-csv": bits_csv,
             "--transitions-csv": transitions_csv}
    _check_outputs({k: v for k, v in files.items() if v is not None}, sources, force)   # before the work
    opts = BatchOptions(settings, None if not channel else tuple(_channels(channel)), rate, signal_name, strobe_name,
                        data_name, strobe_edge.value)
    ro = RenderOptions(unmask, not (as_json or jsonl), bits_csv is not None, transitions_csv is not None,
                       bytes_out is not None, vcd_out is not None, out.width, out.is_terminal, out.color_system)
    kept: dict = {"reads": [], "channels": [], "bits": [], "transitions": [], "last": None}

    def collect(r) -> None:
        if as_json:
            kept["reads"] += r.reads
            kept["channels"] += r.channels
        kept["bits"] += r.bits_rows
        kept["transitions"] += r.transitions_rows
        kept["last"] = r

    totals = run_batch(sources, opts, ro, jobs=jobs, jsonl=jsonl, on_each=collect, quiet=quiet)
    _write_outputs(files, kept, force, unmask)
    if as_json:
        print(json.dumps({"schema": schema("decode"), "reads": kept["reads"], "channels": kept["channels"]}, indent=2))
    raise typer.Exit(batch_code(totals))


def _check_outputs(files: dict, sources: list, force: bool) -> None:
    """Each output file can be written, is none of the captures nor another output, and the
    single-capture outputs (--bytes-out, --vcd-out) have one capture."""
    from readchan.errors import ParameterError
    from readchan.io.atomic import check_output_path

    named = {}
    for flag, path in files.items():
        if flag in ("--bytes-out", "--vcd-out") and len(sources) != 1:
            raise ParameterError(f"{flag} takes one capture, got {len(sources)}")
        where = Path(path).resolve()
        if any(isinstance(c, str) and Path(c).resolve() == where for c in sources):
            raise ParameterError(f"{flag} {path} is the capture itself; refusing to overwrite it")
        if where in named:
            raise ParameterError(f"{flag} and {named[where]} name the same file {path}")
        named[where] = flag
        check_output_path(path, force=force, probe=True)


def _write_outputs(files: dict, kept: dict, force: bool, unmask: bool) -> None:
    from readchan.report.tables import BITS_COLUMNS, TRANSITIONS_COLUMNS, write_table

    last = kept["last"]
    if files["--bytes-out"] is not None and last is not None and last.error is None:
        _write_bytes(files["--bytes-out"], last, force)
    if files["--vcd-out"] is not None and last is not None and last.error is None:
        from readchan.report.vcd_out import write_vcd

        res = last.result
        n = write_vcd(files["--vcd-out"], list(res.channels), rate_hz=res.rate_hz, timescale_s=res.timescale_s,
                      unmask=unmask, force=force)
        _note(f"wrote {n} value changes to {files['--vcd-out']}")
    for flag, columns, rows in (("--bits-csv", BITS_COLUMNS, kept["bits"]),
                                ("--transitions-csv", TRANSITIONS_COLUMNS, kept["transitions"])):
        if files[flag] is not None:
            write_table(files[flag], columns, rows, force=force)
            _note(f"wrote {len(rows)} rows to {files[flag]}")


def _note(text: str) -> None:
    err.print(f"readchan: {text}", highlight=False, markup=False)


def _write_bytes(path: Path, rendered, force: bool) -> None:
    """The cassette reads' bytes, in channel order, written atomically to ``path``; a capture
    with no cassette read writes nothing and is an error."""
    from readchan.errors import CaptureError
    from readchan.io.atomic import atomic_output

    if not rendered.tape_reads:
        raise CaptureError(f"--bytes-out {path}: the capture holds no cassette (kcs) read; nothing written")
    with atomic_output(path, force=force) as tmp:
        tmp.write_bytes(rendered.tape_bytes)
    _note(f"wrote {len(rendered.tape_bytes)} bytes to {path}")
