"""Batches: many captures decoded one by one or spread over an executor, results in input order.

Input: capture sources (:mod:`readchan.io.sources`: paths, directories, globs, standard input)
and one :class:`BatchOptions`.
Output: one :class:`CaptureResult` per capture, in input order, each yielded as soon as it and
those before it are done (:func:`decode_many`, :func:`in_order`).

A capture that cannot be decoded (missing, unreadable, ill-formed) gives a result with its
one-line ``error`` and exit code instead of its channels; the others go on.  Any
:class:`concurrent.futures.Executor` will do: a thread pool, a process pool (what
``readchan decode --jobs N`` uses), or a cluster's, such as the one a Dask
``distributed.Client`` gives with ``client.get_executor()``.  The work is the same function of
the same inputs whatever runs it, so the results and their order do not depend on the executor.
"""

from __future__ import annotations

import os
from collections import deque
from concurrent.futures import Executor
from dataclasses import dataclass, replace
from typing import Any, Callable, Iterable, Iterator

from readchan.errors import EXIT_BAD_INPUT, EXIT_INTERNAL, EXIT_INVALID, EXIT_NO_DATA, EXIT_VALID, ReadchanError

__all__ = ["BatchOptions", "CaptureResult", "batch_exit_code", "decode_many", "decode_source", "in_order"]

SEVERITY = (EXIT_INTERNAL, EXIT_BAD_INPUT, EXIT_INVALID, EXIT_VALID, EXIT_NO_DATA)
"""Per-capture exit codes from the most to the least severe: a batch exits with the first of
these that any capture gave (so a capture with no data does not spoil valid reads elsewhere,
as for the channels of one capture)."""


@dataclass(frozen=True)
class BatchOptions:
    """How each capture of a batch is read and decoded.

    Attributes
    ----------
    settings : :class:`readchan.channel.DecodeSettings` (None: the defaults).
    channels : channels to decode, from 0 (None: all).
    rate_hz : sample rate (Hz) for a text table with no time column, or for sampling a VCD
        comparator output.
    signal_name, strobe_name, data_name, strobe_edge : the VCD signals to read
        (:func:`readchan.io.vcd.load_vcd`).
    jobs : processes the stretches of a long streamed capture are decoded in
        (:func:`readchan.stream.decode_file`; the same reads as one process).
    """

    settings: Any = None
    channels: tuple[int, ...] | None = None
    rate_hz: float | None = None
    signal_name: str | None = None
    strobe_name: str | None = None
    data_name: str | None = None
    strobe_edge: str = "falling"
    jobs: int = 1


@dataclass(frozen=True)
class CaptureResult:
    """One capture of a batch.

    Attributes
    ----------
    source : the capture's name as given (``<stdin>`` for standard input).
    channels : its :class:`readchan.results.ChannelResult` s (empty after an error).
    error : the one-line error that stopped it, or None.
    exit_code : this capture's own exit code (:mod:`readchan.errors`).
    duration_s : the capture's length in seconds (None after an error).
    rate_hz : its sample rate (Hz; a VCD: its tick rate), or None.
    timescale_s : a VCD capture's tick (s), else None.
    """

    source: str
    channels: tuple = ()
    error: str | None = None
    exit_code: int = EXIT_NO_DATA
    duration_s: float | None = None
    rate_hz: float | None = None
    timescale_s: float | None = None

    @property
    def reads(self) -> list:
        """Every read of every channel, in channel order."""
        return [r for ch in self.channels for r in ch.reads]


