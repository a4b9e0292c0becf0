"""Captures held in text tables (CSV, TSV, whitespace-separated), as instruments write them.

Input: the path of a text table, its first bytes, and optionally the sample rate in Hz and
whether the first column is time (the rows themselves are parsed by :mod:`readchan.io.text_rows`,
chunk by chunk).  Output: the value columns as float64
``(n_samples, n_channels)``, the sample rate in Hz (given, or fitted to the time column),
the unit and the channel names from the header (see :mod:`readchan.io.capture` for the rules).
"""

from __future__ import annotations

import math
import re
from pathlib import Path
from typing import Sequence

import numpy as np

from readchan.io.checks import MIN_SAMPLES, check_file_rate, default_names, file_error, rates_disagree
from readchan.io.text_rows import _Layout, _line_of_row, _read_table, _split, _Table, is_comment

__all__ = ["SNIFF_BYTES", "TEXT_SUFFIXES", "is_comment", "is_numeric", "load_text", "text_encoding"]


TEXT_SUFFIXES = {".csv", ".txt", ".tsv", ".dat", ".asc"}

SNIFF_BYTES = 1 << 16
"""Leading bytes read to tell audio from text and guess the encoding (our choice)."""

_MAX_LEADING_LINES = 10_000
"""Most lines of comments and metadata before the first data row (a guard, not a tuned figure)."""

_UNIFORM_TOLERANCE = 0.5        # largest time residual allowed, in sample periods

_UNIT_RE = re.compile(r"^(.*?)\s*[\(\[]\s*([^\)\]]*?)\s*[\)\]]\s*$")

_TIME_SUFFIX_RE = re.compile(r"^(?:time|t)[_\s-]?(s|sec|ms|us|µs|μs|ns)$")

_TIME_NAMES = {"t", "s", "sec", "secs", "second", "seconds", "time", "times"}

_TIME_SCALE = {"s": 1.0, "sec": 1.0, "secs": 1.0, "ms": 1e-3, "us": 1e-6,
               "µs": 1e-6, "μs": 1e-6, "ns": 1e-9}


# Column names that are themselves a unit: canonical spelling.
_UNIT_NAMES = {"v": "V", "volt": "V", "volts": "V", "mv": "mV", "uv": "uV", "µv": "µV", "fs": "FS"}


def text_encoding(head: bytes) -> str | None:
    """Guess the encoding of a text file from its first bytes; None if it looks binary."""
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        return "utf-16"
    if head.startswith(b"\xef\xbb\xbf"):
        return "utf-8-sig"
    if b"\x00" in head:
        return None
    try:
        head.decode("utf-8")
        return "utf-8"
    except UnicodeDecodeError as exc:
        if exc.start >= len(head) - 4 and len(head) == SNIFF_BYTES:
            return "utf-8"          # a character cut by the sniff window
        return "latin-1"


def _detect_delimiter(line: str) -> str | None:
    for delim in (";", ",", "\t"):
        if delim in line:
            return delim
    return None


def _strip_trailing_empty(fields: list[str]) -> tuple[list[str], int]:
    n = len(fields)
    while n > 0 and fields[n - 1] == "":
        n -= 1
    return fields[:n], len(fields) - n


def is_numeric(fields: Sequence[str]) -> bool:
    if not fields:
        return False
    try:
        for f in fields:
            float(f)
    except ValueError:
        return False
    return True


def _parse_name(name: str) -> tuple[str, str | None]:
    """Split a header name into (name, unit) for 'CH1 (V)' or 'Volt [mV]'."""
    m = _UNIT_RE.match(name)
    if m and m.group(2):
        return (m.group(1).strip() or m.group(2)), m.group(2)
    return name.strip(), None


def _time_scale(name: str, unit: str | None) -> float | None | str:
    """Seconds per unit of a time-like column; None if not a time name; the unit string if unknown."""
    low = name.strip().lower()
    m = _TIME_SUFFIX_RE.match(low)
    if m:
        return _TIME_SCALE[m.group(1)]
    if unit is not None and unit.strip().lower() in _TIME_SCALE:
        return _TIME_SCALE[unit.strip().lower()]
    if low in _TIME_NAMES or low.startswith("time"):
        if unit is None:
            return 1.0
        return unit
    return None


