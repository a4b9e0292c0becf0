"""The batch side of ``readchan decode``: each capture rendered where it was decoded, the
outputs written in input order, a closing summary.

Input: the capture sources (:func:`readchan.io.sources.expand_sources`), the decode options
(:class:`readchan.batch.BatchOptions`) and what to output (:class:`RenderOptions`).
Output: per capture, its warnings and error on stderr, its text or JSON Lines record on stdout
as soon as it and those before it are done; at the end the single ``--json`` object, the table
files, the closing summary on stderr (for more than one capture) and the batch's exit code
(:func:`readchan.batch.batch_exit_code`).

With ``--jobs N`` the captures are decoded and rendered in a pool of N processes; what a worker
sends back is plain data (text, dicts, table rows), not the channels' signals.
"""

from __future__ import annotations

import io
import json
import sys
import time
import warnings
from dataclasses import dataclass, field

from readchan.batch import BatchOptions, CaptureResult, batch_exit_code, decode_source, in_order
from readchan.cli.common import err, out, schema

JSONL_SCHEMA = "decode-line"
"""The ``schema`` of a ``--jsonl`` record: ``readchan.decode-line/1``."""


@dataclass(frozen=True)
class RenderOptions:
    """What each capture is rendered into."""

    unmask: bool = False
    text: bool = True
    bits: bool = False
    transitions: bool = False
    tape_bytes: bool = False
    keep: bool = False            # keep the channel results (one capture, for --vcd-out)
    width: int = 120
    terminal: bool = False
    color_system: str | None = None


@dataclass
class Rendered:
    """One capture, rendered: plain data that crosses a process boundary cheaply."""

    source: str
    error: str | None
    exit_code: int
    duration_s: float | None = None
    reads: list = field(default_factory=list)           # JSON dicts
    channels: list = field(default_factory=list)        # JSON dicts
    valid: int = 0
    notes: list = field(default_factory=list)           # warning lines for stderr
    text: str | None = None
    bits_rows: list = field(default_factory=list)
    transitions_rows: list = field(default_factory=list)
    tape_bytes: bytes = b""
    tape_reads: int = 0
    result: CaptureResult | None = None


def render(res: CaptureResult, ro: RenderOptions, console=None) -> Rendered:
    """``res`` rendered as ``ro`` says; the text goes to ``console`` when given, else into
    :attr:`Rendered.text` (a worker's)."""
    from readchan.report.render import channel_dict, print_decode, read_dict, warning_lines

    r = Rendered(res.source, res.error, res.exit_code, res.duration_s, result=res if ro.keep else None)
    if res.error is not None:
        return r
    reads = res.reads
    r.reads = [read_dict(x, unmask=ro.unmask) for x in reads]
    r.channels = [channel_dict(ch, res.source) for ch in res.channels]
    r.valid = sum(1 for x in reads if x.valid)
    r.notes = warning_lines(res.source, list(res.channels))
    if ro.text:
        from readchan.report.bits_text import print_bit_reads

        buf = None
        if console is None:
            from rich.console import Console

            buf = io.StringIO()
            console = Console(file=buf, width=ro.width, force_terminal=ro.terminal, color_system=ro.color_system)
        print_decode(console, res.source, list(res.channels), unmask=ro.unmask)
        print_bit_reads(console, res.source, [x for x in reads if x.format == "f2f-bits"])
        r.text = None if buf is None else buf.getvalue()
    if ro.bits or ro.transitions:
        from readchan.report.tables import bits_rows, transitions_rows

        r.bits_rows = bits_rows(res.source, list(res.channels), unmask=ro.unmask) if ro.bits else []
        r.transitions_rows = transitions_rows(res.source, list(res.channels), unmask=ro.unmask) \
            if ro.transitions else []
    if ro.tape_bytes:
        tape = [x for x in reads if x.format == "kcs"]
        r.tape_bytes, r.tape_reads = b"".join(x.payload.data for x in tape), len(tape)
    return r


