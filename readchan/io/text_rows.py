"""The data rows of a text table: parsed chunk by chunk into preallocated float64 arrays, and
the first ill-formed row described when numpy refuses them.

Input: the table's path and its :class:`_Layout` (encoding, lines before the data, delimiter,
fields per row), found by :mod:`readchan.io.text`.
Output: the value columns (:class:`_Table`: float64, column 0 apart when it may be time), or a
:class:`readchan.errors.CaptureError` naming the first bad row.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Iterator

import numpy as np

from readchan.errors import CaptureError
from readchan.io.checks import file_error, show_excerpt

_COMMENT_PREFIXES = ("#", ";", "%", "//")


def is_comment(stripped: str) -> bool:
    return stripped.startswith(_COMMENT_PREFIXES)


def _split(line: str, delim: str | None) -> list[str]:
    fields = [f.strip().strip('"').strip("'").strip() for f in line.strip().split(delim)]
    return fields


@dataclass(frozen=True)
class _Layout:
    encoding: str
    skip_lines: int            # physical lines before the first data row
    first_data_line: int       # 1-based line number of the first data row
    delimiter: str | None
    n_fields: int              # real (non-empty) fields per row
    n_trailing: int            # empty trailing fields per row
    header: tuple[str, ...] | None


def _iter_data_lines(p: Path, layout: _Layout) -> Iterator[tuple[int, str]]:
    """Yield (line number, content) for every data row, comments and blank lines left out."""
    with open(p, encoding=layout.encoding, newline=None, errors="replace") as fh:
        for lineno, raw in enumerate(fh, start=1):
            if lineno <= layout.skip_lines:
                continue
            stripped = raw.strip()
            if not stripped or is_comment(stripped):
                continue
            stripped = stripped.split("#", 1)[0].strip()
            if stripped:
                yield lineno, stripped


def _diagnose(p: Path, source: str, layout: _Layout) -> CaptureError:
    """Find the first ill-formed row of a table that numpy refused, and describe it."""
    expected = layout.n_fields + layout.n_trailing
    for lineno, line in _iter_data_lines(p, layout):
        fields = _split(line, layout.delimiter)
        if len(fields) != expected:
            return file_error(source, f"line {lineno} has {len(fields)} fields, expected {expected} "
                                      f"like line {layout.first_data_line}")
        for col, text in enumerate(fields[:layout.n_fields], start=1):
            if text == "":
                return file_error(source, f"line {lineno} has an empty value in column {col}")
            try:
                value = float(text)
            except ValueError:
                return file_error(source, f"line {lineno}, column {col}: {show_excerpt(text)} is not a number")
            if not math.isfinite(value):
                return file_error(source, f"line {lineno}, column {col}: value {show_excerpt(text)} is not finite")
        if any(f != "" for f in fields[layout.n_fields:]):
            return file_error(source, f"line {lineno} has more values than line {layout.first_data_line}")
    return file_error(source, "table could not be parsed as numbers")


def _line_of_row(p: Path, layout: _Layout, row: int) -> int:
    for k, (lineno, _) in enumerate(_iter_data_lines(p, layout)):
        if k == row:
            return lineno
    return -1


CHUNK_CHARS = 1 << 22
"""Text parsed at a time, characters (whole lines of about 4 MB: ``readlines`` hint): each chunk
is parsed by numpy's C reader and copied into the preallocated result, so a table costs its
samples plus a chunk, not several full-length copies, however wide its rows."""


@dataclass
class _Table:
    """The parsed value columns: ``first`` (column 0, 1-D) and ``rest`` (the others) when the
    first column may be time, else ``first`` None and ``rest`` every column."""

    first: np.ndarray | None
    rest: np.ndarray

    @property
    def n_rows(self) -> int:
        return self.rest.shape[0]


class _Failed(Exception):
    """An attempt at parsing failed as numpy's ``ValueError`` says (the next attempt, then the
    diagnosis, follow)."""


def _count_lines(p: Path) -> int:
    """The file's lines, counted by their ``\\n`` (binary read, 16 MB at a time), or by their
    ``\\r`` in a file with none (old Mac line ends): a first guess at the rows, which the parse
    grows past when it falls short."""
    counts = {b"\n": 0, b"\r": 0}
    for end in counts:
        with open(p, "rb") as fh:
            while block := fh.read(1 << 24):
                counts[end] += block.count(end)
        if counts[end]:
            break
    return max(counts.values()) + 1


def _grow(a: np.ndarray, rows: int) -> np.ndarray:
    out = np.empty((rows,) + a.shape[1:], a.dtype)
    out[:a.shape[0]] = a
    return out


def _parse_chunks(p: Path, layout: _Layout, encoding: str, attempt: dict, converters, split: bool,
                  capacity: int) -> tuple[_Table | None, bool]:
    """One attempt over the whole table, :data:`CHUNK_CHARS` characters of whole lines at a time: the
    table (None when its column count is not the layout's), and whether every value is finite.
    Raises :class:`_Failed` where ``np.loadtxt`` on the whole file raises ``ValueError``."""
    import itertools
    import warnings

    width = layout.n_fields + layout.n_trailing
    first = np.empty(capacity) if split else None
    rest = np.empty((capacity, layout.n_fields - 1 if split else layout.n_fields))
    row, columns, finite = 0, None, True
    with open(p, encoding=encoding, newline=None) as fh:
        for _ in itertools.islice(fh, layout.skip_lines):
            pass
        while lines := fh.readlines(CHUNK_CHARS):
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", UserWarning)       # a chunk of only comments
                try:
                    c = np.loadtxt(lines, delimiter=layout.delimiter, ndmin=2, dtype=np.float64,
                                   converters=converters, **attempt)
                except (ValueError, IndexError):
                    raise _Failed from None
            if c.size == 0:
                continue
            if columns is None:
                columns = c.shape[1]
            elif c.shape[1] != columns:
                raise _Failed           # the column count changed within the table
            if columns != width:
                continue                # parsed on to find any row numpy refuses; diagnosed after
            finite = finite and bool(np.isfinite(c).all())
            m = c.shape[0]
            if row + m > rest.shape[0]:
                need = max(2 * rest.shape[0], row + m)
                rest = _grow(rest, need)
                first = _grow(first, need) if split else None
            if split:
                first[row:row + m] = c[:, 0]
                rest[row:row + m] = c[:, 1:layout.n_fields]
            else:
                rest[row:row + m] = c[:, :layout.n_fields]
            row += m
    if columns != width:
        return None, finite
    return _Table(None if first is None else first[:row], rest[:row]), finite


def _read_table(p: Path, source: str, layout: _Layout, split: bool) -> _Table:
    """Parse the data rows with numpy (vectorised, chunk by chunk); describe the first bad row
    on failure.  ``split``: keep column 0 apart (it may be time)."""
    converters = None
    if layout.n_trailing:
        # Trailing delimiters: the extra fields must be empty; anything else marks the row.
        def empty_field(text: str) -> float:
            return 0.0 if not text.strip() else math.nan
        converters = {layout.n_fields + j: empty_field for j in range(layout.n_trailing)}
    attempts = (
        dict(comments="#", quotechar='"'),
        dict(comments=["#", "//", "%"] + ([";"] if layout.delimiter != ";" else []), quotechar=None),
    )
    try:
        capacity = max(1, _count_lines(p) - layout.skip_lines)
    except OSError as exc:
        raise file_error(source, f"cannot read file ({exc.strerror or exc})") from None
    parsed = None
    encoding = layout.encoding
    for attempt in attempts:
        for enc in (encoding, "latin-1"):
            try:
                parsed = _parse_chunks(p, layout, enc, attempt, converters, split, capacity)
                break
            except UnicodeError:
                if enc == "latin-1":
                    raise file_error(source, "cannot decode the text") from None
                encoding = "latin-1"
                continue
            except _Failed:
                break
            except OSError as exc:
                raise file_error(source, f"cannot read file ({exc.strerror or exc})") from None
        if parsed is not None:
            break
    layout = _Layout(encoding, layout.skip_lines, layout.first_data_line, layout.delimiter,
                     layout.n_fields, layout.n_trailing, layout.header)
    if parsed is None or parsed[0] is None or not parsed[1]:
        raise _diagnose(p, source, layout)
    return parsed[0]
