"""The command line: exit codes, JSON shape, masking, bad input as one-line errors."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from conftest import run_cli as run
from readchan.errors import EXIT_BAD_INPUT, EXIT_INVALID, EXIT_NO_DATA, EXIT_VALID

FIXTURES = Path(__file__).resolve().parent.parent / "fixtures"
T1 = "%B9912345678901239^QUILL/ODESSA M^2912101000000000000?"




def test_decode_json_is_one_object_with_the_stable_keys(monkeypatch, capsys):
    code, out, _ = run(monkeypatch, capsys, "decode", "--json", FIXTURES / "three-track-swipe.wav")
    assert code == EXIT_VALID
    doc = json.loads(out)
    assert {"schema", "reads", "channels"} == set(doc) and doc["schema"] == "readchan.decode/1"
    keys = {"channel", "format", "direction", "text", "valid", "corrected", "bits", "start_s", "end_s", "source"}
    for r in doc["reads"]:
        assert keys <= set(r)
        assert isinstance(r["channel"], int) and isinstance(r["bits"], int) and isinstance(r["valid"], bool)
    assert [r["channel"] for r in doc["reads"]] == [0, 1, 2]


def test_account_numbers_are_masked_in_json_unless_unmasked(monkeypatch, capsys):
    _, out, _ = run(monkeypatch, capsys, "decode", "--json", "--channel", "0", FIXTURES / "three-track-swipe.wav")
    assert "9912345678901239" not in out
    assert json.loads(out)["reads"][0]["text"].startswith("%B991234******1239^")
    _, out, _ = run(monkeypatch, capsys, "decode", "--json", "--unmask", "--channel", "0",
                    FIXTURES / "three-track-swipe.wav")
    assert json.loads(out)["reads"][0]["text"] == T1


def test_account_numbers_are_masked_in_the_table(monkeypatch, capsys):
    _, out, _ = run(monkeypatch, capsys, "decode", FIXTURES / "three-track-swipe.wav")
    assert "9912345678901239" not in out and "991234******1239" in out


def test_reverse_swipe_is_reported_as_reverse(monkeypatch, capsys):
    code, out, _ = run(monkeypatch, capsys, "decode", "--json", FIXTURES / "track2-reverse-noisy.flac")
    assert code == EXIT_VALID
    assert json.loads(out)["reads"][0]["direction"] == "reverse"


def test_two_swipes_give_two_reads_in_time_order(monkeypatch, capsys):
    _, out, _ = run(monkeypatch, capsys, "decode", "--json", FIXTURES / "track1-two-swipes.wav")
    reads = json.loads(out)["reads"]
    assert len(reads) == 2 and reads[0]["end_s"] < reads[1]["start_s"]


def test_comparator_capture_is_decoded_from_its_edges(monkeypatch, capsys):
    code, out, _ = run(monkeypatch, capsys, "decode", "--json", FIXTURES / "track1-comparator.wav")
    assert code == EXIT_VALID and json.loads(out)["reads"][0]["valid"]


def test_scope_csv_is_decoded_with_its_time_column(monkeypatch, capsys):
    code, out, _ = run(monkeypatch, capsys, "decode", "--json", FIXTURES / "track2-scope.csv")
    assert code == EXIT_VALID and json.loads(out)["reads"][0]["format"] == "iso-bcd"


def test_synth_then_decode_round_trips_through_files(monkeypatch, capsys, tmp_path):
    out_wav = tmp_path / "card.wav"
    code, _, err = run(monkeypatch, capsys, "synth", out_wav, "--track2", ";1234567897=2512?", "--snr-db", "30",
                       "--reverse", "--profile", "swipe", "--variation", "0.2")
    assert code == 0 and "PW50" in err
    code, out, _ = run(monkeypatch, capsys, "decode", "--json", "--unmask", out_wav)
    r = json.loads(out)["reads"][0]
    assert code == EXIT_VALID and r["text"] == ";1234567897=2512?" and r["direction"] == "reverse"


def test_synth_refuses_to_overwrite_without_force(monkeypatch, capsys, tmp_path):
    target = tmp_path / "keep.wav"
    target.write_bytes(b"precious")
    code, _, err = run(monkeypatch, capsys, "synth", target, "--track1", "%A1?")
    assert code == EXIT_BAD_INPUT and "--force" in err
    assert target.read_bytes() == b"precious"


def test_an_invalid_read_exits_1(monkeypatch, capsys, tmp_path):
    from readchan.io.write import write_capture
    from readchan.synth import SynthSpec, TrackContent, synthesize
    from readchan.synth.card import track_content

    tc = track_content(";12345=99?", track=2)
    bits = tc.bits.copy()
    i0 = 22 + 5 * 2           # the third character's first data bit
    bits[i0] ^= 1
    bits[i0 + 5] ^= 1         # and the fourth's: two parity errors, not correctable
    res = synthesize(SynthSpec(tracks=(TrackContent(bits, 75.0),)))
    path = write_capture(tmp_path / "bad.wav", res.samples, res.rate_hz)
    code, out, _ = run(monkeypatch, capsys, "decode", "--json", path)
    assert code == EXIT_INVALID and json.loads(out)["reads"][0]["valid"] is False


def test_silence_exits_3_no_data(monkeypatch, capsys, tmp_path):
    p = tmp_path / "quiet.wav"
    sf.write(p, np.random.default_rng(0).normal(0, 1e-3, 48_000), 48_000)
    code, out, _ = run(monkeypatch, capsys, "decode", p)
    assert code == EXIT_NO_DATA and "no framed data" in out


def _assert_one_line_error(code, err, expected_code=EXIT_BAD_INPUT):
    assert code == expected_code
    lines = [l for l in err.splitlines() if l.strip()]
    assert len(lines) == 1 and lines[0].startswith("readchan: error:"), err
    assert "Traceback" not in err


@pytest.mark.parametrize("case", ["missing", "empty", "truncated", "one-sample", "nan", "nonuniform-csv", "directory"])
def test_bad_capture_gives_a_one_line_error_and_exit_2(monkeypatch, capsys, tmp_path, case):
    p = tmp_path / "bad.wav"
    if case == "missing":
        p = tmp_path / "nope.wav"
    elif case == "empty":
        p.write_bytes(b"")
    elif case == "truncated":
        good = tmp_path / "good.wav"
        sf.write(good, np.zeros(1000), 48_000, subtype="PCM_16")
        p.write_bytes(good.read_bytes()[:30])
    elif case == "one-sample":
        sf.write(p, np.zeros(1), 48_000)
    elif case == "nan":
        p = tmp_path / "nan.csv"
        p.write_text("time_s,v\n" + "".join(f"{i * 1e-5},{'nan' if i == 50 else 0.1}\n" for i in range(100)))
    elif case == "nonuniform-csv":
        p = tmp_path / "jumpy.csv"
        p.write_text("time_s,v\n" + "".join(f"{(i + (5 if i > 60 else 0)) * 1e-5},0.1\n" for i in range(100)))
    elif case == "directory":
        p = tmp_path
    code, _, err = run(monkeypatch, capsys, "decode", p)
    _assert_one_line_error(code, err)


@pytest.mark.parametrize("args", [
    ["decode", "--format", "iso-klingon", "FIX"],
    ["decode", "--format", "custom:bits=12", "FIX"],
    ["decode", "--channel", "7", "FIX"],
    ["decode", "--notch", "loud", "FIX"],
    ["synth", "OUT", "--track1", "%lowercase?"],
    ["synth", "OUT", "--track2", ";12345", "--rate-hz", "0"],
    ["synth", "OUT", "--track2", ";12345", "--speed-cm-s", "nan"],
    ["synth", "OUT"],
    ["decode", "--no-such-option", "FIX"],
])
def test_bad_arguments_give_a_one_line_error_and_exit_2(monkeypatch, capsys, tmp_path, args):
    args = [str(FIXTURES / "track2-scope.csv") if a == "FIX" else str(tmp_path / "o.wav") if a == "OUT" else a
            for a in args]
    code, _, err = run(monkeypatch, capsys, *args)
    _assert_one_line_error(code, err)


def test_python_dash_m_readchan_works():
    done = subprocess.run([sys.executable, "-m", "readchan", "decode", "--json", str(FIXTURES / "track2-scope.csv")],
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0 and json.loads(done.stdout)["reads"][0]["valid"]


# ---------------------------------------------------------------------------------------------
# Outputs a user can rely on: unwritable places, results before a failed plot, warnings, pipes

SWEEP_QUICK = ["--track", "2", "--chars", "8", "--workers", "1", "--trials", "1"]


def _deny_new_files(monkeypatch):
    """Make the output directory refuse new files, as a read-only or foreign directory does
    (the suite may run as root, which no permission bit stops)."""
    import errno
    import os

    from readchan.io import atomic

    real_open = os.open

    def refusing_open(path, flags, *a, **kw):
        if flags & os.O_CREAT:
            raise PermissionError(errno.EACCES, "Permission denied", str(path))
        return real_open(path, flags, *a, **kw)

    monkeypatch.setattr(atomic.os, "open", refusing_open)


@pytest.mark.parametrize("command", ["synth", "inspect", "sweep"])
def test_a_directory_that_refuses_files_is_a_one_line_error_exit_2(monkeypatch, capsys, tmp_path, command):
    _deny_new_files(monkeypatch)
    args = {"synth": ["synth", tmp_path / "o.wav", "--track2", ";123?"],
            "inspect": ["inspect", "--plot", tmp_path / "p.png", FIXTURES / "track2-scope.csv"],
            "sweep": ["sweep", "jitter", "--values", "0", "--plot", tmp_path / "p.png", *SWEEP_QUICK]}[command]
    code, _, err = run(monkeypatch, capsys, *args)
    _assert_one_line_error(code, err)
    assert "Permission denied" in err and list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("command", ["synth", "inspect"])
def test_a_name_too_long_for_the_file_system_is_a_one_line_error_exit_2(monkeypatch, capsys, tmp_path, command):
    long_name = tmp_path / ("x" * 300 + (".wav" if command == "synth" else ".png"))   # NAME_MAX is 255 (POSIX)
    args = {"synth": ["synth", long_name, "--track2", ";123?"],
            "inspect": ["inspect", "--plot", long_name, FIXTURES / "track2-scope.csv"]}[command]
    code, _, err = run(monkeypatch, capsys, *args)
    _assert_one_line_error(code, err)
    assert "too long" in err


@pytest.mark.parametrize("as_json", [False, True])
def test_sweep_prints_its_results_before_reporting_an_unwritable_plot(monkeypatch, capsys, tmp_path, as_json):
    import errno

    from matplotlib.figure import Figure

    def disk_full(self, *a, **kw):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(Figure, "savefig", disk_full)     # the directory takes files; the disk fills up
    png = tmp_path / "curve.png"
    code, out, err = run(monkeypatch, capsys, "sweep", "jitter", "--values", "0,0.05", "--plot", png,
                         *SWEEP_QUICK, *(["--json"] if as_json else []))
    _assert_one_line_error(code, err)
    assert "No space left on device" in err and not png.exists() and list(tmp_path.iterdir()) == []
    if as_json:
        assert [s["value"] for s in json.loads(out)["steps"]] == [0.0, 0.05]
    else:
        assert "sweep of jitter" in out and "success" in out


def test_python_warnings_reach_the_terminal_as_one_line(monkeypatch, capsys, tmp_path):
    whole = tmp_path / "whole.wav"
    sf.write(whole, np.zeros(48_000), 48_000, subtype="PCM_16")
    cut = tmp_path / "cut.wav"
    cut.write_bytes(whole.read_bytes()[:50_000])          # the header still declares 96,000 bytes
    _, _, err = run(monkeypatch, capsys, "decode", cut)
    lines = [l for l in err.splitlines() if l.strip()]
    assert len(lines) == 1 and lines[0].startswith("readchan: warning: ") and "truncated" in lines[0]


def test_warnings_of_other_libraries_are_one_line_with_their_category(monkeypatch, capsys):
    from readchan.cli import decode as cli_decode

    def noisy(*a, **kw):
        np.log(np.zeros(1))                                # numpy: "divide by zero encountered in log"
        raise typer_exit(0)

    import typer
    typer_exit = typer.Exit
    monkeypatch.setattr(cli_decode, "_settings", noisy)
    code, _, err = run(monkeypatch, capsys, "decode", FIXTURES / "track2-scope.csv")
    lines = [l for l in err.splitlines() if l.strip()]
    assert code == 0 and len(lines) == 1
    assert lines[0].startswith("readchan: warning: divide by zero") and lines[0].endswith("(RuntimeWarning)")


class _ClosedPipe:
    """A standard output whose reader has gone: every write fails as a closed pipe does."""

    def write(self, text):
        raise BrokenPipeError(32, "Broken pipe")

    def flush(self):
        pass

    def isatty(self):
        return False


@pytest.mark.parametrize("as_json", [False, True])
def test_a_closed_pipe_ends_quietly_with_exit_141(monkeypatch, capsys, as_json):
    from readchan.errors import EXIT_PIPE_CLOSED

    monkeypatch.setattr(sys, "stdout", _ClosedPipe())
    code, _, err = run(monkeypatch, capsys, "decode", *(["--json"] if as_json else []), FIXTURES / "track2-scope.csv")
    assert code == EXIT_PIPE_CLOSED == 141 and err == ""


def test_a_real_closed_pipe_ends_quietly_with_exit_141():
    import os

    read_end, write_end = os.pipe()
    os.close(read_end)                                     # the reader quits before the first line
    done = subprocess.run([sys.executable, "-m", "readchan", "decode", str(FIXTURES / "track2-scope.csv")],
                          stdout=write_end, stderr=subprocess.PIPE, text=True, timeout=120)
    os.close(write_end)
    assert done.returncode == 141 and done.stderr == ""


# ---------------------------------------------------------------------------------------------
# One vocabulary across commands


@pytest.mark.parametrize("old, new", [
    (["decode", "--rate", "20000"], ["decode", "--rate-hz", "20000"]),
    (["decode", "--kind", "head"], ["decode", "--signal", "head"]),
    (["inspect", "--kind", "head"], ["inspect", "--signal", "head"]),
])
def test_old_decode_spellings_work_with_one_deprecation_line(monkeypatch, capsys, old, new):
    fix = FIXTURES / "track2-scope.csv"
    code_new, out_new, err_new = run(monkeypatch, capsys, *new, "--json", fix)
    code_old, out_old, err_old = run(monkeypatch, capsys, *old, "--json", fix)
    assert code_old == code_new == EXIT_VALID and out_old == out_new and err_new == ""
    lines = err_old.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("readchan: warning: ") and f"use {new[1]}" in lines[0]


def test_old_synth_spellings_write_the_same_file(monkeypatch, capsys, tmp_path):
    common = ["--track2", ";1234=5?", "--seed", "3", "--swipes", "2"]
    code, _, err_new = run(monkeypatch, capsys, "synth", tmp_path / "new.csv", *common, "--head-gap-um", "14",
                           "--pause-s", "0.1", "--file-type", "csv")
    assert code == 0
    code, _, err_old = run(monkeypatch, capsys, "synth", tmp_path / "old.csv", *common, "--gap-um", "14",
                           "--gap-s", "0.1", "--kind", "csv")
    assert code == 0
    assert (tmp_path / "old.csv").read_bytes() == (tmp_path / "new.csv").read_bytes()
    warned = [l for l in err_old.splitlines() if l.startswith("readchan: warning: ")]
    assert len(warned) == 3 and not any(l.startswith("readchan: warning: ") for l in err_new.splitlines())


def test_old_sweep_parameter_spelling_works_with_one_deprecation_line(monkeypatch, capsys):
    code, out, err = run(monkeypatch, capsys, "sweep", "hum_level", "--values", "0", "--json", *SWEEP_QUICK)
    assert code == 0 and json.loads(out)["parameter"] == "hum_level"      # the JSON keeps its spelling
    assert err.strip().splitlines() == ["readchan: warning: sweep parameter hum_level is deprecated and goes in "
                                        "the next release; use hum-level"]


def test_old_and_new_spelling_together_is_an_error(monkeypatch, capsys):
    code, _, err = run(monkeypatch, capsys, "decode", "--rate", "20000", "--rate-hz", "20000",
                       FIXTURES / "track2-scope.csv")
    _assert_one_line_error(code, err)
    assert "--rate-hz" in err


@pytest.mark.parametrize("command, old, new", [
    ("decode", "--rate ", "--rate-hz"), ("decode", "--kind", "--signal"), ("inspect", "--rate ", "--rate-hz"),
    ("synth", "--gap-um", "--head-gap-um"), ("synth", "--gap-s", "--pause-s"), ("synth", "--kind", "--file-type"),
])
def test_help_shows_only_the_new_spelling(monkeypatch, capsys, command, old, new):
    monkeypatch.setenv("COLUMNS", "200")
    code, out, _ = run(monkeypatch, capsys, command, "--help")
    assert code == 0 and new in out and old not in out


def test_version_prints_the_version_of_the_package(monkeypatch, capsys):
    import tomllib

    meta = tomllib.loads((Path(__file__).resolve().parent.parent / "pyproject.toml").read_text())
    code, out, _ = run(monkeypatch, capsys, "--version")
    assert code == 0 and out.strip() == f"readchan {meta['project']['version']}"


def test_sweep_json_carries_a_versioned_schema(monkeypatch, capsys):
    _, out, _ = run(monkeypatch, capsys, "sweep", "jitter", "--values", "0", "--json", *SWEEP_QUICK)
    assert json.loads(out)["schema"] == "readchan.sweep/1"


def test_synth_and_sweep_default_to_the_same_speed_profile():
    import typer.main

    from readchan.cli.main import app

    group = typer.main.get_command(app)
    defaults = {name: next(p.default for p in group.commands[name].params if p.name == "profile")
                for name in ("synth", "sweep")}
    assert defaults["synth"] == defaults["sweep"]


def test_inspect_names_the_timing_margin_in_the_trades_words(monkeypatch, capsys):
    _, out, _ = run(monkeypatch, capsys, "inspect", FIXTURES / "track2-scope.csv")
    assert "timing margin worst" in out and "decision margin" not in out