class RenderTask:
    """Decode and render one capture in a worker process; its warnings come back as lines."""

    def __init__(self, opts: BatchOptions, ro: RenderOptions) -> None:
        self.opts, self.ro = opts, ro

    def __call__(self, src) -> Rendered:
        with warnings.catch_warnings(record=True) as caught:      # one task at a time per process
            warnings.simplefilter("always")
            got = render(decode_source(src, self.opts), self.ro)
        lines = []
        for w in caught:        # spelt as the command line's own warning lines (cli.common)
            text = str(w.message) if w.category.__module__.startswith("readchan") \
                else f"{w.message} ({w.category.__name__})"
            lines.append(f"readchan: warning: {' '.join(text.split())}")
        got.notes = lines + got.notes
        return got


@dataclass
class Totals:
    """What the closing summary counts."""

    captures: int = 0
    reads: int = 0
    valid: int = 0
    no_data: int = 0
    errors: int = 0
    duration_s: float = 0.0
    codes: list = field(default_factory=list)

    def add(self, r: Rendered) -> None:
        self.captures += 1
        self.codes.append(r.exit_code)
        if r.error is not None:
            self.errors += 1
            return
        self.reads += len(r.reads)
        self.valid += r.valid
        self.no_data += 0 if r.reads else 1
        self.duration_s += r.duration_s or 0.0


def summary_table(t: Totals, elapsed_s: float, jobs: int):
    """The closing summary: one row of counts, the captures' total duration and the time taken."""
    from rich.table import Table

    table = Table(title=f"batch of {t.captures} captures" + (f", {jobs} processes" if jobs > 1 else ""),
                  header_style="bold", title_justify="left")
    cols = ("captures", "reads", "valid", "invalid", "no data", "errors", "duration s", "time s")
    for c in cols:
        table.add_column(c, justify="right", no_wrap=True)
    table.add_row(str(t.captures), str(t.reads), str(t.valid), str(t.reads - t.valid), str(t.no_data), str(t.errors),
                  f"{t.duration_s:.2f}", f"{elapsed_s:.2f}")
    return table


def _emit(r: Rendered, jsonl: bool) -> None:
    """A capture's lines: its warnings and error on stderr, its text or record on stdout."""
    from readchan.cli.main import cli_spelling

    for line in r.notes:
        err.print(line, highlight=False, markup=False)
    if r.error is not None:
        err.print(f"readchan: error: {cli_spelling(r.error)}", highlight=False, markup=False)
    if jsonl:
        record = {"schema": schema(JSONL_SCHEMA), "source": r.source, "reads": r.reads, "channels": r.channels,
                  "error": r.error, "exit_code": r.exit_code,
                  "duration_s": None if r.duration_s is None else round(r.duration_s, 6)}
        sys.stdout.write(json.dumps(record) + "\n")
        sys.stdout.flush()
    elif r.text:
        sys.stdout.write(r.text)
        sys.stdout.flush()


def run_batch(sources: list, opts: BatchOptions, ro: RenderOptions, *, jobs: int = 1, jsonl: bool = False,
              on_each=None) -> Totals:
    """Decode, render and emit every capture in input order; ``on_each(rendered)`` sees each
    after it is emitted (its text dropped), for the closing outputs.  Returns the totals; prints
    the summary on stderr for more than one capture."""
    start = time.perf_counter()
    totals = Totals()
    pool = None
    if jobs > 1 and len(sources) > 1:
        from concurrent.futures import ProcessPoolExecutor

        pool = ProcessPoolExecutor(max_workers=jobs)
    try:
        if pool is None:
            def task(src):
                return render(decode_source(src, opts), ro, None if jsonl or not ro.text else out)
        else:
            task = RenderTask(opts, ro)
        for r in in_order(task, sources, pool, window=4 * jobs):
            _emit(r, jsonl)
            totals.add(r)
            r.text = None
            if on_each is not None:
                on_each(r)
    finally:
        if pool is not None:
            pool.shutdown(cancel_futures=True)
    if len(sources) > 1:
        err.print(summary_table(totals, time.perf_counter() - start, jobs))
    return totals


def batch_code(totals: Totals) -> int:
    return batch_exit_code(totals.codes)
