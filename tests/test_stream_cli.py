"""``readchan decode`` streams an audio capture longer than :data:`readchan.stream.WHOLE_S` from
its file: the same reads (text, validity, direction) as a whole-file decode.  The threshold is
lowered here so that a short synthesized capture (invented card) takes the streamed path."""

from __future__ import annotations

import json

from readchan.channel import DecodeSettings, decode_capture
from readchan.io.capture import load_capture, write_capture
from readchan.report.render import read_dict, reads_of
from tests.conftest import run_cli, write_track2_swipes



def _capture(path, swipes=6):
    return write_track2_swipes(path, swipes)


def test_a_long_capture_is_decoded_span_by_span_with_the_whole_file_reads(tmp_path, monkeypatch, capsys):
    path = tmp_path / "rig-shift.wav"
    _capture(path)
    whole = [read_dict(r, unmask=True) for r in reads_of(decode_capture(load_capture(path), DecodeSettings()))]
    monkeypatch.setattr("readchan.stream.WHOLE_S", 5.0)
    code, out, _ = run_cli(monkeypatch, capsys, "decode", path, "--json", "--unmask")
    doc = json.loads(out)
    key = ("text", "valid", "direction", "format")
    assert code == 0 and len(whole) == 6
    assert [tuple(r[k] for k in key) for r in doc["reads"]] == [tuple(r[k] for k in key) for r in whole]
    assert all(abs(a["start_s"] - b["start_s"]) < 1e-3 for a, b in zip(doc["reads"], whole))
    assert [ch["reads"] for ch in doc["channels"]] == [6]
    assert [ch["transitions"] for ch in doc["channels"]] == [0]      # streamed: no channel-wide stages kept


def test_a_long_capture_without_a_swipe_gives_no_data(tmp_path, monkeypatch, capsys):
    import numpy as np

    path = tmp_path / "idle-rig.wav"
    write_capture(path, np.random.default_rng(2).normal(0, 0.01, (48_000 * 8, 1)), 48_000.0, kind="wav16")
    monkeypatch.setattr("readchan.stream.WHOLE_S", 5.0)
    code, out, _ = run_cli(monkeypatch, capsys, "decode", path, "--json")
    assert code == 3 and json.loads(out)["reads"] == []


def test_jobs_on_one_long_capture_spread_its_stretches_with_the_same_output(tmp_path, monkeypatch, capsys):
    path = tmp_path / "rig-shift.wav"
    _capture(path)
    monkeypatch.setattr("readchan.stream.WHOLE_S", 5.0)
    seen = []
    import readchan.stream as stream

    real = stream.decode_file

    def spy(*a, **kw):
        seen.append(kw.get("jobs"))
        return real(*a, **kw)

    monkeypatch.setattr(stream, "decode_file", spy)
    outs = []
    for jobs in ("1", "2"):
        code, out, _ = run_cli(monkeypatch, capsys, "decode", path, "--json", "--jobs", jobs)
        outs.append((code, json.loads(out)["reads"]))
    assert seen == [1, 2]
    assert outs[0] == outs[1] and outs[0][0] == 0 and len(outs[0][1]) == 6
