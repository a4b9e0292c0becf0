"""One process-pool runner for trials: a picklable function over a list of jobs, in chunks.

Input: a top-level function ``fn``, the arguments every call shares, and the jobs (picklable
values).  Output: ``[fn(*shared, job) for job in jobs]``, in the order of the jobs, computed
on up to ``workers`` processes; a progress callback hears ``(done, total)`` as chunks finish.
Used by the margin sweeps (:mod:`readchan.evaluate.trial`) and the benchmark scripts.
"""

from __future__ import annotations

import math
import os
from concurrent.futures import ProcessPoolExecutor, as_completed
from typing import Any, Callable, Sequence

from readchan.errors import ParameterError

__all__ = ["CHUNKS_PER_WORKER", "check_workers", "run_jobs"]

CHUNKS_PER_WORKER = 8
"""Chunks of jobs per worker process: few enough to keep the per-chunk overhead (pickling the
shared arguments, a round trip to the worker) small, enough for a progress bar to move and for
the load to balance when jobs differ in cost (tuned by eye on the sweeps; common practice)."""

MAX_WORKERS = 1024
"""Most worker processes a run accepts (a guard against a typing slip, not a tuned figure)."""


def check_workers(workers: int | None) -> int:
    """The number of worker processes: ``workers`` (1 to :data:`MAX_WORKERS`), or
    ``os.cpu_count()`` for None; anything else is a one-line ParameterError."""
    if workers is None:
        return os.cpu_count() or 1
    if not isinstance(workers, int) or not 1 <= workers <= MAX_WORKERS:
        raise ParameterError(f"workers must be between 1 and {MAX_WORKERS}, was {workers!r}")
    return workers


def _run_chunk(fn: Callable[..., Any], shared: tuple, chunk: Sequence[Any]) -> list[Any]:
    """A worker's unit of work: ``fn(*shared, job)`` for every job of ``chunk``."""
    return [fn(*shared, job) for job in chunk]


def run_jobs(fn: Callable[..., Any], jobs: Sequence[Any], *, shared: tuple = (), workers: int | None = 1,
             progress: Callable[[int, int], None] | None = None) -> list[Any]:
    """``[fn(*shared, job) for job in jobs]`` on ``workers`` processes (None: all cores; 1: in
    this process), the jobs cut into about :data:`CHUNKS_PER_WORKER` chunks per worker.

    ``fn`` must be a module-level function and ``shared`` and the jobs picklable, for the
    worker processes.  Results come back in the order of ``jobs`` whatever order the chunks
    finish in.  ``progress(done, total)`` is called once before any work and after every chunk.
    """
    n_workers = check_workers(workers)
    jobs = list(jobs)
    total = len(jobs)
    if progress:
        progress(0, total)
    size = max(1, math.ceil(total / (CHUNKS_PER_WORKER * n_workers)))
    starts = range(0, total, size)
    results: list[Any] = [None] * total
    done = 0
    if n_workers == 1 or len(starts) <= 1:
        for a in starts:
            results[a:a + size] = _run_chunk(fn, shared, jobs[a:a + size])
            done += len(results[a:a + size])
            if progress:
                progress(done, total)
        return results
    with ProcessPoolExecutor(max_workers=min(n_workers, len(starts))) as pool:
        futures = {pool.submit(_run_chunk, fn, shared, jobs[a:a + size]): a for a in starts}
        for fut in as_completed(futures):
            part = fut.result()
            a = futures[fut]
            results[a:a + len(part)] = part
            done += len(part)
            if progress:
                progress(done, total)
    return results
