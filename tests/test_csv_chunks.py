"""A text table is parsed chunk by chunk (:mod:`readchan.io.text_rows`): whatever the chunk size,
the samples are those numpy's own reader gives for the whole file, bit for bit, and a bad row in
any chunk is named by its line.

Reference: ``numpy.loadtxt`` over the whole file, and ``numpy.polyfit`` for the sample rate (the
least-squares slope of time against row index).  Data invented (Gaussian noise at 1 MHz)."""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from readchan.errors import CaptureError
from readchan.io import text_rows
from readchan.io.capture import load_capture

ROWS = 1000


def _table(path, newline="\n", comment_every=None, header="Time (s),CH1 (V),CH2 (V)"):
    rng = np.random.default_rng(3)
    data = np.column_stack([np.arange(ROWS) / 1e6, rng.normal(0.0, 0.1, (ROWS, 2))])
    lines = [header] + [f"{a:.7e},{b:.7e},{c:.7e}" for a, b, c in data]
    if comment_every:
        lines = [ln for k, row in enumerate(lines) for ln in ((row, "# marker") if k % comment_every == 0 else (row,))]
    path.write_bytes((newline.join(lines) + newline).encode())
    return path


@pytest.mark.parametrize("chunk", [1, 50, 1000, 1 << 22])
@pytest.mark.parametrize("newline", ["\n", "\r\n", "\r"])
def test_chunked_samples_are_numpy_s_whole_file_parse_bit_for_bit(tmp_path, monkeypatch, chunk, newline):
    path = _table(tmp_path / "scope.csv", newline)
    want = np.loadtxt(path, delimiter=",", skiprows=1)
    monkeypatch.setattr(text_rows, "CHUNK_CHARS", chunk)
    cap = load_capture(path)
    assert cap.samples.shape == (ROWS, 2)
    assert np.array_equal(cap.samples, want[:, 1:]) and cap.channel_names == ("CH1", "CH2")


def test_comment_lines_between_chunks_are_skipped_without_a_warning(tmp_path, monkeypatch):
    path = _table(tmp_path / "marked.csv", comment_every=5)
    want = np.loadtxt(path, delimiter=",", skiprows=1, comments="#")
    monkeypatch.setattr(text_rows, "CHUNK_CHARS", 9)       # some chunks hold only a comment
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        cap = load_capture(path)
    assert np.array_equal(cap.samples, want[:, 1:])


def test_the_rate_is_the_least_squares_slope_of_the_time_column(tmp_path, monkeypatch):
    path = _table(tmp_path / "scope.csv")
    t = np.loadtxt(path, delimiter=",", skiprows=1)[:, 0]
    slope = np.polyfit(np.arange(t.size), t, 1)[0]
    monkeypatch.setattr(text_rows, "CHUNK_CHARS", 7)
    assert load_capture(path).rate_hz == pytest.approx(1.0 / slope, rel=1e-12)


@pytest.mark.parametrize("bad,needle", [
    ("1.0e-4,abc,0.1", "line 702, column 2: 'abc' is not a number"),
    ("1.0e-4,0.1", "line 702 has 2 fields, expected 3 like line 2"),
    ("nan,0.1,0.1", "line 702, column 1: value 'nan' is not finite"),
])
def test_a_bad_row_in_a_later_chunk_is_named_by_its_line(tmp_path, monkeypatch, bad, needle):
    path = _table(tmp_path / "scope.csv")
    lines = path.read_text().splitlines()
    lines[701] = bad                                      # line 702 of the file
    path.write_text("\n".join(lines) + "\n")
    monkeypatch.setattr(text_rows, "CHUNK_CHARS", 3000)
    with pytest.raises(CaptureError, match=needle):
        load_capture(path)


def test_a_table_with_more_rows_than_lines_counted_still_loads(tmp_path, monkeypatch):
    # the capacity is only a first guess: an undercount grows the arrays
    path = _table(tmp_path / "scope.csv")
    monkeypatch.setattr(text_rows, "_count_lines", lambda p: 10)
    monkeypatch.setattr(text_rows, "CHUNK_CHARS", 5000)
    want = np.loadtxt(path, delimiter=",", skiprows=1)
    assert np.array_equal(load_capture(path).samples, want[:, 1:])
