"""Margin sweeps: scoring, reproducibility, the first failing step, and the sweep command."""

from __future__ import annotations

import json

import numpy as np
import pytest

from conftest import run_cli as run
from readchan.errors import EXIT_BAD_INPUT, ParameterError
from readchan.formats.iso7811.charset import TRACKS
from readchan.evaluate.sweep import (Scenario, StepResult, SweepResult, SweepSpec, edit_distance, run_sweep, run_trial,
                            synthesize_trial, true_period_at)
from readchan.evaluate.trial import _score

# short track-2 content keeps every trial to a few milliseconds
QUICK = Scenario(track=2, n_chars=8)




QUICK_ARGS = ["--track", "2", "--chars", "8", "--workers", "1"]


def test_edit_distance_matches_the_textbook_example():
    # kitten → sitting: two substitutions and one insertion (the standard Levenshtein example)
    assert edit_distance("kitten", "sitting") == 3
    assert edit_distance("", "abc") == 3 and edit_distance("abc", "abc") == 0


def test_a_trial_without_reads_counts_every_character_wrong():
    assert _score([], ";12345?") == (False, 7, 0)


def test_a_valid_read_with_wrong_text_is_a_false_accept_not_a_success():
    assert _score([(";12355?", True)], ";12345?") == (False, 1, 1)


def test_the_first_valid_read_is_the_one_scored():
    assert _score([(";1?", False), (";12345?", True)], ";12345?") == (True, 0, 0)


def test_random_content_uses_the_track_characters_without_sentinels():
    fmt = TRACKS[1].fmt
    text, _ = synthesize_trial(Scenario(track=1, n_chars=40), seed=3, index=0, trial=0)
    body = text[1:-1]
    assert text[0] == fmt.start_char and text[-1] == fmt.end_char and len(body) == 40
    assert fmt.start_char not in body and fmt.end_char not in body
    assert all(0 <= ord(c) - fmt.offset < fmt.n_codes for c in body)


def test_a_trial_is_the_same_every_time_and_differs_from_the_next_trial():
    a, res_a = synthesize_trial(QUICK, seed=7, index=1, trial=2)
    b, res_b = synthesize_trial(QUICK, seed=7, index=1, trial=2)
    c, _ = synthesize_trial(QUICK, seed=7, index=1, trial=3)
    assert a == b and np.array_equal(res_a.samples, res_b.samples)
    assert a != c


def test_pw50_in_cells_is_converted_with_the_track_density():
    # track 2 is recorded at 75 bpi (ISO/IEC 7811-2): one cell is 0.0254/75 m
    assert Scenario(track=2, pw50_cell=0.6).pulse().pw50_m == pytest.approx(0.6 * 0.0254 / 75)


def test_the_automatic_rate_gives_at_least_ten_samples_per_cell_at_the_fastest_point():
    sc = Scenario(track=1, speed_cm_s=150.0, profile="swipe", variation=0.5)
    fastest_cell_s = 0.0254 / 210 / (1.5 * 1.50)      # 210 bpi (ISO/IEC 7811-2) at 225 cm/s
    assert sc.sample_rate_hz * fastest_cell_s >= 10


def test_a_rate_too_low_for_the_speed_is_refused():
    with pytest.raises(ParameterError, match="samples per bit cell"):
        Scenario(track=1, speed_cm_s=150.0, rate_hz=48_000.0)


def test_true_period_is_each_cell_length_placed_at_its_first_boundary():
    f = true_period_at([np.array([0.0, 1.0, 3.0, 6.0])])
    assert f(np.array([0.0, 1.0, 2.0, 3.0])).tolist() == [1.0, 2.0, 2.5, 3.0]


def test_the_reference_decoder_reads_a_clean_capture():
    outcome = run_trial(Scenario(track=2, n_chars=8, reference=True), seed=0, index=0, trial=0)
    assert outcome.success and outcome.ref_success and outcome.ref_false_accepts == 0


def test_sweep_results_do_not_depend_on_the_worker_count():
    spec = SweepSpec("jitter", (0.0, 0.2), base=QUICK, trials=4, seed=11)
    assert run_sweep(spec, workers=1).to_dict() == run_sweep(spec, workers=2).to_dict()


def test_success_is_near_one_at_an_easy_step_and_near_zero_at_zero_db():
    result = run_sweep(SweepSpec("snr_db", (40.0, 0.0), base=QUICK, trials=6), workers=1)
    easy, absurd = result.steps
    assert easy.success_rate >= 5 / 6 and easy.char_error_rate < 0.05
    assert absurd.success_rate <= 1 / 6 and absurd.char_error_rate > 0.5


