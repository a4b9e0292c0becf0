"""Text output of ``f2f-bits`` reads: a table of the reads and each read's bits.

Input: :class:`readchan.results.Read` s of the ``f2f-bits`` format
(:mod:`readchan.formats.f2f_bits`).
Output: rich renderables on a console.
"""

from __future__ import annotations

from rich.console import Console
from rich.table import Table
from rich.text import Text

from readchan.results import Read


def print_bit_reads(console: Console, source: str, reads: list[Read]) -> None:
    """A table (one row per read: channel, bits, flagged bits, mean period, time span) and a
    line per read with its bits in reading order, in groups of eight."""
    from readchan.formats.f2f_bits import bit_string

    if not reads:
        return
    t = Table(title=source, header_style="bold", title_justify="left")
    for col in ("read", "ch", "format", "bits", "flagged", "verdict", "period µs", "time s"):
        t.add_column(col, no_wrap=True)
    for n, r in enumerate(reads):
        p = r.payload
        verdict = Text("valid", style="green") if p.valid else Text("flagged", style="bold red")
        t.add_row(str(n), str(r.channel), r.format, str(len(r.bits)), str(len(p.flagged)), verdict,
                  f"{1e6 * p.mean_period_s:.1f}", f"{r.start_s:.3f}–{r.end_s:.3f}")
    console.print(t)
    for n, r in enumerate(reads):
        bits = bit_string(r.bits)
        console.print(Text(f"read {n}  " + " ".join(bits[i:i + 8] for i in range(0, len(bits), 8))), soft_wrap=True)
