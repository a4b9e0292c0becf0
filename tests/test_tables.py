"""Tables: ``--bits-csv`` and ``--transitions-csv`` against the Python API's arrays, masked
account digits, atomic writes that never replace a file without ``--force``; and the
``f2f-bits`` format on a synthesized raw F2F bit stream."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import numpy as np
import pytest

import readchan
from conftest import run_cli as run
from readchan.errors import EXIT_BAD_INPUT, EXIT_VALID
from readchan.io.capture import write_capture
from readchan.synth import SpeedProfile, SynthSpec, TrackContent, synthesize

FIXTURES = Path(__file__).resolve().parent.parent / "fixtures"
SCOPE = FIXTURES / "track2-scope.csv"


def _rows(path) -> list[dict]:
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def test_the_bits_table_holds_the_apis_bits_with_their_timing(monkeypatch, capsys, tmp_path):
    code, _, _ = run(monkeypatch, capsys, "decode", "--unmask", "--bits-csv", tmp_path / "bits.csv", SCOPE)
    (ch,) = readchan.decode(SCOPE)
    bs = ch.reads[0].bits
    rows = _rows(tmp_path / "bits.csv")
    assert code == EXIT_VALID and len(rows) == len(bs)
    assert [int(r["value"]) for r in rows] == bs.bits.tolist()
    assert np.allclose([float(r["time_s"]) for r in rows], bs.start_s, rtol=1e-8)
    assert np.allclose([float(r["period_s"]) for r in rows], bs.period_s, rtol=1e-5)
    assert np.allclose([float(r["margin"]) for r in rows], bs.margin, atol=1e-5)
    assert [int(r["flags"]) for r in rows] == bs.flags.tolist()


def test_the_bits_table_names_each_bits_character(monkeypatch, capsys, tmp_path):
    run(monkeypatch, capsys, "decode", "--unmask", "--bits-csv", tmp_path / "bits.csv", SCOPE)
    (ch,) = readchan.decode(SCOPE)
    fr = ch.reads[0].frame
    rows = _rows(tmp_path / "bits.csv")
    for c, row in enumerate(fr.bit_index):           # every framed bit points back at its character
        assert {int(rows[k]["char"]) for k in row} == {c}
    assert rows[0]["char"] == ""                     # a clocking zero belongs to no character


def test_masked_characters_bits_have_no_value_and_their_transitions_are_left_out(monkeypatch, capsys, tmp_path):
    run(monkeypatch, capsys, "decode", "--bits-csv", tmp_path / "bits.csv", "--transitions-csv",
        tmp_path / "tr.csv", SCOPE)
    (ch,) = readchan.decode(SCOPE)
    fr = ch.reads[0].frame
    rows = _rows(tmp_path / "bits.csv")
    shown = readchan.formats.iso7813.mask_text(fr.text, fr.format, trusted=True)
    hidden = [c for c in range(len(fr.text)) if shown[c] != fr.text[c]]
    assert hidden and all(rows[k]["value"] == "" for c in hidden for k in fr.bit_index[c])
    assert all(rows[k]["value"] != "" for k in fr.bit_index[0])    # the start sentinel is not masked
    kept = {int(r["transition"]) for r in _rows(tmp_path / "tr.csv")}
    a = ch.reads[0].bits.start_s[fr.bit_index[hidden[0]][0]]
    inside = np.flatnonzero(np.isclose(ch.transitions.times_s, a, atol=1e-9) | (ch.transitions.times_s > a))
    assert 0 < len(kept) < len(ch.transitions) and inside[0] not in kept


def test_the_transitions_table_holds_the_apis_transitions(monkeypatch, capsys, tmp_path):
    code, _, _ = run(monkeypatch, capsys, "decode", "--unmask", "--transitions-csv", tmp_path / "tr.csv", SCOPE)
    (ch,) = readchan.decode(SCOPE)
    tr = ch.transitions
    rows = _rows(tmp_path / "tr.csv")
    assert code == EXIT_VALID and len(rows) == len(tr)
    assert np.allclose([float(r["time_s"]) for r in rows], tr.times_s, rtol=1e-10)
    assert [int(r["sample"]) for r in rows] == tr.index.tolist()
    assert [int(r["polarity"]) for r in rows] == np.where(tr.amplitude >= 0, 1, -1).tolist()
    assert np.allclose([float(r["amplitude"]) for r in rows], tr.amplitude, rtol=1e-5)


def test_tables_of_a_batch_hold_every_capture_by_source(monkeypatch, capsys, tmp_path):
    comp = FIXTURES / "track1-comparator.wav"
    run(monkeypatch, capsys, "decode", "--transitions-csv", tmp_path / "tr.csv", SCOPE, comp)
    sources = [r["source"] for r in _rows(tmp_path / "tr.csv")]
    assert sources[0] == str(SCOPE) and sources[-1] == str(comp)


def test_a_table_never_replaces_a_file_without_force(monkeypatch, capsys, tmp_path):
    path = tmp_path / "bits.csv"
    path.write_text("precious\n")
    code, _, err = run(monkeypatch, capsys, "decode", "--bits-csv", path, SCOPE)
    assert code == EXIT_BAD_INPUT and "exists" in err and path.read_text() == "precious\n"
    code, _, _ = run(monkeypatch, capsys, "decode", "--force", "--bits-csv", path, SCOPE)
    assert code == EXIT_VALID and path.read_text().startswith("source,channel,read,bit,time_s")


def test_a_table_cannot_be_one_of_the_captures(monkeypatch, capsys):
    code, _, err = run(monkeypatch, capsys, "decode", "--force", "--transitions-csv", SCOPE, SCOPE)
    assert code == EXIT_BAD_INPUT and "capture itself" in err


@pytest.fixture(scope="module")
def raw_stream(tmp_path_factory):
    """A non-ISO F2F stream: 16 clocking zeros, 160 seeded random bits, 16 zeros, at 100 bpi."""
    payload = np.random.default_rng(12).integers(0, 2, 160).astype(np.uint8)
    bits = np.concatenate((np.zeros(16, np.uint8), payload, np.zeros(16, np.uint8)))
    res = synthesize(SynthSpec(tracks=(TrackContent(bits, 100.0),), speed=SpeedProfile(mean_cm_s=30.0), seed=4))
    path = write_capture(tmp_path_factory.mktemp("raw") / "raw.wav", res.samples, res.rate_hz)
    return path, bits


def test_f2f_bits_gives_a_raw_streams_bits_in_reading_order(monkeypatch, capsys, raw_stream):
    path, bits = raw_stream
    code, out, _ = run(monkeypatch, capsys, "decode", "--json", "--format", "f2f-bits", path)
    (read,) = json.loads(out)["reads"]
    assert code == EXIT_VALID and read["format"] == "f2f-bits" and read["valid"]
    # the first clocking zero's cell starts at the first transition: every bit is recovered
    assert read["bits"] == "".join(map(str, bits)) and read["n_bits"] == bits.size


def test_f2f_bits_reads_fill_the_bits_table(monkeypatch, capsys, raw_stream, tmp_path):
    path, bits = raw_stream
    run(monkeypatch, capsys, "decode", "--format", "f2f-bits", "--bits-csv", tmp_path / "b.csv", path)
    assert "".join(r["value"] for r in _rows(tmp_path / "b.csv")) == "".join(map(str, bits))


def test_f2f_bits_text_output_shows_the_bits(monkeypatch, capsys, raw_stream):
    path, bits = raw_stream
    _, out, _ = run(monkeypatch, capsys, "decode", "--format", "f2f-bits", path)
    assert "".join(map(str, bits[:8])) + " " + "".join(map(str, bits[8:16])) in out


def test_auto_does_not_try_f2f_bits(monkeypatch, capsys, raw_stream):
    path, _ = raw_stream
    _, out, _ = run(monkeypatch, capsys, "decode", "--json", path)
    assert json.loads(out)["reads"] == []
    assert "f2f-bits" not in [f.name for f in readchan.formats.registry.candidates("auto")]
