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
from dataclasses import dataclass, field, replace

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


class Totals:
    """What the closing summary counts, from one row per capture: (exit code, failed, reads,
    valid reads, duration in s)."""

    def __init__(self) -> None:
        self.rows: list[tuple[int, bool, int, int, float]] = []

    def add(self, r: Rendered) -> None:
        self.rows.append((r.exit_code, r.error is not None, len(r.reads), r.valid, r.duration_s or 0.0))

    def _sum(self, k: int) -> float:
        return sum(row[k] for row in self.rows)

    @property
    def codes(self) -> list[int]:
        return [row[0] for row in self.rows]

    def counts(self) -> dict:
        """captures, reads, valid, invalid, no data (no read, no error), errors, duration_s."""
        reads, valid = int(self._sum(2)), int(self._sum(3))
        errors = int(self._sum(1))
        no_data = sum(1 for _, failed, n, _, _ in self.rows if not failed and n == 0)
        return {"captures": len(self.rows), "reads": reads, "valid": valid, "invalid": reads - valid,
                "no data": no_data, "errors": errors, "duration_s": float(self._sum(4))}


def summary_table(t: Totals, elapsed_s: float, jobs: int):
    """The closing summary: one row of counts, the captures' total duration and the time taken."""
    from rich.table import Table

    c = t.counts()
    table = Table(title=f"batch of {c['captures']} captures" + (f", {jobs} processes" if jobs > 1 else ""),
                  header_style="bold", title_justify="left")
    for col in ("captures", "reads", "valid", "invalid", "no data", "errors", "duration s", "time s"):
        table.add_column(col, justify="right", no_wrap=True)
    counts = [str(c[k]) for k in ("captures", "reads", "valid", "invalid", "no data", "errors")]
    table.add_row(*counts, f"{c['duration_s']:.2f}", f"{elapsed_s:.2f}")
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
              on_each=None, quiet: bool = False) -> Totals:
    """Decode, render and emit every capture in input order; ``on_each(rendered)`` sees each
    after it is emitted (its text dropped), for the closing outputs.  Returns the totals; prints
    the summary on stderr for more than one capture.

    A progress bar (:class:`readchan.cli.progress.ProgressBar`) counts the captures done on
    stderr when it is a terminal and the batch takes over a second, unless ``quiet``; in one
    process the capture under way moves it by its own fraction done (a long streamed capture),
    with ``--jobs`` only finished captures do."""
    from readchan.cli.progress import ProgressBar

    start = time.perf_counter()
    totals = Totals()
    pool = None
    if jobs > 1 and len(sources) == 1:     # one capture: its stretches, when it is streamed, share the processes
        opts = replace(opts, jobs=jobs)
    if jobs > 1 and len(sources) > 1:
        from concurrent.futures import ProcessPoolExecutor

        _preload()
        pool = ProcessPoolExecutor(max_workers=jobs)
    bar = ProgressBar(len(sources), err, description="decoding", quiet=quiet, pause=out.is_terminal)
    try:
        with bar:
            if pool is None:
                order = iter(range(len(sources)))

                def task(src):
                    res = decode_source(src, opts, progress=bar.part(next(order)))
                    with bar.paused():          # the text goes to stdout as it is rendered
                        return render(res, ro, None if jsonl or not ro.text else out)
            else:
                task = RenderTask(opts, ro)
            for r in in_order(task, sources, pool, window=4 * jobs):
                with bar.paused():
                    _emit(r, jsonl)
                totals.add(r)
                bar.done(len(totals.rows))
                r.text = None
                if on_each is not None:
                    on_each(r)
    finally:
        if pool is not None:
            pool.shutdown(cancel_futures=True)
    if len(sources) > 1:
        err.print(summary_table(totals, time.perf_counter() - start, jobs))
    return totals


def _preload() -> None:
    """Import the decoder, its formats and the reports before the pool starts its workers: a
    forked worker (the default on Linux) then inherits them instead of importing them again
    (about half a second per worker, more than a small capture takes to decode)."""
    import readchan.channel  # noqa: F401
    import readchan.report.render  # noqa: F401
    from readchan.formats.registry import all_formats

    all_formats()


def batch_code(totals: Totals) -> int:
    return batch_exit_code(totals.codes)
