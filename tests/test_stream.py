"""Streaming decode (:mod:`readchan.stream`): a long capture decoded stretch by stretch gives the
reads a whole-file decode gives, whatever the block and piece sizes, and its memory does not
grow with the capture's length.

Reference: :func:`readchan.channel.decode_capture` on the whole capture (its own answers are
pinned by tests/test_golden.py), and the synthesizer's swipes."""

from __future__ import annotations

import importlib.util
import json
import subprocess
import sys
from pathlib import Path

import pytest

from readchan import stream
from readchan.channel import decode_capture
from readchan.io.capture import load_capture

ROOT = Path(__file__).resolve().parents[1]
_spec = importlib.util.spec_from_file_location("bench_stream", ROOT / "scripts" / "bench_stream.py")
bench = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(bench)


def _key(r):
    return (r.channel, r.frame.text, r.valid, r.direction)


def _whole(path):
    return [r for res in decode_capture(load_capture(path)) for r in res.reads]


@pytest.fixture(scope="module")
def idle(tmp_path_factory) -> Path:
    """30 s of an idle reader: track 1 swipes 2 s apart (invented card)."""
    path = tmp_path_factory.mktemp("stream") / "idle.wav"
    bench.build(path, 2.0, 30.0)
    return path


@pytest.fixture(scope="module")
def continuous(tmp_path_factory) -> Path:
    """15 s of back-to-back swipes."""
    path = tmp_path_factory.mktemp("stream") / "continuous.wav"
    bench.build(path, 0.0, 15.0)
    return path


def _check_same(streamed, whole):
    assert [_key(r) for r in streamed] == [_key(r) for r in whole]
    for s, w in zip(streamed, whole):
        assert abs(s.start_s - w.start_s) < 1e-6
        # the stretch's own noise floor may keep or trim one clocking zero at a read's edge
        assert abs(len(s.bits) - len(w.bits)) <= 1
        assert abs(s.end_s - w.end_s) <= 1.5 * float(w.bits.period_s.max())


def test_streamed_long_capture_gives_the_whole_file_reads(idle):
    whole = _whole(idle)
    assert len(whole) >= 16 and all(r.valid for r in whole)
    _check_same(stream.decode_file(idle, whole_s=10.0), whole)


@pytest.mark.parametrize("piece_s", [2.9, 4.1, 5.7])
def test_reads_across_a_piece_edge_are_found_once(continuous, monkeypatch, piece_s):
    # back-to-back swipes: every cut falls next to or inside a swipe, at a different offset per size
    monkeypatch.setattr(stream, "PIECE_S", piece_s)
    monkeypatch.setattr(stream, "OVERLAP_S", 1.0)
    _check_same(stream.decode_file(continuous, whole_s=5.0), _whole(continuous))


@pytest.mark.parametrize("block", [3000, 65536])
def test_small_gate_blocks_give_the_same_reads(idle, monkeypatch, block):
    monkeypatch.setattr(stream, "GATE_BLOCK", block)
    _check_same(stream.decode_file(idle, whole_s=10.0), _whole(idle))


def test_reads_are_yielded_as_their_stretch_is_decoded(idle):
    it = stream.iter_reads(idle, whole_s=10.0)
    first = next(it)
    assert first.valid and first.start_s < 3.0


def test_a_short_capture_is_decoded_whole_exactly_as_decode_capture_does():
    path = ROOT / "fixtures" / "three-track-swipe.wav"
    got, want = stream.decode_file(path), sorted(_whole(path), key=lambda r: (r.channel, r.start_s))
    assert [(_key(r), r.start_s, len(r.bits)) for r in got] == [(_key(r), r.start_s, len(r.bits)) for r in want]


_RSS = """
import json, resource, sys
from readchan.stream import decode_file
reads = decode_file(sys.argv[1], whole_s=10.0)
print(json.dumps({"rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024, "reads": len(reads)}))
"""


def test_memory_stays_flat_as_the_capture_grows(tmp_path):
    rows = []
    for minutes in (0.5, 2.0):
        path = tmp_path / f"idle-{minutes:g}.wav"
        n, swipes = bench.build(path, 2.0, minutes * 60.0)
        out = subprocess.run([sys.executable, "-c", _RSS, str(path)], cwd=ROOT, capture_output=True, text=True,
                             check=True).stdout
        rows.append((json.loads(out.strip().splitlines()[-1]), swipes, n))
    (short, swipes_short, n_short), (long, swipes_long, n_long) = rows
    assert (short["reads"], long["reads"]) == (swipes_short, swipes_long)
    # a whole-file decode needs about 50 bytes a sample: 1.5 more minutes at 48 kHz would add 220 MB
    assert long["rss_mb"] - short["rss_mb"] < 40.0
