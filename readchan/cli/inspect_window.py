"""Which stretch of a capture ``readchan inspect`` measures: ``--window A:B``, ``--read N``, and
the limit on how much it measures and draws at once.

Input: a capture's path, the ``--window`` text, the ``--read`` number, the decode settings and
channels, a progress callback (:data:`readchan.stream.Progress`).
Output: a :class:`Stretch`: the capture cut to the stretch (a :class:`readchan.io.capture.Capture`
whose time 0 is the stretch's start), where it lies in the capture (s), and the read chosen.

* ``--window A:B``: seconds of capture time, ``A:`` to the end, ``:B`` from the start, ``:`` the
  whole capture.  An audio file's stretch is read from the file alone (no whole-capture copy).
* ``--read N``: read N (numbered from 0, as ``readchan decode`` numbers them) in the order it lists them (channel by
  channel, in time order; within the window when one is given), measured with
  :data:`READ_CONTEXT_S` of capture on either side.  The reads of a long audio capture are found
  by :func:`readchan.stream.decode_file` (memory bounded), of others by a whole decode.
* Neither, on a capture longer than :data:`WHOLE_LIMIT_S`: refused (one error line, exit 2), since
  measuring it whole takes several full-length float64 copies of it; ``--window :`` insists.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

from readchan.errors import ParameterError

WHOLE_LIMIT_S = 120.0
"""Longest capture (s) inspect measures whole without a ``--window`` or ``--read``: the length
up to which ``decode`` decodes whole too (:data:`readchan.stream.WHOLE_S`).  A 10-minute 48 kHz
capture measured whole takes over 4 GB."""
READ_CONTEXT_S = 0.5
"""Capture (s) measured on either side of the read ``--read`` chooses: more than the 10 ms that
count a sample as quiet (noise is measured there) and the 0.15 s the conditioning filters take to
settle (:data:`readchan.stream.SETTLE_S`)."""
START_TOLERANCE_S = 2e-3
"""A read found again in its stretch is the chosen one when their starts agree within this."""


@dataclass(frozen=True)
class Stretch:
    """The stretch of a capture inspect measures.

    Attributes
    ----------
    capture : the samples of the stretch (time 0 at ``start_s``).
    start_s, end_s : where the stretch lies in the capture, seconds.
    duration_s : the whole capture's length, seconds.
    read : the ``--read`` number (from 0, decode's numbering), or None.
    read_channel, read_start_s : the chosen read's channel and start (s, stretch time), or None.
    """

    capture: object
    start_s: float
    end_s: float
    duration_s: float
    read: int | None = None
    read_channel: int | None = None
    read_start_s: float | None = None

    @property
    def whole(self) -> bool:
        """The stretch is the whole capture (times are capture times)."""
        return self.start_s == 0.0 and self.end_s >= self.duration_s and self.read is None

    def describe(self) -> str:
        """One line: where the stretch lies; empty for the whole capture."""
        if self.whole:
            return ""
        what = f"read {self.read}: " if self.read is not None else ""
        return (f"{what}{self.start_s:.3f}–{self.end_s:.3f} s of the capture ({self.duration_s:.3f} s); "
                f"times count from {self.start_s:.3f} s")


def parse_window(text: str | None) -> tuple[float, float | None] | None:
    """``(start_s, end_s or None)`` from ``--window A:B`` (``A:``, ``:B``, ``:`` allowed)."""
    if text is None:
        return None
    usage = f"--window takes START:END in seconds of capture time (12.5:20, 300:, :60), was {text!r}"
    if text.count(":") != 1:
        raise ParameterError(usage)
    a_txt, b_txt = (p.strip() for p in text.split(":"))
    try:
        a = float(a_txt) if a_txt else 0.0
        b = float(b_txt) if b_txt else None
    except ValueError:
        raise ParameterError(usage) from None
    if not math.isfinite(a) or (b is not None and not math.isfinite(b)):
        raise ParameterError(f"--window takes finite seconds, was {text!r}")
    if a < 0:
        raise ParameterError(f"--window starts before the capture (at {a:g} s), was {text!r}")
    if b is not None and b <= a:
        raise ParameterError(f"--window must end after it starts, was {text!r}")
    return a, b


def check_read_number(n: int | None) -> None:
    if n is not None and n < 0:
        raise ParameterError(f"--read numbers reads from 0 as decode does, was {n}")


def _span(window, duration_s: float, source: str) -> tuple[float, float]:
    if window is None:
        return 0.0, duration_s
    a, b = window
    if a >= duration_s:
        raise ParameterError(f"--window starts at {a:g} s, past the end of {source} ({duration_s:.3f} s long)")
    if b is not None and b > duration_s:
        raise ParameterError(f"--window ends at {b:g} s, past the end of {source} ({duration_s:.3f} s long); "
                             f"'{a:g}:' runs to the end")
    return a, (duration_s if b is None else b)


def select(path: Path, rate_hz: float | None, settings, channels, window_text: str | None, read: int | None,
           progress=None) -> Stretch:
    """The stretch of the capture at ``path`` to inspect (see the module docstring); raises
    :class:`readchan.errors.ParameterError` for a window or read number that does not fit it."""
    from readchan.io.capture import load_capture

    progress = progress or (lambda f: None)
    window = parse_window(window_text)
    check_read_number(read)
    source = str(path)
    info = _audio(path)
    cap = None
    if info is None:
        cap = load_capture(path, rate_hz=rate_hz)
        duration_s, rate = cap.duration_s, cap.rate_hz
    else:
        duration_s, rate = info.frames / info.rate_hz, info.rate_hz
    a, b = _span(window, duration_s, source)
    if read is None and window is None and duration_s > WHOLE_LIMIT_S:
        raise ParameterError(f"{source} is {duration_s:.1f} s long; inspect measures at most {WHOLE_LIMIT_S:g} s at "
                             f"once: choose a stretch with --window A:B or one read with --read N "
                             f"(--window : measures it whole)")
    if read is None:
        return Stretch(_cut(path, cap, info, a, b, rate, rate_hz), a, b, duration_s)
    reads = _reads(path, cap, info, a, b, rate, settings, channels, progress)
    if read >= len(reads):
        where = "" if window is None else f" in --window {window_text}"
        raise ParameterError(f"--read {read}: {source} holds {len(reads)} read(s){where}"
                             + (f" (N from 0 to {len(reads) - 1})" if reads else ""))
    chosen = reads[read]
    lo = max(a, chosen.start_s - READ_CONTEXT_S)
    hi = min(b, chosen.end_s + READ_CONTEXT_S)
    return Stretch(_cut(path, cap, info, lo, hi, rate), lo, hi, duration_s, read, chosen.channel,
                   chosen.start_s - lo)


def _audio(path: Path):
    """The audio file's :class:`readchan.io.blocks.AudioInfo`, or None for another kind of file."""
    from readchan.errors import CaptureError
    from readchan.io.blocks import audio_info

    if path.suffix.lower() in (".csv", ".txt", ".tsv", ".dat", ".asc", ".vcd"):
        return None
    try:
        return audio_info(path)
    except (CaptureError, OSError, RuntimeError):
        return None


def _cut(path: Path, cap, info, a_s: float, b_s: float, rate_hz: float, rate_given: float | None = None):
    """The capture from ``a_s`` to ``b_s`` (s): read from the audio file alone, or sliced from
    the capture in memory; the whole capture when the stretch is all of it."""
    from readchan.io.capture import Capture, load_capture

    lo, hi = int(round(a_s * rate_hz)), int(round(b_s * rate_hz))
    if info is not None:
        if lo == 0 and hi >= info.frames:
            return load_capture(path, rate_hz=rate_given)
        from readchan.io.blocks import read_span

        return Capture(read_span(path, lo, hi), rate_hz, source=str(path), units="FS")
    if lo == 0 and hi >= cap.n_samples:
        return cap
    return Capture(cap.samples[lo:hi], rate_hz, source=cap.source, units=cap.units, channel_names=cap.channel_names)


def _reads(path: Path, cap, info, a_s: float, b_s: float, rate_hz: float, settings, channels, progress) -> list:
    """The reads of the stretch ``a_s``–``b_s``, in capture time, by channel then time."""
    from readchan.channel import decode_capture

    if info is not None and a_s == 0.0 and b_s >= info.frames / info.rate_hz \
            and info.frames / info.rate_hz > WHOLE_LIMIT_S and _streamable(path, info):
        from readchan.stream import decode_file

        return decode_file(path, settings, channels, progress=lambda f: progress(0.5 * f))
    part = _cut(path, cap, info, a_s, b_s, rate_hz)
    reads = [_Found(r.channel, r.start_s + a_s, r.end_s + a_s)
             for res in decode_capture(part, settings, channels) for r in res.reads]
    progress(0.5)
    return sorted(reads, key=lambda r: (r.channel, r.start_s))


def _streamable(path: Path, info) -> bool:
    """Uncompressed audio whose header the file's size bears out, as ``decode`` streams it
    (:data:`readchan.batch.STREAM_SUBTYPE_BYTES`); others are decoded whole, as there."""
    import os

    from readchan.batch import STREAM_SUBTYPE_BYTES

    width = STREAM_SUBTYPE_BYTES.get(info.subtype)
    return width is not None and info.frames * info.channels * width <= os.path.getsize(path)


@dataclass(frozen=True)
class _Found:
    """Where a read lies (channel, capture time in s)."""

    channel: int
    start_s: float
    end_s: float

