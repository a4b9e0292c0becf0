"""Rendering of decode results: JSON-ready dictionaries and rich tables.

Account numbers are masked in every output unless the caller passes ``unmask=True``
(at most the first 6 and last 4 digits shown; PCI DSS v3.2.1 requirement 3.3).
"""

from __future__ import annotations

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
        "parity_ok": [bool(p) for p in f.parity_ok],
        "lrc_ok": bool(f.lrc_ok),
        "corrected": [int(c) for c in f.corrected],
        "revised_bits": [int(b) for b in f.revised_bits],
        "bits": int(len(r.bits)),
        "characters": len(f.text),
        "start_s": round(float(r.start_s), 6),
        "end_s": round(float(r.end_s), 6),
        "mean_speed_cm_s": None if r.mean_speed_cm_s is None else round(r.mean_speed_cm_s, 2),
        "fields": None if r.fields is None else r.fields.to_dict(unmask=unmask),
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
    """A rich table with one row per read."""
    t = Table(title=title, show_lines=False, header_style="bold")
    for col in ("ch", "format", "dir", "characters", "parity", "LRC", "bits", "cm/s", "time s"):
        t.add_column(col, overflow="fold", no_wrap=col != "characters")
    for r in reads:
        f = r.frame
        bad = [i for i, ok in enumerate(f.parity_ok) if not ok]
        parity = _verdict(not bad, "ok", f"{len(bad)} bad")
        if f.corrected:
            parity = Text(f"corrected {','.join(map(str, f.corrected))}", style="yellow")
        lrc = _verdict(f.lrc_ok) if f.complete else Text("no end", style="bold red")
        speed = "" if r.mean_speed_cm_s is None else f"{r.mean_speed_cm_s:.1f}"
        t.add_row(str(r.channel), f.format, f.direction, mask_text(f.text, f.format, unmask), parity, lrc,
                  str(len(r.bits)), speed, f"{r.start_s:.3f}–{r.end_s:.3f}")
    return t


def fields_table(reads: list[Read], *, unmask: bool = False) -> Table | None:
    """A rich table of the parsed card fields, or None if no read has any."""
    rows = [(r, r.fields.to_dict(unmask=unmask)) for r in reads if r.fields is not None]
    if not rows:
        return None
    t = Table(title="fields", header_style="bold")
    for col in ("ch", "layout", "account", "Luhn", "name", "expiry", "service", "discretionary"):
        t.add_column(col, overflow="fold")
    for r, d in rows:
        t.add_row(str(r.channel), d.get("layout", ""), str(d.get("pan", "")), _verdict(bool(d.get("luhn_ok"))),
                  str(d.get("name") or ""), str(d.get("expiry_yymm") or ""), str(d.get("service_code") or ""),
                  str(d.get("discretionary") or ""))
    return t


def print_decode(console: Console, source: str, results: list[ChannelResult], *, unmask: bool = False) -> None:
    reads = reads_of(results)
    if not reads:
        n_tr = sum(len(ch.transitions) for ch in results)
        console.print(f"{source}: no framed data ({n_tr} transitions found)")
        return
    console.print(decode_table(reads, unmask=unmask, title=source))
    ft = fields_table(reads, unmask=unmask)
    if ft is not None:
        console.print(ft)
