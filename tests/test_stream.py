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

import numpy as np
import pytest

from readchan import stream, survey
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
    monkeypatch.setattr(survey, "GATE_BLOCK", block)
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


def _capture(path: Path, *, lead_s: float, snr_db: float, swipes: int, gap_s: float, seed: int = 5) -> Path:
    """A synthesized track 1 capture (invented card, :data:`bench.T1`) written as 16-bit WAV."""
    import soundfile as sf
    from readchan.synth import Impairments, SpeedProfile, SynthSpec, synthesize
    from readchan.synth.card import track_content

    spec = SynthSpec(tracks=(track_content(bench.T1, track=1),), speed=SpeedProfile(40.0, "swipe", 0.3),
                     swipes=swipes, gap_s=gap_s, lead_s=lead_s, seed=seed,
                     impairments=Impairments(snr_db=snr_db, jitter=0.03, hum_level=0.05))
    sf.write(path, synthesize(spec).samples[:, 0], 48_000, subtype="PCM_16")
    return path


@pytest.mark.parametrize("offset", [0, 1, 499, 1500, 2999])
def test_a_swipe_at_any_offset_to_the_gate_blocks_decodes_as_whole(tmp_path, monkeypatch, offset):
    # the swipe's first sample falls at a different place in the gate's 3000-frame reading blocks
    # and its 960-sample (20 ms) energy blocks
    monkeypatch.setattr(survey, "GATE_BLOCK", 3000)
    path = _capture(tmp_path / "one.wav", lead_s=(24_000 + offset) / 48_000, snr_db=30.0, swipes=2, gap_s=1.5)
    whole = _whole(path)
    assert len(whole) == 2 and all(r.valid for r in whole)
    _check_same(stream.decode_file(path, whole_s=1.0), whole)


@pytest.mark.parametrize("snr_db", [12.0, 15.0])
def test_the_activity_gate_keeps_every_read_a_whole_file_decode_finds_at_low_snr(tmp_path, snr_db):
    # weak swipes with long idle gaps: the gate must not leave out a stretch that holds a read,
    # valid or not (the whole-file decode is the reference)
    path = _capture(tmp_path / "weak.wav", lead_s=1.0, snr_db=snr_db, swipes=4, gap_s=2.5)
    whole = _whole(path)
    assert len(whole) == 4
    streamed = stream.decode_file(path, whole_s=1.0)
    assert len(streamed) == len(whole)
    # at low SNR a stretch's own noise floor may start a read a few bit cells earlier or later
    assert all(abs(s.start_s - w.start_s) < 0.01 for s, w in zip(streamed, whole))


def test_two_processes_give_the_reads_of_one(idle, monkeypatch):
    monkeypatch.setattr(stream, "PIECE_S", 4.0)      # several pieces, so both workers get some
    one = stream.decode_file(idle, whole_s=10.0)
    two = stream.decode_file(idle, whole_s=10.0, jobs=2)
    assert [(_key(r), r.start_s, len(r.bits), r.end_s) for r in two] == \
        [(_key(r), r.start_s, len(r.bits), r.end_s) for r in one]


def test_progress_rises_to_one(idle):
    seen = []
    stream.decode_file(idle, whole_s=10.0, progress=seen.append)
    assert seen[-1] == 1.0 and seen == sorted(seen) and len(seen) > 3


@pytest.mark.parametrize("jobs", [0, -1, 1.5, True])
def test_a_bad_process_count_is_a_parameter_error(idle, jobs):
    from readchan.errors import ParameterError

    with pytest.raises(ParameterError, match="jobs"):
        stream.decode_file(idle, jobs=jobs)


def test_a_stretch_uses_the_whole_captures_converter_step(tmp_path, monkeypatch):
    # a short noisy stretch has too many distinct values for the step to be found in it alone;
    # the 16-bit file's step is 2**-15 of full scale (soundfile's PCM_16 scaling)
    from readchan.channel import decode_channel as real

    path = _capture(tmp_path / "weak.wav", lead_s=1.0, snr_db=12.0, swipes=2, gap_s=2.5)
    steps = []

    def spy(x, rate_hz, settings, **kw):
        steps.append(settings.quant_step)
        return real(x, rate_hz, settings, **kw)

    monkeypatch.setattr(stream, "decode_channel", spy)
    stream.decode_file(path, whole_s=1.0)
    assert steps and all(q == 2.0 ** -15 for q in steps)
    whole = decode_capture(load_capture(path))[0]
    assert whole.front_end.quant_step == 2.0 ** -15


@pytest.mark.parametrize("capture", ["idle", "weak", "bench"])
def test_the_per_capture_decisions_are_those_of_a_whole_file_decode(tmp_path, monkeypatch, idle, capture):
    # converter step, signal band and hum frequency are decided once for the capture, the way
    # the whole-file front end decides them, and handed to every stretch (0: none found)
    from readchan.channel import decode_channel as real

    path = {"idle": lambda: idle,
            "weak": lambda: _capture(tmp_path / "weak.wav", lead_s=1.0, snr_db=12.0, swipes=4, gap_s=2.5),
            "bench": lambda: bench.build(tmp_path / "bench.wav", 0.25, 12.0) and tmp_path / "bench.wav"}[capture]()
    seen = []

    def spy(x, rate_hz, settings, **kw):
        seen.append((settings.quant_step, settings.band_hz, settings.hum_hz))
        return real(x, rate_hz, settings, **kw)

    monkeypatch.setattr(stream, "decode_channel", spy)
    stream.decode_file(path, whole_s=1.0)
    fe = decode_capture(load_capture(path))[0].front_end
    assert seen and set(seen) == {(fe.quant_step, fe.band_hz or 0.0, fe.hum_hz or 0.0)}


def test_a_capture_without_quiet_leaves_the_hum_to_each_stretch(continuous):
    from readchan.io.blocks import audio_info

    info = audio_info(continuous)
    sv = survey.survey(str(continuous), [0], info.rate_hz, info.frames, info.subtype)[0]
    assert sv.gate.spans() == [(0, info.frames)] and sv.hum_hz() is None


def test_a_cut_in_quiet_capture_needs_no_overlap(tmp_path, monkeypatch):
    # bench density: 0.25 s gaps merge the swipes into one span, cut every 4 s at a quiet block
    monkeypatch.setattr(stream, "PIECE_S", 4.0)
    path = tmp_path / "bench.wav"
    bench.build(path, 0.25, 20.0)
    from readchan.io.blocks import audio_info

    info = audio_info(path)
    surveys = survey.survey(str(path), [0], info.rate_hz, info.frames, info.subtype)
    plan = stream._plan([sv.gate for sv in surveys], [0], info.frames, info.rate_hz)
    settle = int(stream.SETTLE_S * info.rate_hz)
    assert len(plan) >= 4
    assert all(pc.own_lo - pc.lo <= settle and pc.hi - pc.own_hi <= settle for pc in plan)
    _check_same(stream.decode_file(path, whole_s=5.0), _whole(path))


def test_quiet_runs_need_three_quiet_blocks():
    e = np.array([9, 1, 1, 1, 9, 1, 1, 9, 1, 1, 1, 1], float)
    assert stream._quiet_blocks(e, 1.0).tolist() == [False, False, True, False, False, False, False,
                                                      False, False, True, True, False]
