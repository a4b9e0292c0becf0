"""Rendering of tape reads: rich tables for timecode and cassette reads, and a hex dump.

Input: :class:`readchan.results.Read` s whose payload is a
:class:`readchan.formats.ltc.read.LtcRead` or a :class:`readchan.formats.kcs.read.KcsRead`.
Output: rich tables and text lines on a console; :func:`hex_dump` lines.
"""

from __future__ import annotations

from rich.console import Console
from rich.table import Table
from rich.text import Text

from readchan.results import Read

HEX_DUMP_MAX_BYTES = 4096
"""The text report dumps at most this many bytes of a cassette read (256 lines of 16); the rest
is counted, and ``--bytes-out`` writes them all."""


def hex_dump(data: bytes, *, width: int = 16, limit: int | None = HEX_DUMP_MAX_BYTES) -> list[str]:
    """``data`` as hex dump lines: the offset (8 hex digits), ``width`` bytes in hex, and the
    printable ASCII characters (``.`` for the others); beyond ``limit`` bytes one line counts
    the rest."""
    shown = data if limit is None else data[:limit]
    lines = []
    for a in range(0, len(shown), width):
        chunk = shown[a:a + width]
        hexes = " ".join(f"{b:02x}" for b in chunk)
        text = "".join(chr(b) if 0x20 <= b < 0x7F else "." for b in chunk)
        lines.append(f"{a:08x}  {hexes:<{3 * width - 1}}  |{text}|")
    if len(shown) < len(data):
        lines.append(f"… {len(data) - len(shown)} more bytes")
    return lines


def _verdict(ok: bool) -> Text:
    return Text("valid", style="green") if ok else Text("invalid", style="bold red")


def ltc_table(reads: list[Read], title: str | None = None) -> Table:
    """One row per timecode read: frames, rate, speed range, events, verdict (the first and last
    timecode follow in :func:`ltc_span_lines`, so the table fits a terminal)."""
    t = Table(title=title, header_style="bold", title_justify="left")
    for col in ("read", "ch", "direction", "frames", "fps", "speed ×", "events", "verdict", "time s"):
        t.add_column(col, no_wrap=True)
    for n, r in enumerate(reads):
        p = r.payload
        fps = "?" if p.rate_fps is None else f"{p.rate_fps:g}"
        if p.rate_fps is None and p.rate_fps_candidates:
            fps = "/".join(f"{v:g}" for v in p.rate_fps_candidates) + "?"
        speeds = [f.speed for f in p.frames]
        sp = f"{min(speeds):.2f}–{max(speeds):.2f}" if speeds else ""
        t.add_row(str(n), str(r.channel), r.direction, str(len(p.frames)), fps, sp,
                  str(len(p.events)), _verdict(r.valid), f"{r.start_s:.3f}–{r.end_s:.3f}")
    return t


def ltc_span_lines(reads: list[Read]) -> list[Text]:
    """One line per timecode read: its first and last timecode in capture order."""
    lines = []
    for n, r in enumerate(reads):
        f = r.payload.frames
        if f:
            flags = " drop frame" if f[0].drop_frame else ""
            lines.append(Text(f"read {n}  {f[0].timecode} → {f[-1].timecode}  ({len(f)} frames{flags})"))
    return lines


def ltc_event_lines(reads: list[Read]) -> list[Text]:
    """One line per timecode event (jumps, splices, damaged stretches, direction changes)."""
    lines = []
    for n, r in enumerate(reads):
        for e in r.payload.events:
            line = Text(f"read {n}  {e.position_s:.4f} s  {e.kind}")
            if e.from_timecode or e.to_timecode:
                line.append(f"  {e.from_timecode or '?'} → {e.to_timecode or '?'}")
            if e.frames is not None:
                line.append(f"  ({e.frames} frames)")
            lines.append(line)
    return lines


def kcs_table(reads: list[Read], title: str | None = None) -> Table:
    """One row per cassette read: baud, bytes, framing errors, dropouts, leader, speed, verdict."""
    t = Table(title=title, header_style="bold", title_justify="left")
    for col in ("read", "ch", "baud", "bytes", "framing errors", "dropouts", "leader s", "speed ×",
                "verdict", "time s"):
        t.add_column(col, no_wrap=True)
    for n, r in enumerate(reads):
        p = r.payload
        errs = ",".join(map(str, p.framing_errors[:8])) + ("…" if len(p.framing_errors) > 8 else "")
        t.add_row(str(n), str(r.channel), str(p.baud), str(len(p.data)), errs or "none",
                  str(len(p.dropouts)), f"{p.leader_s:.2f}", f"{p.speed:.3f}", _verdict(r.valid),
                  f"{r.start_s:.3f}–{r.end_s:.3f}")
    return t


def print_tape_reads(console: Console, source: str, reads: list[Read]) -> None:
    """The timecode reads' table and events, then the cassette reads' table and hex dumps."""
    ltc = [r for r in reads if r.format == "ltc"]
    kcs = [r for r in reads if r.format == "kcs"]
    if ltc:
        console.print(ltc_table(ltc, title=f"{source}: linear timecode"))
        for line in ltc_span_lines(ltc) + ltc_event_lines(ltc):
            console.print(line, soft_wrap=True)
    if kcs:
        console.print(kcs_table(kcs, title=f"{source}: Kansas City cassette data"))
        for n, r in enumerate(kcs):
            console.print(Text(f"read {n}  {len(r.payload.data)} bytes"))
            for line in hex_dump(r.payload.data):
                console.print(line, highlight=False, markup=False, soft_wrap=True)
