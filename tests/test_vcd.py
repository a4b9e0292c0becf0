"""VCD (IEEE 1364 §18) in and out: a comparator VCD made from a synthesized flux waveform decodes
to the card's text; a strobe-and-data VCD decodes through the card framers; signals are chosen
by name with a clear error; ``--vcd-out`` writes transitions, cells, bits and characters that
read back with the reference library (pyvcd) as the Python API's arrays."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from vcd import VCDWriter
from vcd.reader import TokenKind, tokenize

import readchan
from conftest import run_cli as run
from readchan.errors import EXIT_BAD_INPUT, EXIT_VALID
from readchan.io.vcd import VcdComparator, VcdStrobeData, load_vcd
from readchan.io.vcd_write import write_comparator_vcd, write_strobe_vcd
from readchan.synth import SpeedProfile, SynthSpec, synthesize
from readchan.synth.card import track_content
from readchan.units import bit_cell_m

FIXTURES = Path(__file__).resolve().parent.parent / "fixtures"
T1 = "%B9912345678901239^QUILL/ODESSA M^2912101000000000000?"     # invented card (fixtures/README.md)
T2 = ";9912345678901239=29121010000000000?"


def _flux_vcd(path, text=T1, track=1, speed_cm_s=35.0):
    spec = SynthSpec(tracks=(track_content(text, track=track),), speed=SpeedProfile(mean_cm_s=speed_cm_s),
                     output="flux", rate_hz=200_000.0, seed=5)
    res = synthesize(spec)
    write_comparator_vcd(path, res.samples[:, 0], res.rate_hz, name="comp")
    return res


def _read_vcd(path) -> tuple[dict, dict]:
    """(name → id code, id code → [(tick, value)]) of a VCD, through pyvcd's reader."""
    names, changes, scopes, now = {}, {}, [], 0
    with open(path, "rb") as fh:
        for tok in tokenize(fh):
            if tok.kind is TokenKind.SCOPE:
                scopes.append(tok.data.ident)
            elif tok.kind is TokenKind.UPSCOPE:
                scopes.pop()
            elif tok.kind is TokenKind.VAR:
                names[".".join([*scopes, tok.data.reference])] = tok.data.id_code
            elif tok.kind is TokenKind.CHANGE_TIME:
                now = tok.data
            elif tok.kind in (TokenKind.CHANGE_SCALAR, TokenKind.CHANGE_STRING):
                changes.setdefault(tok.data.id_code, []).append((now, tok.data.value))
    return names, changes


def test_a_comparator_vcd_of_a_synthesized_flux_waveform_decodes_to_the_card_text(monkeypatch, capsys, tmp_path):
    _flux_vcd(tmp_path / "swipe.vcd")
    code, out, _ = run(monkeypatch, capsys, "decode", "--json", "--unmask", tmp_path / "swipe.vcd")
    (read,) = json.loads(out)["reads"]
    assert code == EXIT_VALID and read["text"] == T1 and read["valid"]


def test_the_vcd_timescale_is_the_clock_of_the_sampled_comparator(tmp_path):
    _flux_vcd(tmp_path / "swipe.vcd")
    got = load_vcd(tmp_path / "swipe.vcd")
    assert isinstance(got, VcdComparator) and got.timescale_s == 1e-6
    # the default rate lets the shortest interval span at least 64 samples, never above the VCD clock
    assert got.capture.rate_hz <= 1e6
    assert set(np.unique(got.capture.samples)) == {0.0, 1.0}


def test_a_strobe_and_data_vcd_built_here_decodes_through_the_framers(monkeypatch, capsys, tmp_path):
    tc = track_content(T2, track=2)
    write_strobe_vcd(tmp_path / "chip.vcd", tc.bits, bit_cell_m(tc.density_bpi) / 0.3)     # 30 cm/s
    got = load_vcd(tmp_path / "chip.vcd")
    assert isinstance(got, VcdStrobeData) and np.array_equal(got.bits, 1 - tc.bits)       # active-low data
    code, out, _ = run(monkeypatch, capsys, "decode", "--json", "--unmask", tmp_path / "chip.vcd")
    (read,) = json.loads(out)["reads"]
    assert code == EXIT_VALID and read["text"] == T2
    assert read["mean_speed_cm_s"] == pytest.approx(30.0, rel=1e-3)   # v = 2.54 / (ρ T) cm/s at 75 bpi


def test_an_active_high_pair_on_rising_edges_decodes_too(monkeypatch, capsys, tmp_path):
    tc = track_content(T2, track=2)
    write_strobe_vcd(tmp_path / "chip.vcd", tc.bits, 1e-3, active_low=False)
    code, out, _ = run(monkeypatch, capsys, "decode", "--json", "--unmask", "--strobe-edge", "rising",
                       "--strobe-name", "rcp", "--data-name", "reader.rdd", tmp_path / "chip.vcd")
    assert code == EXIT_VALID and json.loads(out)["reads"][0]["text"] == T2


def _three_signals(path):
    with open(path, "w") as fh:
        w = VCDWriter(fh, timescale="1 us", date="")
        a = w.register_var("bench", "comp_a", "wire", size=1, init=0)
        w.register_var("bench", "comp_b", "wire", size=1, init=0)
        w.register_var("bench", "enable", "wire", size=1, init=1)
        w.register_var("bench", "count", "wire", size=8, init=0)
        for k in range(40):
            w.change(a, 100 * (k + 1), k % 2 == 0)
        w.close()


def test_several_fitting_signals_give_one_error_listing_them(monkeypatch, capsys, tmp_path):
    _three_signals(tmp_path / "bench.vcd")
    code, _, err = run(monkeypatch, capsys, "decode", tmp_path / "bench.vcd")
    (line,) = err.splitlines()
    assert code == EXIT_BAD_INPUT and line.startswith("readchan: error:")
    for name in ("bench.comp_a", "bench.comp_b", "bench.enable", "bench.count (8 bits)", "--signal-name"):
        assert name in line