def _merge_unit_tokens(fields: list[str]) -> list[str]:
    """For whitespace-separated headers: glue '(V)' / '[mV]' tokens onto the name before them."""
    out: list[str] = []
    for f in fields:
        if out and f[:1] in "([" and f[-1:] in ")]":
            out[-1] = f"{out[-1]} {f}"
        else:
            out.append(f)
    return out


def _scan_layout(p: Path, source: str, encoding: str) -> _Layout:
    """Read the leading comment/header lines and the first data row."""
    candidates: list[str] = []
    with open(p, encoding=encoding, newline=None) as fh:
        for lineno, raw in enumerate(fh, start=1):
            if lineno > _MAX_LEADING_LINES:
                raise file_error(source, f"no numeric data in the first {_MAX_LEADING_LINES} lines")
            stripped = raw.strip()
            if not stripped or is_comment(stripped):
                continue
            delim = _detect_delimiter(stripped)
            fields, n_trailing = _strip_trailing_empty(_split(stripped, delim))
            if is_numeric(fields):
                header = None
                if candidates:
                    names, _ = _strip_trailing_empty(_split(candidates[-1], delim))
                    if delim is None:
                        names = _merge_unit_tokens(names)
                    if len(names) == len(fields):
                        header = tuple(names)
                return _Layout(encoding, lineno - 1, lineno, delim, len(fields), n_trailing, header)
            candidates.append(stripped)
    raise file_error(source, "no numeric data found (not a capture table)")


def load_text(p: Path, source: str, head: bytes, rate_hz: float | None,
              time_column: bool | None) -> tuple[np.ndarray, float, str, tuple[str, ...]]:
    """The table ``p``: its value columns (float64, ``(n_samples, n_channels)``), the sample rate
    in Hz, the unit and the channel names.  ``head`` is the file's first bytes (for the
    encoding); ``rate_hz`` and ``time_column`` as :func:`readchan.io.capture.load_capture`."""
    layout = _layout_of(p, source, head)
    names, units = _header_names(layout)
    scale = _header_time_scale(source, names, units, time_column) if layout.header is not None else None
    if scale is None and time_column:
        scale = 1.0

    # column 0 is kept apart when it is, or may turn out to be, time
    split = scale is not None or (layout.header is None and time_column is None and rate_hz is None
                                  and layout.n_fields >= 2)
    data = _read_table(p, source, layout, split)
    n_rows = data.n_rows
    if n_rows < MIN_SAMPLES:
        raise file_error(source, f"holds {n_rows} samples; at least {MIN_SAMPLES} are needed")

    if (layout.header is None and time_column is None and rate_hz is None
            and layout.n_fields >= 2 and bool(np.all(data.first[1:] > data.first[:-1]))):
        scale = 1.0

    if scale is not None:
        rate = _rate_from_time(p, source, layout, data, scale, rate_hz)
        values = data.rest
        value_names, value_units = names[1:], units[1:]
    else:
        if rate_hz is None:
            if layout.n_fields == 1:
                raise file_error(source, "has a single column and no time column; pass rate_hz to give the "
                                         "sample rate")
            raise file_error(source, "has no time column (the first column is not named time and is not "
                                     "increasing); pass rate_hz to give the sample rate")
        rate = rate_hz
        values = data.rest if data.first is None else np.column_stack((data.first, data.rest))
        value_names, value_units = names, units

    channel_names = tuple(n or f"ch{i}" for i, n in enumerate(value_names)) or default_names(values.shape[1])
    return values, rate, _table_units(value_names, value_units), channel_names


def _layout_of(p: Path, source: str, head: bytes) -> _Layout:
    """The table's layout, in the encoding its first bytes suggest (latin-1 when that fails)."""
    encoding = text_encoding(head)
    if encoding is None:
        raise file_error(source, "is a binary file, not a readable audio file or text table")
    try:
        return _scan_layout(p, source, encoding)
    except UnicodeError:
        return _scan_layout(p, source, "latin-1")
    except OSError as exc:
        raise file_error(source, f"cannot read file ({exc.strerror or exc})") from None


