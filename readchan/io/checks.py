"""Checks shared by loading and writing captures: one-line errors that name the file, printable
file names, sample-rate and finiteness checks, and the limits on what a capture may hold.

Input: values the user gave (paths, rates, sample arrays).  Output: the checked values, or a
one-line :class:`~readchan.errors.CaptureError` / :class:`~readchan.errors.ParameterError`.
"""

from __future__ import annotations

import math
import os

import numpy as np

from readchan.errors import CaptureError, ParameterError


#: Fewest samples a loaded capture may hold.
MIN_SAMPLES = 16


#: Most sample values (samples × channels) a loaded capture may hold: 2 GB as float64, about
#: 87 minutes of a 48 kHz mono capture.  A header that declares more is not believed before the
#: data are there: the samples are read in blocks and loading stops with an error at the limit.
MAX_SAMPLES = 250_000_000


#: Sample rates readchan decodes, in Hz (inclusive).  Below 100 Hz not even the baseline
#: high-pass (20 Hz) fits under Nyquist; above 1 GHz a card swipe (tens of milliseconds)
#: would be 10⁷ samples per bit cell, and the filters lose their numerical precision.
RATE_RANGE_HZ = (100.0, 1e9)


RATE_TOLERANCE = 0.01          # relative disagreement allowed between two rates


def one_line(text: str) -> str:
    return " ".join(str(text).split())


def display_path(path: str | os.PathLike | bytes) -> str:
    """A file name as it can be printed: bytes that are not UTF-8 (held by Python as lone
    surrogates) are shown as ``\\xe9`` escapes instead of breaking the output."""
    if isinstance(path, bytes):
        raw = path
    else:
        raw = os.fsencode(os.fspath(path)) if isinstance(path, os.PathLike) else str(path).encode(
            "utf-8", "surrogateescape")
    return raw.decode("utf-8", "backslashreplace")


def file_error(source: str, problem: str) -> CaptureError:
    return CaptureError(one_line(f"{display_path(source)}: {problem}"))


def show_excerpt(text: str, limit: int = 40) -> str:
    """Quote a piece of the user's file for a message, shortened to one line."""
    text = one_line(text)
    if len(text) > limit:
        text = text[: limit - 3] + "..."
    return repr(text)


def check_rate(rate_hz: object, what: str = "rate_hz") -> float:
    if isinstance(rate_hz, bool):
        raise ParameterError(f"{what} must be a number of hertz, not {rate_hz!r}")
    try:
        rate = float(rate_hz)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        raise ParameterError(one_line(f"{what} must be a number of hertz, not {rate_hz!r}")) from None
    if not math.isfinite(rate) or rate <= 0.0:
        raise ParameterError(f"{what} must be finite and > 0 Hz, got {rate!r}")
    return rate


def check_rate_range(rate_hz: float, what: str = "sample rate") -> float:
    """Return ``rate_hz`` if readchan can decode at it (:data:`RATE_RANGE_HZ`), else raise
    :class:`~readchan.errors.ParameterError` naming the range."""
    rate = check_rate(rate_hz, what)
    lo, hi = RATE_RANGE_HZ
    if not lo <= rate <= hi:
        raise ParameterError(f"{what} must be between {lo:g} Hz and {hi:g} Hz, was {rate:g} Hz")
    return rate


def check_file_rate(source: str, rate_hz: float, how: str) -> None:
    lo, hi = RATE_RANGE_HZ
    if not lo <= rate_hz <= hi:
        raise file_error(source, f"{how} a sample rate of {rate_hz:.6g} Hz; readchan decodes {lo:g} Hz to {hi:g} Hz")


def default_names(n: int) -> tuple[str, ...]:
    return tuple(f"ch{i}" for i in range(n))


def first_nonfinite(samples: np.ndarray) -> tuple[int, int] | None:
    bad = ~np.isfinite(samples)
    if not bad.any():
        return None
    row, col = np.argwhere(bad)[0]
    return int(row), int(col)


def rates_disagree(a: float, b: float) -> bool:
    return abs(a - b) > RATE_TOLERANCE * b
