"""Rendering of decode results: JSON-ready dictionaries and rich tables.

Account numbers are masked in every output unless the caller passes ``unmask=True``
(at most the first 6 and last 4 digits shown; PCI DSS v3.2.1 requirement 3.3).
"""

from __future__ import annotations

import numpy as np
from rich.console import Console
from rich.table import Table
from rich.text import Text

from readchan.decode import ChannelResult, Read
from readchan.errors import EXIT_INVALID, EXIT_NO_DATA, EXIT_VALID
from readchan.fields import mask_text


def read_dict(r: Read, *, unmask: bool = False) -> dict:
    """One read as a JSON-ready dict (stable keys; see the README)."""
    f = r.frame
    return {
        "source": r.source,
        "channel": r.channel,
        "format": f.format,
        "track": r.track.number if r.track else None,
        "direction": f.direction,
        "text": mask_text(f.text, f.format, unmask),
        "valid": bool(f.valid),
        "complete": bool(f.complete),
        "parity_failed": [int(i) for i in (~np.asarray(f.parity_ok, bool)).nonzero()[0]],
        "lrc_ok": bool(f.lrc_ok),
        "corrected": [int(c) for c in f.corrected],
        "revised_bits": [int(b) for b in f.revised_bits],
        "bits": int(len(r.bits)),
        "characters": len(f.text),
        "start_s": round(float(r.start_s), 6),
        "end_s": round(float(r.end_s), 6),
        "mean_speed_cm_s": None if r.mean_speed_cm_s is None else round(r.mean_speed_cm_s, 2),
        "fields": None if r.fields is None else r.fields.to_dict(unmask=unmask),
        "recovery": None if r.recovery is None else {
            "candidates": r.recovery.candidates,
            "passing": r.recovery.passing,
            "accepted": r.recovery.frame is not None,
            "searched_bits": list(r.recovery.searched),
        },
    }


def reads_of(results: list[ChannelResult]) -> list[Read]:
    return [r for ch in results for r in ch.reads]


def exit_code(reads: list[Read]) -> int:
    """0 when every read is valid, 1 when some read is not, 3 when there is none."""
    if not reads:
        return EXIT_NO_DATA
    return EXIT_VALID if all(r.valid for r in reads) else EXIT_INVALID


def _verdict(ok: bool, good: str = "ok", bad: str = "FAIL") -> Text:
    return Text(good, style="green") if ok else Text(bad, style="bold red")


def decode_table(reads: list[Read], *, unmask: bool = False, title: str | None = None) -> Table:
    """A rich table with one row per read; the characters follow in :func:`text_lines`."""
    t = Table(title=title, show_lines=False, header_style="bold", title_justify="left")
    for col in ("read", "ch", "track", "format", "direction", "chars", "parity", "LRC", "bits", "cm/s", "time s"):
        t.add_column(col, no_wrap=True)
    for n, r in enumerate(reads):
        f = r.frame
        bad = [i for i, ok in enumerate(f.parity_ok) if not ok]
        parity = _verdict(not bad, "ok", f"{len(bad)} bad")
        if f.corrected:
            how = "recovered" if r.recovery is not None and r.recovery.frame is not None else "corrected"
            parity = Text(f"{how} {','.join(map(str, f.corrected))}", style="yellow")
        lrc = _verdict(f.lrc_ok) if f.complete else Text("no end", style="bold red")
        speed = "" if r.mean_speed_cm_s is None else f"{r.mean_speed_cm_s:.1f}"
        t.add_row(str(n), str(r.channel), str(r.track.number) if r.track else "?", f.format, f.direction,
                  str(len(f.text)), parity, lrc, str(len(r.bits)), speed, f"{r.start_s:.3f}–{r.end_s:.3f}")
    return t


def text_lines(reads: list[Read], *, unmask: bool = False) -> list[Text]:
    """One line per read: its number, a validity mark and its characters (account masked)."""
    lines = []
    for n, r in enumerate(reads):
        mark = Text("valid  ", style="green") if r.valid else Text("INVALID", style="bold red")
        line = Text(f"read {n}  ")
        line.append(mark)
        line.append("  " + mask_text(r.frame.text, r.frame.format, unmask))
        lines.append(line)
    return lines


def field_lines(reads: list[Read], *, unmask: bool = False) -> list[Text]:
    """One line per read with parsed ISO/IEC 7813 fields (account masked unless ``unmask``)."""
    lines = []
    for n, r in enumerate(reads):
        if r.fields is None:
            continue
        d = r.fields.to_dict(unmask=unmask)
        line = Text(f"read {n}  {d['layout']}: account {d['pan']} (Luhn ")
        line.append(_verdict(bool(d["luhn_ok"]), "ok", "FAIL"))
        line.append(")")
        for key, label in (("name", "name"), ("expiry_yymm", "expiry"), ("service_code", "service"),
                           ("discretionary", "discretionary")):
            if d.get(key):
                line.append(f" · {label} {d[key]}")
        for p in d.get("problems", []):
            line.append(f" · {p}", style="yellow")
        lines.append(line)
    return lines


def print_decode(console: Console, source: str, results: list[ChannelResult], *, unmask: bool = False) -> None:
    reads = reads_of(results)
    if not reads:
        n_tr = sum(len(ch.transitions) for ch in results)
        console.print(f"{source}: no framed data ({n_tr} transitions found)")
        return
    console.print(decode_table(reads, unmask=unmask, title=source))
    for line in text_lines(reads, unmask=unmask):
        console.print(line, soft_wrap=True)
    for line in field_lines(reads, unmask=unmask):
        console.print(line, soft_wrap=True)
