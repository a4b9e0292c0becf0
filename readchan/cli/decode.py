"""`readchan decode`: the tracks of capture files as a table or JSON (registered on the app)."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Optional

import typer

from readchan.cli.common import (CAPTURES, CHANNEL, FIELD_CHECK, FORMAT, HIGHPASS, JSON, LOWPASS, NOTCH, RATE_HZ, RATE_OLD,
                                 SIGNAL, SIGNAL_OLD, TRACK, UNMASK, Kind, _channels, _settings, app, err, out, renamed,
                                 schema)


@app.command()
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
    unmask: bool = UNMASK,
    field_check: bool = FIELD_CHECK,
    kind_old: Optional[Kind] = SIGNAL_OLD,
    rate_old: Optional[float] = RATE_OLD,
    bytes_out: Optional[Path] = typer.Option(None, "--bytes-out", metavar="FILE",
                                             help="Write the bytes of the cassette (kcs) read to FILE."),
    force: bool = typer.Option(False, help="Overwrite the --bytes-out file if it exists (a regular file only)."),
) -> None:
    """Decode what CAPTURE files hold: card tracks (characters, parity, LRC, fields), timecode
    frames or cassette bytes."""
    from readchan.io.capture import load_capture
    from readchan.channel import decode_capture
    from readchan.report.render import channel_dict, exit_code, print_decode, read_dict, reads_of, warning_lines

    kind = renamed("--kind", "--signal", kind_old, signal, Kind.auto)
    rate = renamed("--rate", "--rate-hz", rate_old, rate_hz)
    settings = _settings(fmt, kind, track, notch, lowpass_hz, highpass_hz, field_check)
    if bytes_out is not None:
        _check_bytes_out(bytes_out, captures, force)     # fail before the work, not after
    all_reads, all_results, channels = [], [], []
    for path in captures:
        cap = load_capture(path, rate_hz=rate)
        results = decode_capture(cap, settings, _channels(channel))
        all_reads.extend(reads_of(results))
        all_results.extend(results)
        channels.extend(channel_dict(ch, str(path)) for ch in results)
        for line in warning_lines(str(path), results):
            err.print(line, highlight=False, markup=False)
        if not as_json:
            print_decode(out, str(path), results, unmask=unmask)
    if bytes_out is not None:
        _write_bytes(bytes_out, all_reads, force)
    if as_json:
        print(json.dumps({"schema": schema("decode"), "reads": [read_dict(r, unmask=unmask) for r in all_reads],
                          "channels": channels}, indent=2))
    raise typer.Exit(exit_code(all_reads, all_results))


def _check_bytes_out(path: Path, captures: list[Path], force: bool) -> None:
    from readchan.errors import ParameterError
    from readchan.io.atomic import check_output_path

    if len(captures) != 1:
        raise ParameterError(f"--bytes-out takes one capture, got {len(captures)}")
    if any(Path(c).resolve() == Path(path).resolve() for c in captures):
        raise ParameterError(f"--bytes-out {path} is the capture itself; refusing to overwrite it")
    check_output_path(path, force=force, probe=True)


def _write_bytes(path: Path, reads: list, force: bool) -> None:
    """The cassette reads' bytes, in channel order, written atomically to ``path``; a capture
    with no cassette read writes nothing and is an error."""
    from readchan.errors import CaptureError
    from readchan.io.atomic import atomic_output

    tape = [r for r in reads if r.format == "kcs"]
    if not tape:
        raise CaptureError(f"--bytes-out {path}: the capture holds no cassette (kcs) read; nothing written")
    with atomic_output(path, force=force) as tmp:
        tmp.write_bytes(b"".join(r.payload.data for r in tape))
    err.print(f"readchan: wrote {sum(len(r.payload.data) for r in tape)} bytes to {path}", highlight=False,
              markup=False)
