"""The command line's progress bar: on stderr, for work longer than about a second, only on a
terminal, never on stdout.

Input: the number of items of work (captures, trials) and, as the work goes on, how far it is:
each item's fraction done (0 to 1, the callback :data:`readchan.stream.Progress` describes),
or the count of items done.
Output: a rich bar on the stderr console, shown once :data:`DELAY_S` has passed (work that ends
sooner shows nothing), erased when the work ends (``transient``).  Nothing is drawn when stderr
is not a terminal or ``--quiet`` was given; standard output is never touched.

Text a command writes on stdout while the bar is up goes through :meth:`ProgressBar.paused`:
the bar is taken down, the text written, the bar put back, so a terminal that shows both
streams keeps the text whole.
"""

from __future__ import annotations

import threading
from contextlib import contextmanager
from typing import Callable, Iterator

from rich.console import Console
from rich.progress import BarColumn, Progress, TaskProgressColumn, TextColumn, TimeElapsedColumn, TimeRemainingColumn

DELAY_S = 1.0
"""Seconds of work before the bar is drawn."""

class ProgressBar:
    """A bar over ``total`` items of work, drawn on ``console`` (a stderr console) once
    ``delay_s`` (default :data:`DELAY_S`) has passed.  ``pause``: :meth:`paused` takes the bar
    down (give ``False`` when stdout is not a terminal).

    ``quiet`` or a console that is not a terminal: nothing is ever drawn, every call is cheap.
    The value shown never decreases: it is the items done plus the fraction of the one under
    way (:meth:`part`), over ``total``.  Use as a context manager; the bar is erased on exit.
    """

    def __init__(self, total: int, console: Console, *, description: str = "decoding", quiet: bool = False,
                 delay_s: float | None = None, pause: bool = True) -> None:
        self.total = max(1, int(total))
        self.enabled = not quiet and console.is_terminal
        self.value = 0.0
        self._lock = threading.RLock()
        self._shown = False
        self._closed = False
        self._timer: threading.Timer | None = None
        self._bar: Progress | None = None
        self._pause = pause
        if not self.enabled:
            return
        # redirect_stdout off: rich would otherwise send what is printed on stdout to this
        # (stderr) console while the bar is up
        self._bar = Progress(TextColumn("{task.description}"), BarColumn(), TaskProgressColumn(),
                             TextColumn("{task.fields[count]}"), TimeElapsedColumn(), TimeRemainingColumn(),
                             console=console, transient=True, redirect_stdout=False, redirect_stderr=False)
        self._task = self._bar.add_task(description, total=float(self.total), count=self._count())
        self.delay_s = DELAY_S if delay_s is None else float(delay_s)

    def _count(self) -> str:
        return f"{int(self.value)}/{self.total}" if self.total > 1 else ""

    def __enter__(self) -> "ProgressBar":
        if self.enabled:
            if self.delay_s <= 0:
                self._show()
            else:
                self._timer = threading.Timer(self.delay_s, self._show)
                self._timer.daemon = True
                self._timer.start()
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def close(self) -> None:
        """Take the bar down for good (erased: it is transient)."""
        if not self.enabled:
            return
        if self._timer is not None:
            self._timer.cancel()
        with self._lock:
            self._closed = True
            if self._shown:
                self._bar.stop()
                self._shown = False

    def _show(self) -> None:
        with self._lock:
            if not self._closed and not self._shown:
                self._bar.start()
                self._shown = True

    def update(self, value: float) -> None:
        """Items done so far, a fraction allowed (0 to ``total``); never moves the bar back."""
        if not self.enabled:
            return
        with self._lock:
            self.value = min(float(self.total), max(self.value, float(value)))
            self._bar.update(self._task, completed=self.value, count=self._count())

    def done(self, items: int) -> None:
        """``items`` items are finished."""
        self.update(items)

    def part(self, index: int) -> Callable[[float], None]:
        """The callback of item ``index`` (from 0): given its fraction done (0 to 1), it moves
        the bar to ``index + fraction`` items."""
        def progress(fraction: float) -> None:
            self.update(index + min(1.0, max(0.0, float(fraction))))
        return progress

    @contextmanager
    def paused(self) -> Iterator[None]:
        """The bar taken down while the block runs (text written on stdout), then put back
        unless the work is all done; a bar made with ``pause=False`` (stdout is not a terminal,
        so the two cannot mix) stays up."""
        if not self.enabled or not self._pause:
            yield
            return
        with self._lock:
            was = self._shown
            if was:
                self._bar.stop()
                self._shown = False
            try:
                yield
            finally:
                if was and not self._closed and self.value < self.total:
                    self._bar.start()
                    self._shown = True
