"""Compiled kernels for the per-transition loops: a decorator that compiles a plain-Python
function with numba on its first call.

Input: a function written in the subset of Python that numba compiles (scalars, numpy arrays,
loops).  Output: a callable that runs the plain function until the work done through it (the
elements of its first argument, summed over calls) passes :data:`JIT_AFTER`, then compiles it
(``numba.njit(cache=True)``: the machine code is kept in an on-disk cache beside the module, so
a fresh process loads it rather than compiling again) and from then on runs the compiled code.
Importing numba and loading a cached kernel costs about half a second in a fresh process, more
than a short capture's loops take in Python, so a short decode never pays it (and stays as fast
as it was); a long one pays it once.  ``kernel.py_func`` is the plain function, which the tests
run against the compiled one (:meth:`Kernel.compile_now`).

Why numba: the loops are over transitions or bits (a timing loop whose next step depends on the
last, a Viterbi recursion, the alternation cases), which numpy cannot vectorise; numba compiles
exactly this kind of scalar loop over arrays, is a maintained registry package with wheels for
the platforms numpy has, and keeps the code in Python (no build step, no C toolchain).  It is
imported only when a kernel is first called, so importing readchan (and ``readchan --help``)
never loads it.  Compiled code does the same IEEE double operations in the same order as the
Python (no ``fastmath``), so results are bit-identical.

A kernel over *samples* (a whole-signal scan) has a numpy equivalent that runs at numpy's speed
for short captures, so it is compiled later (``kernel(jit_after=SAMPLE_JIT_AFTER)``) and its
caller asks :meth:`Kernel.ready` whether to call it or to take its numpy path; both give the
same values (tests/test_compiled.py).

``READCHAN_NO_JIT=1`` in the environment runs the plain functions (for debugging, or where numba
is not installed; without numba the plain functions run as well).
"""

from __future__ import annotations

import os
from typing import Any, Callable


JIT_AFTER = 250_000
"""Elements (intervals, candidates, ...) a kernel handles in plain Python before it is compiled:
about a quarter of a second of a per-element loop in Python, against about half a second to
import numba and load (or, the first time, a few seconds to compile) the kernel."""


SAMPLE_JIT_AFTER = 6_000_000
"""Samples a sample-scanning kernel leaves to its numpy path before it is compiled: about two
minutes of 48 kHz signal through the detector's two passes, where the numpy path's extra
≈ 70 ns per sample (two detections; scripts/bench_channel.py) has cost about what importing
numba and loading the cached kernel does (≈ 0.45 s)."""


_LOADED = False
"""numba has been imported for some kernel: a sample kernel then compiles (loads its cached
code) at once, since the import, the larger part of the cost, is paid."""


class Kernel:
    """A function compiled once enough work has gone through it; see the module docstring."""

    def __init__(self, fn: Callable[..., Any], jit_after: int | None = None) -> None:
        self.py_func = fn
        self._run: Callable[..., Any] | None = None
        self._work = 0
        self._jit_after = jit_after
        self.__name__ = fn.__name__
        self.__doc__ = fn.__doc__

    def compile_now(self) -> "Kernel":
        """Compile (or load from the cache) now, whatever the work so far."""
        if self._run is None:
            self._run = self._compile()
        return self

    def _compile(self) -> Callable[..., Any]:
        if os.environ.get("READCHAN_NO_JIT") == "1":
            return self.py_func
        try:
            import numba
        except ImportError:          # the plain function gives the same results, only slower
            return self.py_func
        global _LOADED
        _LOADED = True
        return numba.njit(cache=True, nogil=True)(self.py_func)

    @property
    def jit_after(self) -> int:
        """Elements of work run as plain Python (or left to the numpy path) before compiling."""
        return JIT_AFTER if self._jit_after is None else self._jit_after

    @property
    def compiled(self) -> bool:
        """The kernel runs numba-compiled code now."""
        return self._run is not None and self._run is not self.py_func

    def ready(self, work: int) -> bool:
        """Count ``work`` elements and say whether the compiled code runs them (compiling, or
        loading from the cache, once :attr:`jit_after` is passed or numba is loaded for another
        kernel, :data:`_LOADED`); False while the caller should
        take its numpy path instead, and always False without numba or with ``READCHAN_NO_JIT=1``."""
        if self._run is None:
            self._work += int(work)
            if self._work <= self.jit_after and not _LOADED:
                return False
            self._run = self._compile()
        return self.compiled

    def __call__(self, *args: Any) -> Any:
        if self._run is None:
            self._work += int(getattr(args[0], "size", 0)) if args else 0
            if self._work <= self.jit_after:
                return self.py_func(*args)
            self._run = self._compile()
        return self._run(*args)


def kernel(fn: Callable[..., Any] | None = None, *, jit_after: int | None = None) -> Any:
    """Decorate a loop to be compiled with numba once it has done ``jit_after`` elements of work
    (default :data:`JIT_AFTER`; see the module docstring); ``@kernel`` or ``@kernel(jit_after=...)``."""
    if fn is None:
        return lambda f: Kernel(f, jit_after)
    return Kernel(fn, jit_after)
