"""`readchan inspect` on tape captures: speed, SNR and dropouts against the synthesizer's truth.

The truth is what `readchan synth-ltc` / `synth-kcs` put in (``--truth-out``): the play-speed
profile drawn, the SNR stated (signal peak over white-noise RMS) and the dropouts placed.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from conftest import run_cli as run
from readchan.errors import EXIT_BAD_INPUT, EXIT_VALID


def synth(monkeypatch, capsys, tmp_path, command, *args, name="tape"):
    wav, truth = tmp_path / f"{name}.wav", tmp_path / f"{name}.json"
    code, _, err = run(monkeypatch, capsys, command, wav, "--truth-out", truth, *args)
    assert code == 0, err
    return wav, json.loads(truth.read_text())


def inspect(monkeypatch, capsys, wav, *args) -> tuple[int, dict]:
    code, out, _ = run(monkeypatch, capsys, "inspect", "--json", wav, *args)
    doc = json.loads(out)
    return code, doc


def speed_errors(read: dict, truth: dict) -> np.ndarray:
    """Relative error of each point of the inspected speed trace against the drawn profile."""
    tp = np.asarray(truth["speed_profile"])
    tr = np.asarray(read["speed_trace_rel"])
    return tr[:, 1] / np.interp(tr[:, 0], tp[:, 0], tp[:, 1]) - 1


def ten_ninety(truth: dict, a_s: float, b_s: float, v0: float, v1: float) -> tuple[float, float]:
    """Times where a drawn change from v0 to v1 (inside [a_s, b_s]) covers 10 % and 90 % of the way."""
    tp = np.asarray(truth["speed_profile"])
    t = np.linspace(a_s, b_s, 20001)
    frac = (np.interp(t, tp[:, 0], tp[:, 1]) - v0) / (v1 - v0)
    return float(t[np.argmax(frac >= 0.1)]), float(t[np.argmax(frac >= 0.9)])


SHUTTLE = ("--profile", "shuttle", "--speed", "1", "--speed-to", "4", "--ramp-s", "0.4", "--hold-s", "0.3",
           "--at-s", "0.2", "--snr-db", "30", "--rate-hz", "96000", "--duration-s", "1.6")


def test_ltc_speed_trace_follows_a_shuttle_within_one_percent(monkeypatch, capsys, tmp_path):
    # 1 %: each trace point is 16 cells over the time between two line-level edges 16 cells
    # apart, each timed to a few µs at 30 dB; a 16-cell window averages across the knee of a
    # 7.5×/s ramp by slope × window / 8, 0.6 % at 1× (observed: 0.63 % worst)
    wav, truth = synth(monkeypatch, capsys, tmp_path, "synth-ltc", *SHUTTLE)
    code, doc = inspect(monkeypatch, capsys, wav)
    r = doc["reads"][0]
    assert code == EXIT_VALID and r["format"] == "ltc" and doc["channels"][0]["family"] == "timecode"
    assert np.max(np.abs(speed_errors(r, truth))) < 0.01
    assert r["speed_max_rel"] == pytest.approx(4.0, rel=0.01) and r["speed_min_rel"] == pytest.approx(1.0, rel=0.01)


def test_ltc_shuttle_changes_are_found_at_their_ten_and_ninety_percent_points(monkeypatch, capsys, tmp_path):
    wav, truth = synth(monkeypatch, capsys, tmp_path, "synth-ltc", *SHUTTLE)
    _, doc = inspect(monkeypatch, capsys, wav)
    up, down = doc["reads"][0]["speed_changes"]
    assert up["to_rel"] == pytest.approx(4.0, rel=0.01) and down["to_rel"] == pytest.approx(1.0, rel=0.01)
    # 10 ms: two trace points (every 8 bits) at the slow end of a ramp
    for ch, (a, b, v0, v1) in ((up, (0.2, 0.6, 1.0, 4.0)), (down, (0.9, 1.3, 4.0, 1.0))):
        t10, t90 = ten_ninety(truth, a, b, v0, v1)
        assert abs(ch["start_s"] - t10) < 0.01 and abs(ch["end_s"] - t90) < 0.01


def test_raw_head_spin_up_from_a_fifth_of_nominal_is_followed_within_three_percent(monkeypatch, capsys, tmp_path):
    # 3 %: at 0.2× the head's pulses are a fifth as large (Faraday) while the noise stays, so they
    # are timed at about 16 dB there, and the 16-cell window averages across the ramp's knee by
    # slope × window / 8, up to 2.5 % at 0.2× (observed: 0.36 % worst)
    wav, truth = synth(monkeypatch, capsys, tmp_path, "synth-ltc", "--signal", "head", "--profile", "ramp",
                       "--speed", "0.2", "--speed-to", "1", "--ramp-s", "0.8", "--at-s", "0.3", "--snr-db", "30",
                       "--duration-s", "2")
    _, doc = inspect(monkeypatch, capsys, wav)
    r = doc["reads"][0]
    assert r["signal_kind"] == "head" and np.max(np.abs(speed_errors(r, truth))) < 0.03
    (change,) = r["speed_changes"]
    t10, t90 = ten_ninety(truth, 0.3, 1.1, 0.2, 1.0)
    assert abs(change["start_s"] - t10) < 0.03 and abs(change["end_s"] - t90) < 0.03


def test_kcs_speed_offset_and_wow_are_followed_within_half_a_percent(monkeypatch, capsys, tmp_path):
    # 0.5 %: the tone track's speed is a circular mean over 32 half cycles, then a median over
    # 65 of them (observed: 0.29 % worst at +10 % with 1 % wow)
    wav, truth = synth(monkeypatch, capsys, tmp_path, "synth-kcs", "--text", "x" * 60, "--baud", "1200",
                       "--speed", "1.1", "--wow-depth", "0.01", "--snr-db", "25")
    code, doc = inspect(monkeypatch, capsys, wav)
    r = doc["reads"][0]
    assert code == EXIT_VALID and r["format"] == "kcs" and r["margin_unit"] == "byte"
    assert np.max(np.abs(speed_errors(r, truth))) < 0.005
    assert r["speed_changes"] == []           # 1 % wow is not a change of speed (5 % hysteresis)


@pytest.mark.parametrize("command, args, source", [
    ("synth-ltc", ("--snr-db", "24"), "flat"),
    ("synth-ltc", ("--snr-db", "24", "--ac-coupling-hz", "20", "--speed", "0.3", "--duration-s", "3"), "flat"),
    ("synth-ltc", ("--snr-db", "28", "--signal", "head", "--rate-hz", "96000"), "spectrum"),
    ("synth-kcs", ("--snr-db", "24", "--text", "snr check"), "quiet"),
    ("synth-kcs", ("--snr-db", "18", "--text", "snr check", "--baud", "1200"), "quiet"),
])
def test_snr_is_measured_within_one_and_a_half_db_of_the_synthesized_one(monkeypatch, capsys, tmp_path, command,
                                                                        args, source):
    # ±1.5 dB, as the card diagnostics promise (README, Accuracy); the synthesizer's SNR is the
    # signal peak over the white noise's RMS
    wav, _ = synth(monkeypatch, capsys, tmp_path, command, *args)
    _, doc = inspect(monkeypatch, capsys, wav)
    r = doc["reads"][0]
    snr = float(args[1])
    assert r["noise_from"] == source and abs(r["snr_db"] - snr) < 1.5


@pytest.mark.parametrize("command, content", [("synth-ltc", ()), ("synth-kcs", ("--hex", "a5" * 120))])
def test_dropouts_are_found_where_they_were_put(monkeypatch, capsys, tmp_path, command, content):
    # the synthesizer's dropout falls over 1 ms raised-cosine edges, so its −6 dB points lie
    # 0.5 ms outside [start, start + duration]; the 1 ms envelope window moves them back inward
    # by about a quarter window each: ±1 ms on each edge, ±2.5 dB in depth (the noise floor)
    drops = ((0.45, 0.04, 18.0), (1.1, 0.012, 12.0))
    args = [a for d in drops for a in ("--dropout", ",".join(map(str, d)))]
    wav, truth = synth(monkeypatch, capsys, tmp_path, command, *content, "--snr-db", "35", *args,
                       *(("--duration-s", "1.5") if command == "synth-ltc" else ()))
    _, doc = inspect(monkeypatch, capsys, wav)
    found = doc["reads"][0]["dropouts"]
    assert len(found) == len(truth["dropouts"]) == 2
    for f, t in zip(found, truth["dropouts"]):
        assert abs(f["start_s"] - t["start_s"]) < 1e-3
        assert abs(f["end_s"] - (t["start_s"] + t["duration_s"])) < 1e-3
        assert abs(f["depth_db"] - t["depth_db"]) < 2.5


def test_the_verdict_names_a_failing_snr_and_the_least_headroom(monkeypatch, capsys, tmp_path):
    wav, _ = synth(monkeypatch, capsys, tmp_path, "synth-kcs", "--text", "noisy tape", "--snr-db", "14")
    _, doc = inspect(monkeypatch, capsys, wav)
    r = doc["reads"][0]
    assert "SNR" in r["failed"] and r["least_headroom"] == "SNR"
    snr = next(c for c in r["checks"] if c["name"] == "SNR")
    assert snr["ok"] is False and snr["headroom"] == pytest.approx(10 ** ((r["snr_db"] - 20) / 20), rel=1e-3)


def test_the_worst_frame_is_the_frame_of_least_margin(monkeypatch, capsys, tmp_path):
    wav, truth = synth(monkeypatch, capsys, tmp_path, "synth-ltc", "--snr-db", "18", "--duration-s", "1")
    _, doc = inspect(monkeypatch, capsys, wav)
    r = doc["reads"][0]
    w = r["margin_worst"]
    assert w["label"] in {f["timecode"] for f in truth["frames"]}
    assert w["margin"] == r["margin_min"] == min(m for _, m in r["margins"])
    assert 0 <= r["margin_min"] <= r["margin_p1"] <= 1


def test_the_text_report_shows_speed_margin_level_dropouts_and_verdict(monkeypatch, capsys, tmp_path):
    wav, _ = synth(monkeypatch, capsys, tmp_path, "synth-ltc", "--snr-db", "30", "--dropout", "0.5,0.03,15")
    code, out, _ = run(monkeypatch, capsys, "inspect", wav)
    assert code == EXIT_VALID
    for word in ("ltc (line)", "mean / min / max", "least per frame", "SNR", "dropout", "verdict:", "least headroom"):
        assert word in out


def test_plot_is_written_once_and_not_overwritten_without_force(monkeypatch, capsys, tmp_path):
    wav, _ = synth(monkeypatch, capsys, tmp_path, "synth-kcs", "--text", "plot me", "--snr-db", "30")
    png = tmp_path / "k.png"
    code, _, err = run(monkeypatch, capsys, "inspect", wav, "--plot", png)
    assert code == EXIT_VALID and "3 panel(s)" in err
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    before = png.read_bytes()
    code, _, err = run(monkeypatch, capsys, "inspect", wav, "--plot", png)
    assert code == EXIT_BAD_INPUT and "--force" in err and png.read_bytes() == before


def test_a_card_capture_still_gets_the_card_report(monkeypatch, capsys, tmp_path):
    card = tmp_path / "card.wav"
    assert run(monkeypatch, capsys, "synth", card, "--track2", ";1234567897=2512?", "--snr-db", "30")[0] == 0
    _, doc = inspect(monkeypatch, capsys, card)
    r = doc["reads"][0]
    assert r["track"] == 2 and "speed_trace_rel" not in r and "amplitude" in r


def test_speeds_are_relative_to_the_basis_rate_when_the_capture_does_not_decide_it(monkeypatch, capsys, tmp_path):
    # 0.3× for 3 s plays 0.9 s of 25 fps tape: no wrap of the frame number, frames up to 22, so
    # 24, 25, 29.97 and 30 fps all remain (README, frame rate) and the speed is relative to the first
    wav, _ = synth(monkeypatch, capsys, tmp_path, "synth-ltc", "--speed", "0.3", "--duration-s", "3",
                   "--start", "01:00:00:00", "--snr-db", "30")
    code, out, _ = run(monkeypatch, capsys, "decode", "--json", wav)
    dec = json.loads(out)["reads"][0]
    _, doc = inspect(monkeypatch, capsys, wav)
    r = doc["reads"][0]
    assert dec["rate_fps"] is None and r["speed_basis_fps"] == dec["rate_fps_candidates"][0]
    assert r["speed_mean_rel"] * r["speed_basis_fps"] / 25 == pytest.approx(0.3, rel=2e-3)
