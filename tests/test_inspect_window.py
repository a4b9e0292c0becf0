"""``readchan inspect --read N`` and ``--window A:B`` (:mod:`readchan.cli.inspect_window`): one
read or one stretch of a capture measured alone; bad values are one error line with exit code 2
(README, *Exit codes*); a long capture is refused without them; a plot draws a bounded number of
reads and of points per trace.

Reference: ``readchan decode --json`` on the same capture (its reads, their order and times),
and the synthesizer's swipes (invented card)."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from readchan.errors import EXIT_BAD_INPUT, EXIT_VALID

from tests.conftest import run_cli, write_track2_swipes

FIXTURES = Path(__file__).resolve().parents[1] / "fixtures"
THREE = FIXTURES / "three-track-swipe.wav"


@pytest.fixture(scope="module")
def swipes(tmp_path_factory) -> Path:
    """Six track 2 swipes 1.5 s apart, about 12 s."""
    path = tmp_path_factory.mktemp("window") / "bench-swipes.wav"
    write_track2_swipes(path)
    return path


def _decoded(monkeypatch, capsys, path) -> list[dict]:
    code, out, _ = run_cli(monkeypatch, capsys, "decode", path, "--json")
    return json.loads(out)["reads"]


def _inspected(monkeypatch, capsys, *args) -> tuple[int, dict, str]:
    code, out, err = run_cli(monkeypatch, capsys, "inspect", "--json", *args)
    return code, (json.loads(out) if out.strip() else {}), err


@pytest.mark.parametrize("n", [0, 1, 2])
def test_read_n_measures_the_n_th_read_in_decode_s_order(monkeypatch, capsys, n):
    decoded = _decoded(monkeypatch, capsys, THREE)
    code, doc, _ = _inspected(monkeypatch, capsys, THREE, "--read", str(n))
    assert code == EXIT_VALID and len(doc["reads"]) == 1
    r, want = doc["reads"][0], decoded[n]
    assert (r["channel"], r["text"]) == (want["channel"], want["text"])
    assert r["selected_read"] == n


def test_read_n_on_a_capture_of_several_swipes_gives_that_swipe_in_capture_time(swipes, monkeypatch, capsys):
    decoded = _decoded(monkeypatch, capsys, swipes)
    code, doc, _ = _inspected(monkeypatch, capsys, swipes, "--read", "3")
    assert code == EXIT_VALID and len(doc["reads"]) == 1
    r = doc["reads"][0]
    assert abs(r["start_s"] + r["window_start_s"] - decoded[3]["start_s"]) < 1e-3
    # the context is 0.5 s either side of the read (READ_CONTEXT_S), inside the capture
    assert abs(r["window_start_s"] - (decoded[3]["start_s"] - 0.5)) < 1e-3


def test_a_window_measures_the_reads_inside_it_with_times_from_its_start(swipes, monkeypatch, capsys):
    decoded = _decoded(monkeypatch, capsys, swipes)
    a, b = decoded[1]["start_s"] - 0.3, decoded[2]["end_s"] + 0.3
    code, doc, _ = _inspected(monkeypatch, capsys, swipes, "--window", f"{a}:{b}")
    assert code == EXIT_VALID
    assert [r["text"] for r in doc["reads"]] == [decoded[1]["text"], decoded[2]["text"]]
    starts = [r["start_s"] + r["window_start_s"] for r in doc["reads"]]
    assert np.allclose(starts, [decoded[1]["start_s"], decoded[2]["start_s"]], atol=1e-3)
    assert all(ch["window_start_s"] == pytest.approx(a, abs=1e-6) for ch in doc["channels"])


def test_read_n_counts_within_the_window_when_both_are_given(swipes, monkeypatch, capsys):
    decoded = _decoded(monkeypatch, capsys, swipes)
    a = decoded[2]["start_s"] - 0.2
    code, doc, _ = _inspected(monkeypatch, capsys, swipes, "--window", f"{a}:", "--read", "1")
    assert code == EXIT_VALID and len(doc["reads"]) == 1
    assert abs(doc["reads"][0]["start_s"] + doc["reads"][0]["window_start_s"] - decoded[3]["start_s"]) < 1e-3


def test_the_whole_capture_has_a_window_from_zero_to_its_end(monkeypatch, capsys):
    code, doc, _ = _inspected(monkeypatch, capsys, THREE)
    assert code == EXIT_VALID
    assert all(r["window_start_s"] == 0.0 and r["selected_read"] is None for r in doc["reads"])
    assert all(r["window_end_s"] == pytest.approx(0.293, abs=1e-3) for r in doc["reads"])


@pytest.mark.parametrize("args,needle", [
    (["--window", "5:2"], "end after it starts"),
    (["--window", "0.1:0.1"], "end after it starts"),
    (["--window", "nan:0.2"], "finite"),
    (["--window", "0:inf"], "finite"),
    (["--window", "-1:0.2"], "before the capture"),
    (["--window", "7:"], "past the end"),
    (["--window", "0.1:9"], "past the end"),
    (["--window", "0.1-0.2"], "START:END"),
    (["--window", "a:b"], "START:END"),
    (["--read", "-1"], "from 0"),
    (["--read", "-2"], "from 0"),
    (["--read", "3"], "holds 3 read(s)"),
    (["--read", "x"], "--read"),
    (["--window", "0.2:", "--read", "0"], "holds 0 read(s)"),
])
def test_a_bad_window_or_read_number_is_one_error_line_with_exit_code_2(monkeypatch, capsys, args, needle):
    code, out, err = run_cli(monkeypatch, capsys, "inspect", THREE, *args)
    assert code == EXIT_BAD_INPUT and out == ""
    assert len(err.strip().splitlines()) == 1 and needle in err and "Traceback" not in err


def test_a_bad_window_fails_before_a_plot_is_written(monkeypatch, capsys, tmp_path):
    code, _, _ = run_cli(monkeypatch, capsys, "inspect", THREE, "--window", "5:2", "--plot", tmp_path / "p.png")
    assert code == EXIT_BAD_INPUT and not (tmp_path / "p.png").exists()


def test_a_capture_over_the_limit_needs_a_window_or_a_read(swipes, monkeypatch, capsys):
    monkeypatch.setattr("readchan.cli.inspect_window.WHOLE_LIMIT_S", 5.0)
    code, out, err = run_cli(monkeypatch, capsys, "inspect", swipes)
    assert code == EXIT_BAD_INPUT and out == "" and len(err.strip().splitlines()) == 1
    assert "--window" in err and "--read" in err
    code, doc, _ = _inspected(monkeypatch, capsys, swipes, "--window", ":")
    assert code == EXIT_VALID and len(doc["reads"]) == 6


def test_read_n_on_a_long_capture_finds_its_reads_streamed(swipes, monkeypatch, capsys):
    decoded = _decoded(monkeypatch, capsys, swipes)
    monkeypatch.setattr("readchan.cli.inspect_window.WHOLE_LIMIT_S", 5.0)
    monkeypatch.setattr("readchan.stream.WHOLE_S", 5.0)
    code, doc, _ = _inspected(monkeypatch, capsys, swipes, "--read", "5")
    assert code == EXIT_VALID and len(doc["reads"]) == 1
    assert abs(doc["reads"][0]["start_s"] + doc["reads"][0]["window_start_s"] - decoded[5]["start_s"]) < 1e-3
    code, _, err = run_cli(monkeypatch, capsys, "inspect", swipes, "--read", "6")
    assert code == EXIT_BAD_INPUT and "holds 6 read(s)" in err


def test_a_plot_of_more_reads_than_the_limit_draws_the_first_with_one_warning(monkeypatch, capsys, tmp_path):
    monkeypatch.setattr("readchan.cli.inspect.PLOT_MAX_READS", 1)
    code, _, err = run_cli(monkeypatch, capsys, "inspect", THREE, "--plot", tmp_path / "p.png")
    assert code == EXIT_VALID and "5 panel(s)" in err
    warnings = [ln for ln in err.splitlines() if ln.startswith("readchan: warning:")]
    assert len(warnings) == 1 and "3 reads" in warnings[0] and "--read" in warnings[0]


def test_a_plot_of_one_read_names_it_in_the_title(swipes, monkeypatch, capsys, tmp_path):
    from matplotlib.figure import Figure

    titles = []
    monkeypatch.setattr(Figure, "suptitle", lambda self, t, **kw: titles.append(t))
    code, _, err = run_cli(monkeypatch, capsys, "inspect", swipes, "--read", "3", "--plot", tmp_path / "p.png")
    assert code == EXIT_VALID and "5 panel(s)" in err
    assert any("read 3:" in t and "times count from" in t for t in titles)


def _zoom_axes(fig):
    return [ax for ax in fig.get_axes() if ax.get_title(loc="left").startswith("bits ")]


def test_zoomed_panels_draw_at_most_a_bounded_number_of_points(monkeypatch):
    from readchan.io.capture import load_capture
    from readchan.measure.diagnose import inspect_capture
    from readchan.report import plot

    reports = inspect_capture(load_capture(THREE))
    monkeypatch.setattr(plot, "ZOOM_MAX_POINTS", 200)
    monkeypatch.setattr(plot, "ZOOM_BINS", 150)
    fig, _ = plot.report_figure(reports)
    zooms = _zoom_axes(fig)
    assert len(zooms) == 6
    for ax in zooms:
        assert all(len(line.get_xdata()) <= 200 for line in ax.get_lines())
        assert len(ax.collections) >= 1           # the min/max envelope


def test_an_envelope_draws_nothing_inside_a_masked_character(monkeypatch):
    from matplotlib.figure import Figure

    from readchan.io.capture import load_capture
    from readchan.measure.diagnose import inspect_capture
    from readchan.report import plot

    reports = inspect_capture(load_capture(THREE))
    ch, r = reports[0], reports[0].reads[0]
    text = plot.mask_text(r.read.frame.text, r.read.frame.format, False, trusted=r.read.valid)
    spans = plot.masked_spans(r, text)
    assert spans.size                                # track 1 holds an account number
    first_masked = int(np.searchsorted(r.read.bits.start_s, spans[0, 0]))
    monkeypatch.setattr(plot, "ZOOM_MAX_POINTS", 200)
    ax = Figure().add_subplot()
    plot._zoom(ax, ch, r, max(0, first_masked - 8), text, spans, "over the account number")
    (coll,) = ax.collections[-1:]
    xs = np.concatenate([p.vertices[:, 0] for p in coll.get_paths()])
    step = float(np.median(np.diff(np.unique(xs))))   # one envelope column
    assert xs.size and step > 0
    for a, b in spans:
        assert not np.any((xs > a + step) & (xs < b - step))
