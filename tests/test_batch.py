"""Batches in ``readchan decode``: many paths, directories, globs and standard input; one bad
capture gets its own error line and record while the others go on; JSON Lines; ``--jobs``;
the closing summary; the batch's exit code (the most severe per-capture code)."""

from __future__ import annotations

import io
import json
import shutil
import sys
from pathlib import Path

import pytest

from conftest import run_cli as run
from readchan.batch import batch_exit_code
from readchan.errors import EXIT_BAD_INPUT, EXIT_INTERNAL, EXIT_INVALID, EXIT_NO_DATA, EXIT_VALID

FIXTURES = Path(__file__).resolve().parent.parent / "fixtures"
SCOPE = FIXTURES / "track2-scope.csv"
COMPARATOR = FIXTURES / "track1-comparator.wav"


def _lines(out: str) -> list[dict]:
    return [json.loads(line) for line in out.splitlines()]


@pytest.fixture()
def mixed(tmp_path):
    """Two good captures around a missing one and an unreadable one."""
    bad = tmp_path / "garbage.wav"
    bad.write_bytes(b"RIFF\x00\x00\x00\x00WAVEjunk")
    return [SCOPE, tmp_path / "missing.wav", bad, COMPARATOR]


def test_a_bad_capture_does_not_stop_the_others_and_each_gets_its_own_record(monkeypatch, capsys, mixed):
    code, out, err = run(monkeypatch, capsys, "decode", "--jsonl", *mixed)
    records = _lines(out)
    assert [r["source"] for r in records] == [str(p) for p in mixed]
    assert [r["error"] is None for r in records] == [True, False, False, True]
    assert all(r["reads"] and r["reads"][0]["valid"] for r in (records[0], records[3]))
    assert records[1]["reads"] == [] and "no such file" in records[1]["error"]
    errors = [line for line in err.splitlines() if line.startswith("readchan: error:")]
    assert len(errors) == 2 and "missing.wav" in errors[0] and "garbage.wav" in errors[1]
    assert code == EXIT_BAD_INPUT


def test_text_output_goes_on_after_a_bad_capture(monkeypatch, capsys, mixed):
    code, out, _ = run(monkeypatch, capsys, "decode", *mixed)
    assert code == EXIT_BAD_INPUT
    assert out.index(SCOPE.name) < out.index(COMPARATOR.name)


def test_json_keeps_its_one_object_with_the_good_captures_reads(monkeypatch, capsys, mixed):
    code, out, _ = run(monkeypatch, capsys, "decode", "--json", *mixed)
    doc = json.loads(out)
    assert set(doc) == {"schema", "reads", "channels"}
    assert [r["source"] for r in doc["reads"]] == [str(SCOPE), str(COMPARATOR)]
    assert code == EXIT_BAD_INPUT


def test_every_json_line_parses_alone_and_carries_source_reads_error_and_channels(monkeypatch, capsys):
    _, out, _ = run(monkeypatch, capsys, "decode", "--jsonl", SCOPE, COMPARATOR)
    lines = out.splitlines()
    assert len(lines) == 2
    for line in lines:
        rec = json.loads(line)
        assert {"source", "reads", "error", "channels", "exit_code", "schema"} <= set(rec)
        assert rec["schema"] == "readchan.decode-line/1" and rec["exit_code"] == EXIT_VALID


def test_a_directory_stands_for_every_capture_below_it_in_path_order(monkeypatch, capsys, tmp_path):
    (tmp_path / "b" / "deep").mkdir(parents=True)
    shutil.copy(SCOPE, tmp_path / "b" / "deep" / "scope.csv")
    shutil.copy(COMPARATOR, tmp_path / "a.wav")
    (tmp_path / "notes.md").write_text("not a capture")
    _, out, _ = run(monkeypatch, capsys, "decode", "--jsonl", tmp_path)
    assert [Path(r["source"]).relative_to(tmp_path).as_posix() for r in _lines(out)] == ["a.wav", "b/deep/scope.csv"]


def test_a_quoted_glob_is_expanded_in_sorted_order(monkeypatch, capsys):
    _, out, _ = run(monkeypatch, capsys, "decode", "--jsonl", str(FIXTURES / "track1-*.wav"))
    assert [Path(r["source"]).name for r in _lines(out)] == ["track1-comparator.wav", "track1-two-swipes.wav"]


def test_a_glob_that_matches_nothing_is_one_error(monkeypatch, capsys, tmp_path):
    code, _, err = run(monkeypatch, capsys, "decode", str(tmp_path / "*.wav"))
    assert code == EXIT_BAD_INPUT and err.count("readchan: error:") == 1


class _Stdin:
    def __init__(self, data: bytes) -> None:
        self.buffer = io.BytesIO(data)


