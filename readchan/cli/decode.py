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
) -> None:
    """Decode the tracks held in CAPTURE files: characters, parity, LRC and fields."""
    from readchan.io.capture import load_capture
    from readchan.channel import decode_capture
    from readchan.report.render import channel_dict, exit_code, print_decode, read_dict, reads_of, warning_lines

    kind = renamed("--kind", "--signal", kind_old, signal, Kind.auto)
    rate = renamed("--rate", "--rate-hz", rate_old, rate_hz)
    settings = _settings(fmt, kind, track, notch, lowpass_hz, highpass_hz, field_check)
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
    if as_json:
        print(json.dumps({"schema": schema("decode"), "reads": [read_dict(r, unmask=unmask) for r in all_reads],
                          "channels": channels}, indent=2))
    raise typer.Exit(exit_code(all_reads, all_results))