def test_a_name_that_fits_no_signal_lists_the_signals(monkeypatch, capsys, tmp_path):
    _three_signals(tmp_path / "bench.vcd")
    code, _, err = run(monkeypatch, capsys, "decode", "--signal-name", "comp_c", tmp_path / "bench.vcd")
    assert code == EXIT_BAD_INPUT and "no signal named 'comp_c'" in err and "bench.comp_b" in err


def test_a_signal_chosen_by_name_is_decoded(tmp_path):
    _three_signals(tmp_path / "bench.vcd")
    got = load_vcd(tmp_path / "bench.vcd", signal_name="comp_a")
    assert got.signal.name == "bench.comp_a" and got.capture.channel_names == ("bench.comp_a",)


def test_a_file_that_is_not_vcd_is_one_error(monkeypatch, capsys, tmp_path):
    p = tmp_path / "broken.vcd"
    p.write_text("$timescale 1 us $end\n$var wire 1 ! a $end\n")       # declarations never end
    code, _, err = run(monkeypatch, capsys, "decode", p)
    assert code == EXIT_BAD_INPUT and len(err.splitlines()) == 1 and "$enddefinitions" in err


def test_vcd_out_reads_back_as_the_apis_transitions_bits_and_characters(monkeypatch, capsys, tmp_path):
    out_vcd = tmp_path / "found.vcd"
    code, _, _ = run(monkeypatch, capsys, "decode", "--unmask", "--vcd-out", out_vcd, FIXTURES / "track2-scope.csv")
    (ch,) = readchan.decode(FIXTURES / "track2-scope.csv")
    (read,) = ch.reads
    names, changes = _read_vcd(out_vcd)
    tick = 1e-7                                                      # 20 kHz: 1/100 of a sample is 500 ns → 100 ns
    trans = changes[names["readchan.ch0.transition"]]
    assert code == EXIT_VALID and len(trans) == len(ch.transitions) + 1      # + the initial z
    assert np.allclose([t * tick for t, _ in trans[1:]], ch.transitions.times_s, atol=tick)
    cells = [t for t, _ in changes[names["readchan.ch0.cell"]][1:]]     # the cell clock toggles every bit
    assert np.allclose(np.array(cells) * tick, read.bits.start_s, atol=tick)
    bit_changes = changes[names["readchan.ch0.bit"]]                   # a VCD records a value when it changes
    ticks = np.array([t for t, _ in bit_changes])
    bits = [bit_changes[np.searchsorted(ticks, t, side="right") - 1][1] for t in cells]
    assert "".join(bits) == "".join(map(str, read.bits.bits))
    assert _chars(changes[names["readchan.ch0.char"]]) == read.frame.text


def _chars(changes) -> str:
    labels = [v.partition(":") for _, v in changes if v]
    assert [int(i) for i, _, _ in labels] == list(range(len(labels)))
    return "".join(c for _, _, c in labels if c != "LRC")


def test_vcd_out_keeps_account_digits_masked_without_unmask(monkeypatch, capsys, tmp_path):
    out_vcd = tmp_path / "found.vcd"
    run(monkeypatch, capsys, "decode", "--vcd-out", out_vcd, FIXTURES / "track2-scope.csv")
    names, changes = _read_vcd(out_vcd)
    assert _chars(changes[names["readchan.ch0.char"]]).startswith(";991234******1239=")
    assert any(v == "x" for _, v in changes[names["readchan.ch0.bit"]])


def test_vcd_out_of_a_vcd_capture_keeps_its_timescale(monkeypatch, capsys, tmp_path):
    out_vcd = tmp_path / "found.vcd"
    run(monkeypatch, capsys, "decode", "--vcd-out", out_vcd, FIXTURES / "track2-strobe.vcd")
    assert "$timescale 1 us $end" in out_vcd.read_text()


def test_vcd_out_refuses_an_existing_file_and_several_captures(monkeypatch, capsys, tmp_path):
    out_vcd = tmp_path / "found.vcd"
    out_vcd.write_text("keep me")
    code, _, err = run(monkeypatch, capsys, "decode", "--vcd-out", out_vcd, FIXTURES / "track2-scope.csv")
    assert code == EXIT_BAD_INPUT and "exists" in err and out_vcd.read_text() == "keep me"
    code, _, err = run(monkeypatch, capsys, "decode", "--vcd-out", tmp_path / "new.vcd", FIXTURES / "track2-scope.csv",
                       FIXTURES / "track1-comparator.wav")
    assert code == EXIT_BAD_INPUT and "one capture" in err and not (tmp_path / "new.vcd").exists()


def test_f2f_bits_of_a_strobe_and_data_vcd_are_the_chips_bits(monkeypatch, capsys, tmp_path):
    tc = track_content(T2, track=2)
    write_strobe_vcd(tmp_path / "chip.vcd", tc.bits, 1e-3)
    code, out, _ = run(monkeypatch, capsys, "decode", "--json", "--format", "f2f-bits", "--bits-csv",
                       tmp_path / "bits.csv", tmp_path / "chip.vcd")
    (read,) = json.loads(out)["reads"]
    assert read["bits"] == "".join(str(1 - b) for b in tc.bits)          # as on the (active-low) wire
    assert read["min_margin"] is None and "NaN" not in out                # strict JSON
    rows = (tmp_path / "bits.csv").read_text().splitlines()[1:]
    assert len(rows) == tc.bits.size and all(r.split(",")[6] == "" for r in rows)   # a chip's bits: no margin