def _load(path: str, opts: BatchOptions, source: str, progress=None):
    """(channel results, duration_s, rate_hz, timescale_s) of the capture at ``path``;
    ``progress`` hears the fraction done of a streamed capture (:func:`_streamed`)."""
    from readchan.channel import DecodeSettings, decode_capture
    from readchan.errors import CaptureError
    from readchan.io.vcd import VcdComparator, is_vcd, load_vcd

    settings = opts.settings if opts.settings is not None else DecodeSettings()
    chans = None if opts.channels is None else list(opts.channels)
    if os.path.isdir(path):
        raise CaptureError(f"{source}: is a directory holding no capture files")
    if is_vcd(path):
        got = load_vcd(path, signal_name=opts.signal_name, strobe_name=opts.strobe_name, data_name=opts.data_name,
                       rate_hz=opts.rate_hz, edge=opts.strobe_edge, source=source)
        if isinstance(got, VcdComparator):
            cap = got.capture
            return decode_capture(cap, settings, chans), cap.duration_s, cap.rate_hz, got.timescale_s
        from readchan.formats.iso7811.strobe import decode_strobe

        if chans not in (None, [0]):
            raise CaptureError(f"{source}: a strobe-and-data capture has one channel (0)")
        return [decode_strobe(got, settings)], got.duration_s, 1.0 / got.timescale_s, got.timescale_s
    from readchan.io.capture import load_capture

    streamed = _streamed(path, settings, chans, source, progress, opts.jobs)
    if streamed is not None:
        return streamed
    cap = load_capture(path, rate_hz=opts.rate_hz)
    if cap.source != source:
        cap = replace(cap, source=source)
    return decode_capture(cap, settings, chans), cap.duration_s, cap.rate_hz, None


STREAM_SUBTYPE_BYTES = {"PCM_U8": 1, "PCM_S8": 1, "PCM_16": 2, "PCM_24": 3, "PCM_32": 4, "FLOAT": 4, "DOUBLE": 8}
"""Uncompressed audio sample types streamed from the file, with their bytes per sample: their
header's length can be checked against the file's size before it is trusted."""


def _streamed(path: str, settings, chans, source: str, progress=None, jobs: int = 1):
    """(channel results, duration_s, rate_hz, None) of an audio capture longer than
    :data:`readchan.stream.WHOLE_S`, decoded span by span from the file (:mod:`readchan.stream`),
    so memory does not grow with its length; None for a shorter capture or one that is not audio.
    Each channel's result holds its reads only (no channel-wide transitions or state).
    ``progress`` (:data:`readchan.stream.Progress`) hears the fraction of the file decoded."""
    from readchan.errors import CaptureError
    from readchan.io.blocks import audio_info
    from readchan.results import streamed_channel_result
    from readchan.stream import WHOLE_S, decode_file

    try:
        info = audio_info(path)
    except CaptureError:
        return None
    if info.frames <= WHOLE_S * info.rate_hz:
        return None
    width = STREAM_SUBTYPE_BYTES.get(info.subtype)
    if width is None or info.frames * info.channels * width > os.path.getsize(path):
        return None     # compressed, or a header claiming more than the file holds: the loader salvages it whole
    reads = [replace(r, source=source) for r in decode_file(path, settings, chans, whole_s=WHOLE_S,
                                                                  progress=progress, jobs=jobs)]
    out = [streamed_channel_result(c, info.rate_hz, tuple(r for r in reads if r.channel == c))
           for c in (range(info.channels) if chans is None else chans)]
    return out, info.frames / info.rate_hz, info.rate_hz, None


def decode_source(src, opts: BatchOptions = BatchOptions(), *, progress=None) -> CaptureResult:
    """Decode one capture (a path or :class:`readchan.io.sources.Stdin`); never raises for a
    bad capture: its error is on the result (an unforeseen one as an internal error, code 4).

    ``progress`` (:data:`readchan.stream.Progress`: the fraction done, 0 to 1, never
    decreasing) is told how far a long streamed capture is; its last call is 1.0, whatever
    the capture and even after an error.  It runs where the decode runs (not across processes)."""
    try:
        return _decode_source(src, opts, progress)
    finally:
        if progress is not None:
            progress(1.0)


