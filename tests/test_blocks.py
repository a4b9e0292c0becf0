"""Reading a capture in blocks (:mod:`readchan.io.blocks`): the blocks hold exactly the samples
of the whole file, at every block size and overlap, for WAV and FLAC.

Reference: :func:`readchan.io.capture.load_capture` reading the same file whole (itself checked
against soundfile and the WAV layout in tests/test_capture.py)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from readchan.errors import CaptureError, ParameterError
from readchan.io.blocks import audio_info, capture_blocks, fast_dtype, iter_blocks, read_span
from readchan.io.capture import load_capture, write_capture

ROOT = Path(__file__).resolve().parents[1]
SIZES = [(2048, 0), (3000, 0), (3000, 700), (4096, 1024), (65536, 4096), (10 ** 7, 0)]


@pytest.fixture(scope="module")
def wav(tmp_path_factory) -> Path:
    """Two channels of noise and a chirp, 40,001 frames, 16-bit WAV (invented data)."""
    rng = np.random.default_rng(11)
    t = np.arange(40_001) / 48_000
    x = np.stack((0.3 * np.sin(2 * np.pi * (200 + 4000 * t) * t), rng.normal(0, 0.1, t.size)), axis=1)
    return write_capture(tmp_path_factory.mktemp("blocks") / "two.wav", x, 48_000)


def _stitched(blocks) -> np.ndarray:
    return np.concatenate([b.new for b in blocks])


@pytest.mark.parametrize("block, overlap", SIZES)
def test_blocks_without_their_overlap_are_the_whole_file(wav, block, overlap):
    whole = load_capture(wav).samples
    assert np.array_equal(_stitched(iter_blocks(wav, block, overlap)), whole)


@pytest.mark.parametrize("block, overlap", SIZES)
def test_every_block_holds_the_files_samples_at_its_position(wav, block, overlap):
    whole = load_capture(wav).samples
    for b in iter_blocks(wav, block, overlap):
        assert np.array_equal(b.samples, whole[b.start:b.stop])
        assert b.overlap == (0 if b.start == 0 else overlap)


def test_blocks_of_a_flac_fixture_are_the_whole_file():
    path = ROOT / "fixtures" / "track2-reverse-noisy.flac"
    whole = load_capture(path).samples
    assert np.array_equal(_stitched(iter_blocks(path, 5000, 300)), whole)


def test_sixteen_bit_samples_read_as_float32_are_exact(wav):
    # every 16-bit PCM value k/32768 is a float32 (24-bit significand)
    whole = load_capture(wav).samples
    got = _stitched(iter_blocks(wav, 4096, 100, dtype="float32"))
    assert got.dtype == np.float32 and np.array_equal(got.astype(np.float64), whole)


@pytest.mark.parametrize("subtype", ["PCM_16", "PCM_24", "PCM_32", "PCM_U8"])
def test_integer_reads_times_their_factor_are_the_float_read(tmp_path, subtype):
    # libsndfile's float read of integer PCM is the integer over its full scale (soundfile docs:
    # "int16 ... -32768..32767" against "float64 ... -1.0..1.0"); the gate's pass relies on it
    import soundfile as sf

    rng = np.random.default_rng(3)
    path = tmp_path / "x.wav"
    sf.write(path, rng.uniform(-0.9, 0.9, (5000, 2)), 48_000, subtype=subtype)
    dtype, scale = fast_dtype(subtype)
    ints = _stitched(iter_blocks(path, 1024, dtype=dtype))
    assert ints.dtype == np.dtype(dtype)
    assert np.array_equal(ints * scale, read_span(path, 0, 5000))


def test_a_float_file_is_read_as_float32_for_a_summing_pass():
    assert fast_dtype("FLOAT") == ("float32", 1.0) and fast_dtype("VORBIS") == ("float32", 1.0)


def test_a_stretch_and_blocks_of_a_stretch_are_those_samples(wav):
    whole = load_capture(wav).samples
    assert np.array_equal(read_span(wav, 12_345, 23_456), whole[12_345:23_456])
    assert np.array_equal(read_span(wav, 39_000, 99_999), whole[39_000:])
    assert np.array_equal(_stitched(iter_blocks(wav, 2500, 200, start=7_000, stop=31_000)), whole[7_000:31_000])


def test_header_gives_frames_rate_and_channels(wav):
    info = audio_info(wav)
    assert (info.frames, info.rate_hz, info.channels, info.subtype) == (40_001, 48_000.0, 2, "PCM_16")


@pytest.mark.parametrize("block, overlap", SIZES)
def test_blocks_of_samples_in_memory_are_cut_as_a_files(wav, block, overlap):
    whole = load_capture(wav).samples
    mem = list(capture_blocks(whole, block, overlap))
    disk = list(iter_blocks(wav, block, overlap))
    assert [(b.start, b.stop, b.overlap) for b in mem] == [(b.start, b.stop, b.overlap) for b in disk]
    assert np.array_equal(_stitched(mem), whole)


@pytest.mark.parametrize("block, overlap", [(100, 100), (100, 200), (0, 0), (100, -1), (2.5, 0)])
def test_a_block_no_longer_than_its_overlap_is_refused(wav, block, overlap):
    with pytest.raises(ParameterError):
        list(iter_blocks(wav, block, overlap))


def test_a_file_that_is_not_audio_is_a_capture_error(tmp_path):
    p = tmp_path / "notes.wav"
    p.write_text("not audio\n")
    with pytest.raises(CaptureError, match="notes.wav"):
        list(iter_blocks(p, 4096))
