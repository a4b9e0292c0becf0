"""The progress bar (:mod:`readchan.cli.progress`): drawn on stderr only, only on a terminal, not
with ``--quiet``; standard output is the same with or without it; the progress a long streamed
capture reports never goes back and ends at 1.0.

The long capture is a short synthesized one (invented card) with the streaming threshold
lowered (:data:`readchan.stream.WHOLE_S`), as tests/test_stream_cli.py does.  No test reads a
clock: the bar's delay is set to 0 where it must show."""

from __future__ import annotations

import io
import json

import pytest
from rich.console import Console

from readchan.batch import BatchOptions, decode_source
from readchan.cli.progress import ProgressBar

from tests.conftest import run_cli, write_track2_swipes

BAR = "━"                                             # the glyph rich draws its bars with


@pytest.fixture(scope="module")
def long_capture(tmp_path_factory):
    """Six track 2 swipes 1.5 s apart (about 12 s), decoded streamed once WHOLE_S is lowered."""
    path = tmp_path_factory.mktemp("progress") / "rig-shift.wav"
    write_track2_swipes(path)
    return path


def _terminal() -> tuple[Console, io.StringIO]:
    buf = io.StringIO()
    return Console(file=buf, force_terminal=True, width=100), buf


def test_a_long_streamed_capture_reports_progress_that_never_decreases_and_ends_at_one(long_capture, monkeypatch):
    monkeypatch.setattr("readchan.stream.WHOLE_S", 5.0)
    seen: list[float] = []
    res = decode_source(str(long_capture), BatchOptions(), progress=seen.append)
    assert res.error is None and len(res.reads) == 6
    assert all(b >= a for a, b in zip(seen, seen[1:]))
    assert all(0.0 <= f <= 1.0 for f in seen) and seen[-1] == 1.0
    assert len({f for f in seen if 0.0 < f < 1.0}) >= 3        # it moved along the way, not only at the end


def test_a_capture_that_fails_still_ends_its_progress_at_one(tmp_path):
    seen: list[float] = []
    res = decode_source(str(tmp_path / "missing.wav"), BatchOptions(), progress=seen.append)
    assert res.error is not None and seen == [1.0]


def test_the_bar_adds_the_capture_under_way_to_the_captures_done():
    console, _ = _terminal()
    bar = ProgressBar(4, console, delay_s=0)
    bar.done(2)
    bar.part(2)(0.5)
    assert bar.value == 2.5
    bar.part(1)(0.25)                   # an earlier capture's late report does not move it back
    assert bar.value == 2.5


def test_the_bar_draws_on_a_terminal_console():
    console, buf = _terminal()
    with ProgressBar(3, console, description="decoding", delay_s=0) as bar:
        bar.done(1)
        console.file.flush()
    assert "decoding" in buf.getvalue() and BAR in buf.getvalue()


def test_the_bar_draws_nothing_when_the_console_is_not_a_terminal():
    buf = io.StringIO()
    with ProgressBar(3, Console(file=buf, force_terminal=False), delay_s=0) as bar:
        bar.done(1)
        bar.part(1)(0.5)
    assert buf.getvalue() == "" and not bar.enabled


def test_quiet_draws_nothing_on_a_terminal():
    console, buf = _terminal()
    with ProgressBar(3, console, quiet=True, delay_s=0) as bar:
        bar.done(2)
    assert buf.getvalue() == ""


def test_work_shorter_than_the_delay_draws_nothing():
    console, buf = _terminal()
    with ProgressBar(3, console, delay_s=3600.0) as bar:
        bar.done(3)
    assert buf.getvalue() == ""


def test_decode_prints_nothing_progress_like_on_a_stderr_that_is_not_a_terminal(long_capture, monkeypatch, capsys):
    monkeypatch.setattr("readchan.stream.WHOLE_S", 5.0)
    monkeypatch.setattr("readchan.cli.progress.DELAY_S", 0.0)
    code, out, err = run_cli(monkeypatch, capsys, "decode", long_capture, "--json")
    assert code == 0 and len(json.loads(out)["reads"]) == 6
    assert BAR not in err and "%" not in err and "decoding" not in err
    code_q, out_q, _ = run_cli(monkeypatch, capsys, "decode", long_capture, "--json", "--quiet")
    assert code_q == code and out_q == out


def _terminal_stderr(monkeypatch) -> io.StringIO:
    """The command line's stderr console replaced by a terminal one writing into a buffer."""
    console, buf = _terminal()
    monkeypatch.setattr("readchan.cli.batch.err", console)
    monkeypatch.setattr("readchan.cli.inspect.err", console)
    monkeypatch.setattr("readchan.cli.progress.DELAY_S", 0.0)
    return buf


def test_decode_draws_the_bar_on_a_terminal_stderr_and_keeps_stdout_exact(long_capture, monkeypatch, capsys):
    monkeypatch.setattr("readchan.stream.WHOLE_S", 5.0)
    buf = _terminal_stderr(monkeypatch)
    code, out, err = run_cli(monkeypatch, capsys, "decode", long_capture, "--json")
    assert code == 0 and BAR in buf.getvalue() and "decoding" in buf.getvalue()
    assert BAR not in out and json.loads(out)["schema"] == "readchan.decode/1"


def test_quiet_turns_the_decode_bar_off_on_a_terminal(long_capture, monkeypatch, capsys):
    monkeypatch.setattr("readchan.stream.WHOLE_S", 5.0)
    buf = _terminal_stderr(monkeypatch)
    code, out, _ = run_cli(monkeypatch, capsys, "decode", long_capture, "--json", "--quiet")
    assert code == 0 and buf.getvalue() == "" and len(json.loads(out)["reads"]) == 6


def test_a_batch_in_text_keeps_every_capture_s_output_whole_with_the_bar_up(long_capture, monkeypatch, capsys):
    buf = _terminal_stderr(monkeypatch)
    code, out, _ = run_cli(monkeypatch, capsys, "decode", long_capture, long_capture)
    code_q, out_q, _ = run_cli(monkeypatch, capsys, "decode", long_capture, long_capture, "--quiet")
    assert code == code_q == 0 and out == out_q and BAR in buf.getvalue()


def test_inspect_draws_its_bar_on_stderr_only_and_quiet_turns_it_off(long_capture, monkeypatch, capsys):
    buf = _terminal_stderr(monkeypatch)
    code, out, _ = run_cli(monkeypatch, capsys, "inspect", long_capture, "--read", "2", "--json")
    assert code == 0 and "inspecting" in buf.getvalue() and BAR not in out
    assert len(json.loads(out)["reads"]) == 1
    buf.truncate(0)
    buf.seek(0)
    run_cli(monkeypatch, capsys, "inspect", long_capture, "--read", "2", "--json", "--quiet")
    assert buf.getvalue() == ""


def test_the_bar_is_down_while_text_goes_to_a_terminal_stdout_and_back_after():
    console, _ = _terminal()
    with ProgressBar(3, console, delay_s=0, pause=True) as bar:
        with bar.paused():
            assert not bar._bar.live.is_started           # nothing live while the text is written
        assert bar._bar.live.is_started                   # and up again after, the work not done
        bar.done(3)
        with bar.paused():
            pass
        assert not bar._bar.live.is_started               # all done: not put back


def test_the_bar_stays_up_when_stdout_is_not_a_terminal():
    console, _ = _terminal()
    with ProgressBar(3, console, delay_s=0, pause=False) as bar:
        with bar.paused():
            assert bar._bar.live.is_started
