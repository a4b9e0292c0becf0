"""Streamed tape decode (:mod:`readchan.stream_tape`, :mod:`readchan.stream_kcs`): a timecode
channel decoded from its file in pieces gives exactly the read a whole-file decode gives,
wherever the pieces are cut; a cassette channel gives the same bytes, with times and margins
equal to rounding.

Reference: :func:`readchan.formats.ltc.read.decode_ltc` and
:func:`readchan.formats.kcs.read.decode_kcs` on the whole capture (their answers are pinned by
tests/test_golden.py), the synthesizers' frames and bytes, and the ``timecode`` package (PyPI)
for the label sequence."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
from timecode import Timecode

from readchan import stream
from readchan.channel import DecodeSettings, decode_capture
from readchan.formats.kcs.read import decode_kcs
from readchan.formats.ltc.read import decode_ltc
from readchan.io.capture import NonPhysicalSampleWarning, load_capture
from readchan.stream_kcs import stream_kcs
from readchan.stream_tape import stream_ltc
from readchan.synth.kcs import KcsSpec, synthesize_kcs
from readchan.synth.ltc import LtcSpec, synthesize_ltc
from readchan.synth.playback import Playback, PlaySpeed

ROOT = Path(__file__).resolve().parents[1]
_spec = importlib.util.spec_from_file_location("bench_stream_tape", ROOT / "scripts" / "bench_stream_tape.py")
bench = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(bench)

BIT_FIELDS = ("bits", "start_s", "end_s", "period_s", "margin", "flags", "run", "runs_s")


def _whole(path: Path, kind: str = "auto"):
    cap = load_capture(path)
    return decode_ltc(cap.channel(0), cap.rate_hz, kind=kind)


def _assert_same_read(s, w) -> None:
    """Every part of two timecode reads equal, floats bit for bit."""
    assert s.frames == w.frames
    assert s.events == w.events
    assert (s.rate_fps, s.rate_fps_candidates, s.measured_bit_rate_hz) == (w.rate_fps, w.rate_fps_candidates,
                                                                         w.measured_bit_rate_hz)
    assert (s.direction, s.valid, s.start_s, s.end_s, s.signal_kind) == (w.direction, w.valid, w.start_s, w.end_s,
                                                                      w.signal_kind)
    for f in BIT_FIELDS:
        assert np.array_equal(getattr(s.bits, f), getattr(w.bits, f)), f
    assert (s.bits.kind, s.bits.n_transitions) == (w.bits.kind, w.bits.n_transitions)


@pytest.fixture(scope="module")
def three_minutes(tmp_path_factory) -> Path:
    """Three minutes of 25 fps line-level timecode from 10:00:00:00 (invented), 16-bit WAV."""
    path = tmp_path_factory.mktemp("tape") / "ltc3.wav"
    bench.write_ltc(path, 3.0)
    return path


@pytest.fixture(scope="module")
def three_minutes_whole(three_minutes):
    return _whole(three_minutes)


def test_streamed_timecode_read_equals_the_whole_file_decode(three_minutes, three_minutes_whole):
    read, mismatches = stream_ltc(three_minutes, piece_s=40.0)
    assert mismatches == 0
    _assert_same_read(read, three_minutes_whole)


def test_streamed_frames_count_up_as_the_timecode_package_counts(three_minutes):
    read, _ = stream_ltc(three_minutes, piece_s=40.0)
    first = Timecode("25", read.frames[0].timecode)        # the reference counter (PyPI ``timecode``)
    assert [f.timecode for f in read.frames] == [str(first + k) for k in range(len(read.frames))]


@pytest.mark.parametrize("piece_s", [3.0, 4.7, 11.0])
def test_short_pieces_give_the_same_read(three_minutes, three_minutes_whole, piece_s):
    read, mismatches = stream_ltc(three_minutes, piece_s=piece_s)
    assert mismatches == 0
    _assert_same_read(read, three_minutes_whole)


@pytest.fixture(scope="module")
def forty_seconds(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("tape") / "ltc40.wav"
    bench.write_ltc(path, 40 / 60, piece_s=20.0)
    return path


@pytest.mark.parametrize("into_frame_s", [0.0, 0.0052, 0.0131, 0.0209, 0.0377])
def test_a_frame_across_a_cut_is_read_wherever_the_cut_falls_in_it(forty_seconds, into_frame_s):
    # 25 fps frames are 40 ms long and start at whole 40 ms here: a cut at 8 s + into_frame_s
    # falls that far into a frame
    whole = _whole(forty_seconds)
    cut_s = 8.0 + into_frame_s
    read, mismatches = stream_ltc(forty_seconds, piece_s=cut_s)
    assert mismatches == 0
    _assert_same_read(read, whole)
    across = [f for f in read.frames if f.position_s < cut_s < f.position_s + f.duration_s]
    assert len(across) == 1 or into_frame_s == 0.0


def _write(path: Path, *parts: np.ndarray) -> None:
    with sf.SoundFile(str(path), "w", samplerate=48_000, channels=1, subtype="PCM_16") as out:
        for p in parts:
            out.write(p)


def test_a_forward_and_reverse_shuttle_streams_to_the_whole_file_read(tmp_path):
    # forward with wow, then the same tape played back in reverse at 1.6×: a direction change
    fwd = synthesize_ltc(LtcSpec(start="03:10:00:00", duration_s=12.0, speed=PlaySpeed.constant(1.0, wow_depth=0.02),
                                 seed=1)).samples
    rev = synthesize_ltc(LtcSpec(start="03:10:00:00", duration_s=10.0, direction="reverse",
                                 speed=PlaySpeed.ramp(1.0, 1.6, 4.0), seed=2)).samples
    path = tmp_path / "shuttle.wav"
    _write(path, fwd, rev)
    whole = _whole(path)
    assert {f.direction for f in whole.frames} == {"forward", "reverse"}
    read, mismatches = stream_ltc(path, piece_s=3.3)
    assert mismatches == 0
    _assert_same_read(read, whole)


def test_a_raw_head_signal_streams_to_the_whole_file_read(tmp_path):
    x = synthesize_ltc(LtcSpec(start="07:00:00:00", duration_s=14.0, signal="head", seed=3)).samples
    path = tmp_path / "head.wav"
    _write(path, x / (1.2 * np.max(np.abs(x))))
    whole = _whole(path)
    assert whole.signal_kind == "head" and whole.frames
    read, mismatches = stream_ltc(path, piece_s=4.1)
    assert mismatches == 0
    _assert_same_read(read, whole)


def test_a_long_capture_through_iter_reads_gives_the_whole_file_timecode_read(tmp_path):
    # 40 s of silence before two minutes of timecode: the activity gate finds the span
    path = tmp_path / "lead.wav"
    bench.write_ltc(path, 2.0, lead_s=40.0)
    streamed = list(stream.iter_reads(path, whole_s=10))
    whole = [r for res in decode_capture(load_capture(path)) for r in res.reads]
    assert [r.format for r in streamed] == [r.format for r in whole] == ["ltc"]
    _assert_same_read(streamed[0].payload, whole[0].payload)


def test_a_capture_that_is_timecode_throughout_is_read_through_iter_reads(forty_seconds):
    assert [r.format for r in stream.iter_reads(forty_seconds, whole_s=10)] == ["ltc"]


# --- cassette data (Kansas City standard): streamed bytes equal the whole-file read; times and
# margins agree to rounding (running sums: readchan.stream_kcs's module docstring)

KCS_TIME_TOL_S = 1e-9
"""Byte times agree to far below a sample (20 µs at 48 kHz): rounding of the running sums."""
KCS_MARGIN_TOL = 1e-8


def _kcs_file(path: Path, baud: int, n_bytes: int, seed: int, *, idle=0.0, quiet_s: float = 0.5,
              blocks: int = 1) -> bytes:
    """A cassette capture of ``blocks`` blocks of random bytes (invented data), each with its
    leader, 16-bit WAV; returns the bytes recorded."""
    rng = np.random.default_rng(seed)
    parts, data = [], b""
    for k in range(blocks):
        d = bytes(rng.integers(0, 256, n_bytes, dtype=np.uint8))
        s = synthesize_kcs(KcsSpec(data=d, baud=baud, idle_bits=idle, quiet_s=quiet_s, seed=seed + k,
                                   speed=PlaySpeed.constant(1.03, wow_depth=0.01), playback=Playback(snr_db=30)))
        parts.append(s.samples)
        data += d
    x = np.concatenate(parts)
    _write(path, x / (1.1 * np.max(np.abs(x))))
    return data


def _assert_same_kcs(s, w) -> None:
    assert (s.data, s.baud, s.framing_errors, s.valid, s.dropouts == w.dropouts) == (w.data, w.baud, w.framing_errors,
                                                                                 w.valid, True)
    assert np.max(np.abs(s.byte_times_s - w.byte_times_s), initial=0.0) < KCS_TIME_TOL_S
    assert np.max(np.abs(s.margins - w.margins), initial=0.0) < KCS_MARGIN_TOL
    assert abs(s.speed - w.speed) < 1e-9 and s.leader_s == pytest.approx(w.leader_s, abs=1e-9)
    assert abs(s.start_s - w.start_s) < KCS_TIME_TOL_S and abs(s.end_s - w.end_s) < KCS_TIME_TOL_S


def _whole_kcs(path: Path):
    cap = load_capture(path)
    return decode_kcs(cap.channel(0), cap.rate_hz)


@pytest.mark.parametrize("baud, n_bytes, idle", [(300, 600, 0.0), (1200, 2000, (0.0, 1.5, 0.25))])
@pytest.mark.parametrize("piece_s", [3.0, 7.0])
def test_streamed_cassette_bytes_equal_the_whole_file_read(tmp_path, baud, n_bytes, idle, piece_s):
    path = tmp_path / "kcs.wav"
    data = _kcs_file(path, baud, n_bytes, seed=11, idle=idle)
    whole = _whole_kcs(path)
    assert whole.data == data                       # the synthesizer's bytes: the reference
    _assert_same_kcs(stream_kcs(path, piece_s=piece_s), whole)


@pytest.mark.parametrize("into_byte_s", [0.0, 0.0071, 0.0183, 0.0312])
def test_a_byte_across_a_cut_is_read_wherever_the_cut_falls_in_it(tmp_path, into_byte_s):
    # 300 baud: a byte is 36.7 ms; cuts at 2.5 s + into_byte_s fall anywhere within one
    path = tmp_path / "kcs.wav"
    data = _kcs_file(path, 300, 200, seed=12)
    whole = _whole_kcs(path)
    assert whole.data == data
    _assert_same_kcs(stream_kcs(path, piece_s=2.5 + into_byte_s), whole)


def test_cassette_blocks_each_behind_a_leader_stream_to_the_whole_file_read(tmp_path):
    path = tmp_path / "blocks.wav"
    data = _kcs_file(path, 1200, 300, seed=13, blocks=3, quiet_s=1.0)
    whole = _whole_kcs(path)
    assert whole.data == data
    _assert_same_kcs(stream_kcs(path, piece_s=2.0), whole)


def test_a_long_cassette_capture_through_iter_reads_gives_the_whole_file_read(tmp_path):
    path = tmp_path / "kcs_long.wav"
    _kcs_file(path, 300, 400, seed=14, quiet_s=4.0)     # 8 of 23 s quiet: the gate finds the span
    streamed = list(stream.iter_reads(path, whole_s=10))
    whole = [r for res in decode_capture(load_capture(path)) for r in res.reads]
    assert [r.format for r in streamed] == [r.format for r in whole] == ["kcs"]
    _assert_same_kcs(streamed[0].payload, whole[0].payload)


def test_non_physical_samples_are_repaired_as_the_whole_file_decode_repairs_them(tmp_path):
    # a corrupted float WAV: three samples of 10⁶ full scale, far beyond the 10³ × level rule
    x = synthesize_ltc(LtcSpec(start="05:00:00:00", duration_s=12.0, seed=4)).samples
    x[[48_000, 200_000, 400_000]] = 1e6
    path = tmp_path / "wild.wav"
    sf.write(str(path), x, 48_000, subtype="FLOAT")
    with pytest.warns(NonPhysicalSampleWarning):
        whole = decode_capture(load_capture(path), DecodeSettings(format="ltc"))[0].reads[0].payload
    with pytest.warns(NonPhysicalSampleWarning, match="3 non-physical samples"):
        read, mismatches = stream_ltc(path, piece_s=3.0)
    assert mismatches == 0
    _assert_same_read(read, whole)


@pytest.mark.parametrize("seed", [0, 1])
def test_the_compiled_open_parse_gives_the_plain_python_parse(seed):
    # the streamed two-hour tape runs the biphase parse compiled (readchan._compiled); the
    # reference is its own plain-Python function (same IEEE operations in the same order)
    pytest.importorskip("numba")
    from readchan.linecode import biphase

    rng = np.random.default_rng(seed)
    r = np.abs(rng.choice([0.5, 1.0], 3000) + rng.normal(0, 0.08, 3000))
    zero, lone, half = (r - 1.0) ** 2, 0.5 + (r - 0.5) ** 2, 0.5 * (r - 0.5) ** 2
    pair = np.concatenate(([np.inf], (r[:-1] + r[1:] - 1.0) ** 2 + 0.5 * ((r[:-1] - 0.5) ** 2 + (r[1:] - 0.5) ** 2)))
    kinds, lead = biphase._open_viterbi.compile_now()._run(zero, lone, half, pair)
    ref_kinds, ref_lead = biphase._open_viterbi.py_func(zero, lone, half, pair)
    assert kinds.dtype == ref_kinds.dtype and np.array_equal(kinds, ref_kinds) and int(lead) == int(ref_lead)