def _decode_source(src, opts: BatchOptions, progress) -> CaptureResult:
    from readchan.io.sources import Stdin, stdin_file
    from readchan.report.render import exit_code

    source = str(src) if isinstance(src, Stdin) else os.fspath(src)
    try:
        if isinstance(src, Stdin):
            if not src.data:
                raise _stdin_error("standard input is empty")
            with stdin_file(src) as tmp:
                try:
                    chans, dur, rate, ts = _load(str(tmp), opts, source, progress)
                except ReadchanError as e:
                    raise type(e)(str(e).replace(str(tmp), source)) from None
        else:
            chans, dur, rate, ts = _load(source, opts, source, progress)
    except ReadchanError as e:
        return CaptureResult(source, error=" ".join(str(e).split()), exit_code=e.exit_code)
    except Exception as e:  # noqa: BLE001 - one capture's bug must not stop the batch
        return CaptureResult(source, error=f"internal error: {type(e).__name__}: {e}", exit_code=EXIT_INTERNAL)
    reads = [r for ch in chans for r in ch.reads]
    return CaptureResult(source, tuple(chans), None, exit_code(reads, chans), dur, rate, ts)


def _stdin_error(message: str):
    from readchan.errors import CaptureError
    from readchan.io.sources import STDIN_NAME

    return CaptureError(f"{STDIN_NAME}: {message}")


def batch_exit_code(codes: Iterable[int]) -> int:
    """The batch's exit code: the most severe per-capture code (:data:`SEVERITY`); 3 for none."""
    seen = set(codes)
    return next((c for c in SEVERITY if c in seen), EXIT_NO_DATA)


def in_order(fn: Callable, items: Iterable, executor: Executor | None = None, *, window: int = 32) -> Iterator:
    """``fn(item)`` for each item, yielded in input order, each as soon as it and those before
    it are done.  Without an executor, one after the other here; with one, at most ``window``
    items are in flight at a time (memory stays bounded on a long batch)."""
    if executor is None:
        for item in items:
            yield fn(item)
        return
    pending: deque = deque()
    it = iter(items)
    for item in it:
        pending.append(executor.submit(fn, item))
        if len(pending) >= window:
            yield pending.popleft().result()
    while pending:
        yield pending.popleft().result()


class _Task:
    """``decode_source(item, opts)`` as a picklable callable (for process pools and clusters)."""

    def __init__(self, opts: BatchOptions) -> None:
        self.opts = opts

    def __call__(self, src) -> CaptureResult:
        return decode_source(src, self.opts)


def decode_many(paths, *, executor: Executor | None = None, settings=None, channels: Iterable[int] | None = None,
                rate_hz: float | None = None, signal_name: str | None = None, strobe_name: str | None = None,
                data_name: str | None = None, window: int = 32) -> Iterator[CaptureResult]:
    """Decode many captures; yields one :class:`CaptureResult` per capture in input order.

    ``paths``: a path or an iterable of paths, directories (every capture file below them),
    globs and ``-`` (standard input), expanded as :func:`readchan.io.sources.expand_sources`
    says.  ``executor``: any :class:`concurrent.futures.Executor` (None: one after the other in
    this thread); ``window``: most captures in flight at once.  The other arguments are those of
    :func:`readchan.decode` and :func:`readchan.io.vcd.load_vcd`.  A bad capture gives a result
    with its ``error``; nothing is raised for it.  Warnings are issued where the work runs.
    """
    from readchan.io.sources import expand_sources

    if isinstance(paths, (str, bytes, os.PathLike)):
        paths = [paths]
    opts = BatchOptions(settings, None if channels is None else tuple(int(c) for c in channels), rate_hz,
                        signal_name, strobe_name, data_name)
    if opts.settings is not None:
        from readchan.channel import DecodeSettings
        from readchan.errors import ParameterError

        if not isinstance(opts.settings, DecodeSettings):
            raise ParameterError(f"settings must be a DecodeSettings, was {type(opts.settings).__name__}")
    if isinstance(window, bool) or not isinstance(window, int) or window < 1:
        from readchan.errors import ParameterError

        raise ParameterError(f"window must be a whole number of captures of at least 1, was {window!r}")
    return in_order(_Task(opts), expand_sources(paths), executor, window=window)