def _result(rates):
    spec = SweepSpec("snr_db", tuple(float(v) for v in range(len(rates))), base=QUICK, trials=100)
    steps = tuple(StepResult(float(i), 100, round(100 * r), 0, 100, 0) for i, r in enumerate(rates))
    return SweepResult(spec, steps, 48_000.0)


def test_first_failing_step_is_the_first_below_99_percent():
    assert _result([1.0, 0.99, 0.98, 1.0, 0.5]).first_failing_step == 2


def test_first_failing_step_is_none_when_every_step_reaches_99_percent():
    assert _result([1.0, 0.99, 1.0]).first_failing_step is None


def test_a_constant_profile_cannot_sweep_variation():
    with pytest.raises(ParameterError, match="constant"):
        SweepSpec("variation", (0.1,), base=Scenario(profile="constant"))


def test_sweep_json_is_one_object_with_the_stable_keys(monkeypatch, capsys):
    code, out, _ = run(monkeypatch, capsys, "sweep", "jitter", "--values", "0,0.1", "--trials", "2",
                       "--json", *QUICK_ARGS)
    assert code == 0
    doc = json.loads(out)
    assert {"parameter", "unit", "trials_per_step", "seed", "success_target", "first_failing_step",
            "first_failing_value", "base", "steps"} <= set(doc)
    assert [s["value"] for s in doc["steps"]] == [0.0, 0.1]
    assert {"value", "trials", "successes", "success_rate", "char_errors", "chars", "char_error_rate",
            "false_accepts"} <= set(doc["steps"][0])
    assert {"track", "speed_cm_s", "rate_hz", "pw50_um"} <= set(doc["base"])


def test_sweep_table_names_the_first_failing_step(monkeypatch, capsys):
    code, out, _ = run(monkeypatch, capsys, "sweep", "snr-db", "--values", "40,0", "--trials", "2", *QUICK_ARGS)
    assert code == 0 and "first below 99 %" in out and "snr-db = 0 dB" in out


def test_sweep_plot_is_a_non_empty_png(monkeypatch, capsys, tmp_path):
    png = tmp_path / "curve.png"
    code, _, _ = run(monkeypatch, capsys, "sweep", "snr-db", "--from", "40", "--to", "0", "--steps", "2",
                     "--trials", "2", "--plot", png, *QUICK_ARGS)
    assert code == 0
    assert png.stat().st_size > 1000 and png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_sweep_refuses_to_overwrite_a_plot_without_force(monkeypatch, capsys, tmp_path):
    png = tmp_path / "curve.png"
    png.write_bytes(b"precious")
    code, _, err = run(monkeypatch, capsys, "sweep", "snr-db", "--values", "40", "--trials", "1",
                       "--plot", png, *QUICK_ARGS)
    assert code == EXIT_BAD_INPUT and "--force" in err and png.read_bytes() == b"precious"


@pytest.mark.parametrize("args", [
    ["sweep", "loudness", "--values", "1"],
    ["sweep", "snr-db"],
    ["sweep", "snr-db", "--values", "20,abc"],
    ["sweep", "snr-db", "--values", "20", "--from", "1", "--to", "2", "--steps", "2"],
    ["sweep", "snr-db", "--from", "30", "--to", "10", "--steps", "0"],
    ["sweep", "snr-db", "--values", "20", "--snr-db", "10"],
    ["sweep", "jitter", "--values", "0.5"],
    ["sweep", "pw50-cell", "--values", "-1"],
    ["sweep", "variation", "--values", "0.2", "--profile", "constant"],
    ["sweep", "snr-db", "--values", "20", "--trials", "0"],
    ["sweep", "snr-db", "--values", "20", "--speed-cm-s", "150", "--rate-hz", "8000"],
    ["sweep", "snr-db", "--values", "20", "--plot", "curve.svg"],
    ["sweep", "snr-db", "--values", "20", "--track", "2", "--chars", "99"],
])
def test_bad_sweep_arguments_give_a_one_line_error_and_exit_2(monkeypatch, capsys, tmp_path, args):
    monkeypatch.chdir(tmp_path)
    code, _, err = run(monkeypatch, capsys, *args)
    assert code == EXIT_BAD_INPUT
    lines = [line for line in err.splitlines() if line.strip()]
    assert len(lines) == 1 and lines[0].startswith("readchan: error:"), err
