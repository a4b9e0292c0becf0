"""Tape synthesis from the command line: `readchan synth-ltc` / `synth-kcs` then `readchan decode --json`.

Each round trip compares the decoder's JSON with the ground truth the synthesizer wrote
(``--truth-out``), which follows the standards' rules (SMPTE ST 12-1 labels and bit order;
the Kansas City standard's byte frame, BYTE, Feb. 1976) independently of the decoder.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import soundfile as sf

from conftest import run_cli as run
from readchan.errors import EXIT_BAD_INPUT, EXIT_VALID


def synth(monkeypatch, capsys, tmp_path, command, *args, name="tape"):
    """Write a capture and its truth with ``command``; returns (capture path, truth dict)."""
    wav, truth = tmp_path / f"{name}.wav", tmp_path / f"{name}.json"
    code, _, err = run(monkeypatch, capsys, command, wav, "--truth-out", truth, *args)
    assert code == 0, err
    return wav, json.loads(truth.read_text())


def decode(monkeypatch, capsys, wav) -> tuple[int, dict]:
    code, out, _ = run(monkeypatch, capsys, "decode", "--json", wav)
    return code, json.loads(out)["reads"][0]


def _cell_s(speed: float, fps: float) -> float:
    return 1.0 / (80 * fps * speed)


def test_ltc_shuttle_round_trip_gives_every_frame_its_label_position_and_speed(monkeypatch, capsys, tmp_path):
    wav, truth = synth(monkeypatch, capsys, tmp_path, "synth-ltc", "--start", "10:59:59:20", "--profile", "shuttle",
                       "--speed", "1", "--speed-to", "4", "--ramp-s", "0.4", "--hold-s", "0.3", "--snr-db", "30",
                       "--rate-hz", "96000", "--duration-s", "1.5", "--user-bits", "counting",
                       "--user-value", "1000")
    code, r = decode(monkeypatch, capsys, wav)
    assert code == EXIT_VALID and r["format"] == "ltc" and r["rate_fps"] == 25
    got = {f["timecode"]: f for f in r["frames"]}
    assert [f["timecode"] for f in truth["frames"]] == list(got)
    for t in truth["frames"]:
        f = got[t["timecode"]]
        # within a tenth of a cell at the local speed (a line-level edge at 30 dB SNR is timed
        # to a few µs; the tenth is our choice, far below the half cell that would misplace a frame)
        assert abs(f["position_s"] - t["position_s"]) < 0.1 * _cell_s(t["speed"], 25)
        assert f["speed"] == pytest.approx(t["speed"], rel=5e-3)
        assert f["user_bits"] == t["user_bits"]
    assert "11:00:00:00" in got          # the hour boundary, labels continuous


def test_ltc_reverse_raw_head_through_the_analog_chain_reads_drop_frame_labels(monkeypatch, capsys, tmp_path):
    wav, truth = synth(monkeypatch, capsys, tmp_path, "synth-ltc", "--start", "00:09:59;20", "--rate-fps", "29.97",
                       "--direction", "reverse", "--signal", "head", "--snr-db", "32", "--rate-hz", "96000",
                       "--duration-s", "1.0", "--preamp-lowpass-hz", "20000", "--quantize-bits", "12",
                       "--ac-coupling-hz", "10", "--hum-level", "0.05")
    code, r = decode(monkeypatch, capsys, wav)
    assert code == EXIT_VALID and r["direction"] == "reverse" and r["rate_fps"] == 29.97
    truth_tc = [f["timecode"] for f in truth["frames"]]
    assert [f["timecode"] for f in r["frames"]] == truth_tc
    assert all(f["drop_frame"] and f["direction"] == "reverse" for f in r["frames"])
    # reverse play meets the minute boundary 00:10:00;00 then 00:09:59;29 (minute 10 keeps 00 and 01:
    # SMPTE ST 12-1's drop-frame rule)
    assert "00:10:00;00" in truth_tc and "00:09:59;29" in truth_tc


def test_ltc_through_a_dropout_keeps_every_frame_outside_it_and_reports_the_damage(monkeypatch, capsys, tmp_path):
    wav, truth = synth(monkeypatch, capsys, tmp_path, "synth-ltc", "--snr-db", "30", "--dropout", "0.5,0.06,40",
                       "--duration-s", "1.2")
    code, r = decode(monkeypatch, capsys, wav)
    got = {f["timecode"] for f in r["frames"]}
    frame_s = 1 / 25
    outside = [t["timecode"] for t in truth["frames"]
               if t["position_s"] + frame_s < 0.5 - 2e-3 or t["position_s"] > 0.56 + 2e-3]
    assert set(outside) <= got and len(got) < len(truth["frames"])
    assert any(0.45 < e["position_s"] < 0.6 for e in r["events"])


def test_ltc_jump_edit_is_an_event_where_the_head_met_it(monkeypatch, capsys, tmp_path):
    wav, truth = synth(monkeypatch, capsys, tmp_path, "synth-ltc", "--edit", "jump@20=02:00:00:00",
                       "--snr-db", "35", "--duration-s", "1.5")
    _, r = decode(monkeypatch, capsys, wav)
    jumps = [e for e in r["events"] if e["kind"] == "jump"]
    assert len(jumps) == 1 and jumps[0]["to_timecode"] == "02:00:00:00"
    assert abs(jumps[0]["position_s"] - truth["edit_times_s"][0]) < 1e-3


def test_ltc_text_user_bits_round_trip(monkeypatch, capsys, tmp_path):
    wav, truth = synth(monkeypatch, capsys, tmp_path, "synth-ltc", "--user-bits", "text", "--user-text", "REEL0042")
    _, r = decode(monkeypatch, capsys, wav)
    want = {t["timecode"]: t["user_bits"] for t in truth["frames"]}
    assert {f["timecode"]: f["user_bits"] for f in r["frames"]} == want
    assert len(set(want.values())) == 2       # 4 characters per frame, cycling over 8


def test_kcs_fast_wowing_band_limited_capture_round_trips(monkeypatch, capsys, tmp_path):
    payload = bytes(range(0, 256, 7))
    wav, truth = synth(monkeypatch, capsys, tmp_path, "synth-kcs", "--hex", payload.hex(), "--baud", "1200",
                       "--speed", "1.1", "--wow-depth", "0.01", "--flutter-depth", "0.003", "--band-hz", "300,3500",
                       "--snr-db", "24", "--hum-level", "0.1", "--dc-offset", "0.05", "--idle-bits", "0.5,2",
                       "--bit-phase-deg", "73", "--preamp-lowpass-hz", "8000", "--quantize-bits", "10")
    code, r = decode(monkeypatch, capsys, wav)
    assert code == EXIT_VALID and r["format"] == "kcs" and r["baud"] == 1200
    assert bytes.fromhex(r["data_hex"]) == payload == bytes.fromhex(truth["data_hex"])
    bit_s = 1 / (1200 * 1.1)
    # start edges within a fifth of a bit (the decoder places an edge to about a tenth of one)
    assert np.max(np.abs(np.subtract(r["byte_times_s"], truth["byte_times_s"]))) < 0.2 * bit_s


def test_kcs_square_tone_at_300_baud_from_a_file_round_trips(monkeypatch, capsys, tmp_path):
    src = tmp_path / "prog.bin"
    src.write_bytes(b"10 PRINT \"HI\"\r\n20 GOTO 10\r\n")
    wav, _ = synth(monkeypatch, capsys, tmp_path, "synth-kcs", "--data-file", src, "--shape", "square",
                   "--speed", "0.92", "--snr-db", "20")
    code, r = decode(monkeypatch, capsys, wav)
    assert code == EXIT_VALID and r["baud"] == 300 and bytes.fromhex(r["data_hex"]) == src.read_bytes()


def test_same_options_and_seed_write_the_same_file_and_another_seed_does_not(monkeypatch, capsys, tmp_path):
    files = []
    for n, seed in enumerate((3, 3, 4)):
        p = tmp_path / f"s{n}.wav"
        assert run(monkeypatch, capsys, "synth-kcs", p, "--text", "seed", "--snr-db", "20", "--seed", seed)[0] == 0
        files.append(p.read_bytes())
    assert files[0] == files[1] != files[2]


def test_csv_output_holds_the_same_signal_as_the_wav(monkeypatch, capsys, tmp_path):
    args = ("--duration-s", "0.2", "--snr-db", "30")
    run(monkeypatch, capsys, "synth-ltc", tmp_path / "a.csv", "--file-type", "csv", *args)
    run(monkeypatch, capsys, "synth-ltc", tmp_path / "a.wav", "--file-type", "wav-float", *args)
    table = np.loadtxt(tmp_path / "a.csv", delimiter=",", skiprows=1)
    wav, rate = sf.read(tmp_path / "a.wav")
    assert rate == 48000 and table.shape == (wav.size, 2)
    assert np.allclose(table[:, 1], wav, atol=1e-7)


def test_an_existing_file_is_not_overwritten_without_force(monkeypatch, capsys, tmp_path):
    target = tmp_path / "keep.wav"
    target.write_bytes(b"precious")
    code, _, err = run(monkeypatch, capsys, "synth-ltc", target)
    assert code == EXIT_BAD_INPUT and "--force" in err and target.read_bytes() == b"precious"


def _one_line_error(code, err):
    lines = [line for line in err.splitlines() if line.strip()]
    return code == EXIT_BAD_INPUT and len(lines) == 1 and lines[0].startswith("readchan: error:")


@pytest.mark.parametrize("args", [
    ("--rate-fps", "26"), ("--rate-fps", "nan"), ("--start", "24:00:00:00"), ("--start", "1:2:3"),
    ("--drop-frame",), ("--speed", "0"), ("--speed", "inf"), ("--speed", "nan"), ("--duration-s", "-1"),
    ("--duration-s", "1e9"), ("--profile", "ramp", "--ramp-s", "0"), ("--profile", "points"),
    ("--profile", "points", "--speed-points", "0:1,x"), ("--speed-points", "0:1"), ("--wow-depth", "2"),
    ("--edit", "jump@5"), ("--edit", "warp@5"), ("--edit", "skip@5,frames=0"), ("--edit", "skip@5,size=2"),
    ("--user-value", "123456789"), ("--user-bits", "text"), ("--rise", "fast"), ("--rise", "-3"),
    ("--band-hz", "300"), ("--band-hz", "3000,300"), ("--band-hz", "300,30000"), ("--dropout", "1,2"),
    ("--dropout", "0.1,nan,20"), ("--snr-db", "nan"), ("--amplitude", "0"), ("--rate-hz", "100"),
    ("--speed", "10"), ("--preamp-order", "9"), ("--quantize-bits", "1"), ("--tape-speed-cm-s", "0"),
    ("--start-cell", "80"), ("--hum-level", "-1"),
])
def test_bad_ltc_parameters_give_one_line_and_exit_2(monkeypatch, capsys, tmp_path, args):
    code, _, err = run(monkeypatch, capsys, "synth-ltc", tmp_path / "x.wav", *args)
    assert _one_line_error(code, err), err
    assert not (tmp_path / "x.wav").exists()


@pytest.mark.parametrize("args", [
    (), ("--text", "a", "--hex", "61"), ("--hex", "6"), ("--hex", "zz"), ("--text", ""),
    ("--data-file", "/nonexistent/file.bin"), ("--text", "a", "--baud", "600"), ("--text", "a", "--shape", "saw"),
    ("--text", "a", "--idle-bits", "-1"), ("--text", "a", "--idle-bits", "x"), ("--text", "a", "--leader-s", "nan"),
    ("--text", "a", "--speed", "30"), ("--text", "a", "--rate-hz", "8000"), ("--text", "a", "--harmonics-hz", "10"),
    ("--text", "a", "--bit-phase-deg", "inf"), ("--text", "a", "--truth-out", "SAME"),
])
def test_bad_kcs_parameters_give_one_line_and_exit_2(monkeypatch, capsys, tmp_path, args):
    out = tmp_path / "x.wav"
    args = tuple(str(out) if a == "SAME" else a for a in args)
    code, _, err = run(monkeypatch, capsys, "synth-kcs", out, *args)
    assert _one_line_error(code, err), err
    assert not out.exists()


def test_the_card_synth_points_tape_formats_to_their_commands(monkeypatch, capsys, tmp_path):
    code, _, err = run(monkeypatch, capsys, "synth", tmp_path / "x.wav", "--format", "ltc", "--bits", "0101")
    assert _one_line_error(code, err) and "synth-ltc" in err