def _header_names(layout: _Layout) -> tuple[list[str], list[str | None]]:
    """Each header column's name and unit (empty lists without a header)."""
    names: list[str] = []
    units: list[str | None] = []
    if layout.header is not None:
        for raw_name in layout.header:
            name, unit = _parse_name(raw_name)
            names.append(name)
            units.append(unit)
    return names, units


def _header_time_scale(source: str, names: list[str], units: list[str | None],
                       time_column: bool | None) -> float | None:
    """Seconds per unit of the first column when the header (or ``time_column``) makes it time,
    else None; a time unit that is not understood is an error unless ``time_column`` is False."""
    found = _time_scale(names[0], units[0])
    if isinstance(found, str):
        if time_column is not False:
            raise file_error(source, f"time column unit {found!r} is not understood (expected s, ms, us or ns)")
    elif found is not None and time_column is not False:
        return found
    elif time_column:
        return 1.0
    return None


def _rate_from_time(p: Path, source: str, layout: _Layout, data: _Table, scale: float,
                    rate_hz: float | None) -> float:
    """The sample rate in Hz of a table whose first column is time (``scale`` seconds per unit):
    fitted to it, checked against ``rate_hz`` when given (``rate_hz`` is then used).  The time
    column is scaled in place."""
    if layout.n_fields < 2:
        raise file_error(source, "has a time column but no value columns")
    times = data.first
    times *= (scale or 1.0)
    fitted = _fit_rate(p, source, layout, times)
    if rate_hz is None:
        check_file_rate(source, fitted, f"time column (step {1.0 / fitted:.3g} s) gives")
    if rate_hz is not None and rates_disagree(fitted, rate_hz):
        raise file_error(source, f"time column gives {fitted:.6g} Hz but the given rate is {rate_hz:.6g} Hz "
                                 f"(more than 1 % apart)")
    return rate_hz if rate_hz is not None else fitted


def _table_units(names: Sequence[str], units: Sequence[str | None]) -> str:
    found: list[str] = []
    for name, unit in zip(names, units):
        if unit:
            found.append(unit)
        elif name.strip().lower() in _UNIT_NAMES:
            found.append(_UNIT_NAMES[name.strip().lower()])
        else:
            found.append("V")
    distinct = list(dict.fromkeys(found))
    if not distinct:
        return "V"
    return distinct[0] if len(distinct) == 1 else ",".join(found)


def _fit_rate(p: Path, source: str, layout: _Layout, times: np.ndarray) -> float:
    """Fit t = t0 + i*dt by least squares; require every residual within half a period.  Two
    full-length work arrays besides ``times`` (the same arithmetic, element by element, as
    temporaries would give)."""
    n = times.shape[0]
    di = np.arange(n, dtype=np.float64)
    i_mean = (n - 1) / 2.0
    t_mean = float(times.mean())
    di -= i_mean
    work = np.subtract(times, t_mean)
    dt = float(np.dot(di, work) / np.dot(di, di))
    if not math.isfinite(dt) or dt <= 0.0:
        raise file_error(source, "time column is not increasing")
    residual = np.multiply(di, dt, out=work)
    residual += t_mean
    np.subtract(times, residual, out=residual)
    del di
    worst = int(np.argmax(np.abs(residual, out=residual)))
    if residual[worst] > _UNIFORM_TOLERANCE * dt:
        line = _line_of_row(p, layout, worst)
        raise file_error(source, f"time column is not uniformly sampled (largest deviation "
                                 f"{residual[worst]:.3g} s at row {worst + 1}, line {line})")
    # A single dropped or doubled row can hide inside the residual bound; steps catch it.
    step_error = np.subtract(times[1:], times[:-1], out=work[:n - 1])
    step_error -= dt
    worst = int(np.argmax(np.abs(step_error, out=step_error)))
    if step_error[worst] > _UNIFORM_TOLERANCE * dt:
        line = _line_of_row(p, layout, worst + 1)
        step = float(times[worst + 1] - times[worst])
        raise file_error(source, f"time column is not uniformly sampled (step of {step:.3g} s at row "
                                 f"{worst + 2}, line {line}, where the sample period is {dt:.3g} s)")
    return 1.0 / dt