@pytest.mark.parametrize("fixture", [SCOPE, COMPARATOR, FIXTURES / "track2-reverse-noisy.flac"])
def test_standard_input_is_read_as_audio_by_content_or_as_a_table(monkeypatch, capsys, fixture):
    monkeypatch.setattr(sys, "stdin", _Stdin(fixture.read_bytes()))
    code, out, _ = run(monkeypatch, capsys, "decode", "--jsonl", "-")
    (rec,) = _lines(out)
    _, direct, _ = run(monkeypatch, capsys, "decode", "--jsonl", fixture)
    assert rec["source"] == "<stdin>" and code == EXIT_VALID
    assert [r["text"] for r in rec["reads"]] == [r["text"] for r in _lines(direct)[0]["reads"]]


def test_empty_standard_input_is_one_error(monkeypatch, capsys):
    monkeypatch.setattr(sys, "stdin", _Stdin(b""))
    code, _, err = run(monkeypatch, capsys, "decode", "-")
    assert code == EXIT_BAD_INPUT and err.strip() == "readchan: error: <stdin>: standard input is empty"


def test_jobs_give_the_same_lines_in_the_same_order(monkeypatch, capsys, mixed):
    _, one, _ = run(monkeypatch, capsys, "decode", "--jsonl", *mixed)
    code, two, _ = run(monkeypatch, capsys, "decode", "--jsonl", "--jobs", "2", *mixed)
    assert two == one and code == EXIT_BAD_INPUT


def test_the_closing_summary_counts_the_batch(monkeypatch, capsys, mixed, tmp_path):
    quiet = tmp_path / "quiet.csv"
    quiet.write_text("time_s,v\n" + "".join(f"{i * 1e-4},0\n" for i in range(200)))
    _, _, err = run(monkeypatch, capsys, "decode", "--jsonl", *mixed, quiet)
    header = next(line for line in err.splitlines() if "captures" in line and "reads" in line)
    row = err.splitlines()[err.splitlines().index(header) + 2]
    cells = [c.strip() for c in row.strip("│ ").split("│")]
    assert cells[:6] == ["5", "2", "2", "0", "1", "2"]     # captures, reads, valid, invalid, no data, errors
    assert "duration s" in header and "time s" in header


def test_one_capture_has_no_summary(monkeypatch, capsys):
    _, _, err = run(monkeypatch, capsys, "decode", SCOPE)
    assert err == ""


def test_json_and_jsonl_together_are_refused(monkeypatch, capsys):
    code, _, err = run(monkeypatch, capsys, "decode", "--json", "--jsonl", SCOPE)
    assert code == EXIT_BAD_INPUT and "not both" in err


@pytest.mark.parametrize("codes, expected", [
    ([EXIT_VALID, EXIT_NO_DATA], EXIT_VALID),            # no data elsewhere does not spoil valid reads
    ([EXIT_NO_DATA, EXIT_NO_DATA], EXIT_NO_DATA),
    ([EXIT_VALID, EXIT_INVALID, EXIT_NO_DATA], EXIT_INVALID),
    ([EXIT_INVALID, EXIT_BAD_INPUT], EXIT_BAD_INPUT),
    ([EXIT_BAD_INPUT, EXIT_INTERNAL, EXIT_VALID], EXIT_INTERNAL),
    ([], EXIT_NO_DATA),
])
def test_the_batch_exits_with_its_most_severe_capture_code(codes, expected):
    assert batch_exit_code(codes) == expected


def test_each_json_line_is_out_before_the_next_capture_is_decoded(monkeypatch, capsys):
    import readchan.cli.batch as cli_batch

    buf = io.StringIO()
    seen = []
    real = cli_batch.decode_source

    def spy(src, opts, **kw):
        seen.append(buf.getvalue().count("\n"))          # lines already written when this capture starts
        return real(src, opts, **kw)

    monkeypatch.setattr(cli_batch, "decode_source", spy)
    monkeypatch.setattr(sys, "stdout", buf)
    run(monkeypatch, capsys, "decode", "--jsonl", SCOPE, COMPARATOR, SCOPE)
    assert seen == [0, 1, 2] and buf.getvalue().count("\n") == 3


def test_a_workers_warnings_reach_stderr_as_one_line_each(monkeypatch, capsys, tmp_path):
    import numpy as np
    import soundfile as sf

    whole = tmp_path / "whole.wav"
    sf.write(whole, np.zeros(48_000), 48_000, subtype="PCM_16")
    cut = tmp_path / "cut.wav"
    cut.write_bytes(whole.read_bytes()[:50_000])          # the header still declares 96,000 bytes
    _, _, err = run(monkeypatch, capsys, "decode", "--jsonl", "--jobs", "2", cut, SCOPE)
    warnings = [line for line in err.splitlines() if line.startswith("readchan: warning:")]
    assert len(warnings) == 1 and "truncated" in warnings[0]
