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
    assert {"reads", "channels"} <= set(doc)
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
    code, _, err = run(monkeypatch, capsys, "synth", out_wav, "--track2", ";1234567890=2512?", "--snr-db", "30",
                       "--reverse", "--profile", "swipe", "--variation", "0.2")
    assert code == 0 and "PW50" in err
    code, out, _ = run(monkeypatch, capsys, "decode", "--json", "--unmask", out_wav)
    r = json.loads(out)["reads"][0]
    assert code == EXIT_VALID and r["text"] == ";1234567890=2512?" and r["direction"] == "reverse"


def test_synth_refuses_to_overwrite_without_force(monkeypatch, capsys, tmp_path):
    target = tmp_path / "keep.wav"
    target.write_bytes(b"precious")
    code, _, err = run(monkeypatch, capsys, "synth", target, "--track1", "%A1?")
    assert code == EXIT_BAD_INPUT and "--force" in err
    assert target.read_bytes() == b"precious"


def test_an_invalid_read_exits_1(monkeypatch, capsys, tmp_path):
    from readchan.capture import write_capture
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
