"""The user's files are safe: one atomic writer for captures, plots and sweep curves."""

from __future__ import annotations

import os
import signal
import stat
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from conftest import run_cli as run
from readchan.io.atomic import atomic_output, check_output_path
from readchan.io.write import write_capture
from readchan.errors import EXIT_BAD_INPUT, CaptureError, OutputError

FIXTURES = Path(__file__).resolve().parent.parent / "fixtures"
ROOT = Path(__file__).resolve().parent.parent


def _one_line_error(code, err):
    lines = [l for l in err.splitlines() if l.strip()]
    return code == EXIT_BAD_INPUT and len(lines) == 1 and lines[0].startswith("readchan: error:")


def _special(tmp_path: Path, kind: str) -> Path:
    p = tmp_path / f"special-{kind}.wav"
    if kind == "fifo":
        os.mkfifo(p)
    else:                                   # a character device like /dev/null (1, 3), made in tmp
        try:
            os.mknod(p, stat.S_IFCHR | 0o600, os.makedev(1, 3))
        except PermissionError:
            pytest.skip("creating a device node needs privileges")
    return p


@pytest.mark.parametrize("force", [False, True])
@pytest.mark.parametrize("kind", ["fifo", "device"])
def test_synth_never_replaces_a_fifo_or_a_device(monkeypatch, capsys, tmp_path, kind, force):
    target = _special(tmp_path, kind)
    mode = os.lstat(target).st_mode
    code, _, err = run(monkeypatch, capsys, "synth", target, "--track2", ";123?", *(["--force"] if force else []))
    assert _one_line_error(code, err) and "not a regular file" in err
    assert os.lstat(target).st_mode == mode and sorted(os.listdir(tmp_path)) == [target.name]


def test_a_device_swapped_in_after_the_check_is_not_replaced(tmp_path):
    target = tmp_path / "late.csv"
    with pytest.raises(CaptureError, match="not a regular file"):
        with atomic_output(target, force=True, error=CaptureError) as tmp:
            tmp.write_text("data")
            os.mkfifo(target)               # appears between the first check and the rename
    assert stat.S_ISFIFO(os.lstat(target).st_mode) and os.listdir(tmp_path) == [target.name]


def test_forced_write_through_a_symlink_replaces_the_file_and_keeps_the_link(monkeypatch, capsys, tmp_path):
    real = tmp_path / "runs" / "real.csv"
    real.parent.mkdir()
    real.write_text("old")
    link = tmp_path / "latest.csv"
    link.symlink_to(real)
    code, _, _ = run(monkeypatch, capsys, "synth", link, "--track2", ";123?", "--file-type", "csv", "--force")
    assert code == 0 and link.is_symlink() and real.read_text().startswith("time_s,")


def test_a_symlink_to_nothing_is_refused_even_with_force(tmp_path):
    link = tmp_path / "dangling.csv"
    link.symlink_to(tmp_path / "nowhere.csv")
    with pytest.raises(OutputError, match="link to nothing"):
        check_output_path(link, force=True)
    assert not (tmp_path / "nowhere.csv").exists()


def test_inspect_plot_refuses_to_overwrite_without_force(monkeypatch, capsys, tmp_path):
    png = tmp_path / "plot.png"
    png.write_bytes(b"precious")
    code, _, err = run(monkeypatch, capsys, "inspect", "--plot", png, FIXTURES / "track2-scope.csv")
    assert _one_line_error(code, err) and "--force" in err and png.read_bytes() == b"precious"
    code, _, _ = run(monkeypatch, capsys, "inspect", "--plot", png, "--force", FIXTURES / "track2-scope.csv")
    assert code == 0 and png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


class _Stopped(Exception):
    pass


@pytest.mark.parametrize("signame", ["SIGTERM", "SIGHUP"])
def test_a_signal_during_a_write_removes_the_temporary_file(tmp_path, signame):
    sig = getattr(signal, signame)

    def earlier_handler(signum, frame):       # stands for whatever was in place before the write
        raise _Stopped(signum)

    previous = signal.signal(sig, earlier_handler)
    try:
        with pytest.raises(_Stopped):
            with atomic_output(tmp_path / "out.csv") as tmp:
                tmp.write_text("half a file")
                os.kill(os.getpid(), sig)
                time.sleep(1)                 # the handler runs before this returns
        assert os.listdir(tmp_path) == []
        assert signal.getsignal(sig) is earlier_handler   # and the earlier handler is back
    finally:
        signal.signal(sig, previous)


def test_sigterm_during_a_long_write_ends_the_process_and_leaves_nothing(tmp_path):
    target = tmp_path / "long.csv"
    child = subprocess.Popen(
        [sys.executable, "-c", "import sys, numpy as np; from readchan.io.write import write_capture; "
                               "write_capture(sys.argv[1], np.zeros(10_000_000), 1e6, kind='csv')", str(target)],
        cwd=ROOT, stderr=subprocess.PIPE)
    try:
        for _ in range(600):                    # wait for the temporary file to appear
            if os.listdir(tmp_path) or child.poll() is not None:
                break
            time.sleep(0.05)
        assert os.listdir(tmp_path), "the writer never started"
        child.send_signal(signal.SIGTERM)
        child.wait(timeout=60)
    finally:
        if child.poll() is None:
            child.kill()
            child.wait()
    assert child.returncode == -signal.SIGTERM     # the default ending of SIGTERM, as without readchan
    assert os.listdir(tmp_path) == []


def _sweep_result():
    from readchan.evaluate.sweep import StepResult, SweepResult, SweepSpec

    spec = SweepSpec("jitter", (0.0, 0.1), trials=10)
    return SweepResult(spec, (StepResult(0.0, 10, 10, 0, 100, 0), StepResult(0.1, 10, 9, 1, 100, 0)), 48_000.0)


def _write_with(writer: str, path: Path) -> None:
    if writer == "capture":
        write_capture(path, np.zeros(1000), 48_000)
    elif writer == "inspect-plot":
        from readchan.io.capture import load_capture
        from readchan.measure.diagnose import inspect_capture
        from readchan.report.plot import plot_reports

        plot_reports(inspect_capture(load_capture(FIXTURES / "track2-scope.csv")), path)
    else:
        from readchan.evaluate.sweep import plot_sweep

        plot_sweep(_sweep_result(), path)


@pytest.mark.parametrize("writer", ["capture", "inspect-plot", "sweep-plot"])
def test_output_files_get_the_users_umask(tmp_path, writer):
    path = tmp_path / ("out.wav" if writer == "capture" else "out.png")
    old = os.umask(0o027)
    try:
        _write_with(writer, path)
    finally:
        os.umask(old)
    assert stat.S_IMODE(os.stat(path).st_mode) == 0o640        # 0666 less the umask (POSIX open(2))
    assert os.listdir(tmp_path) == [path.name]
