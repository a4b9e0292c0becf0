"""Stage 1, the source, in blocks: a capture's samples a block at a time, with overlap, in bounded memory.

Input: an audio file (WAV, FLAC, AIFF, ...: anything soundfile reads) by path, or a
:class:`readchan.io.capture.Capture` already in memory.
Output: :class:`Block` s (the samples of a stretch and the absolute index of its first sample),
or one stretch of samples (:func:`read_span`).

Audio is read with ``soundfile.SoundFile.blocks`` (and ``seek`` + ``read`` for a stretch): a
block of ``block_frames`` frames repeats the last ``overlap`` frames of the one before, so a
filter run over each block has settled by the time it reaches the new samples.  The samples are
the ones :func:`readchan.io.capture.load_capture` gives for the same file (soundfile converts
each frame on its own, wherever a block starts); ``dtype="float32"`` halves the buffers and is
exact for 8- and 16-bit PCM (every k/32768 is a float32), so decoding can read in float32 and
widen a block at a time.  Text tables are parsed whole (:func:`capture_blocks` serves the
blocks of a capture in memory); a chunked table reader is not written yet.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from typing import Iterator

import numpy as np
import soundfile as sf

from readchan.errors import CaptureError, ParameterError


@dataclass(frozen=True)
class Block:
    """One block of a capture.

    Attributes
    ----------
    start : absolute index (frames from the capture's first) of ``samples[0]``.
    samples : shape ``(n_frames, n_channels)``.
    overlap : leading frames repeated from the previous block (0 for the first).
    """

    start: int
    samples: np.ndarray
    overlap: int

    @property
    def stop(self) -> int:
        """Absolute index one past the block's last frame."""
        return self.start + int(self.samples.shape[0])

    @property
    def new(self) -> np.ndarray:
        """The frames not in the previous block."""
        return self.samples[self.overlap:]


@dataclass(frozen=True)
class AudioInfo:
    """What an audio file's header says: ``frames``, ``rate_hz`` (Hz), ``channels``, ``subtype``."""

    frames: int
    rate_hz: float
    channels: int
    subtype: str


def _check_sizes(block_frames: int, overlap: int) -> None:
    for name, v in (("block size", block_frames), ("overlap", overlap)):
        if isinstance(v, bool) or not isinstance(v, (int, np.integer)):
            raise ParameterError(f"{name} must be a whole number of frames, was {v!r}")
    if overlap < 0 or block_frames <= overlap:
        raise ParameterError(f"the block size must exceed the overlap (both in frames, overlap ≥ 0), "
                             f"were {block_frames} and {overlap}")


def _open(path: str | os.PathLike):
    """An open file and its SoundFile (opened by the file, so a name need not be UTF-8)."""
    p = Path(path)
    try:
        fh = open(p, "rb")
    except OSError as exc:
        raise CaptureError(f"{p}: cannot read file ({exc.strerror or exc})") from None
    try:
        return fh, sf.SoundFile(fh)
    except (sf.SoundFileError, RuntimeError, TypeError, OSError, ValueError, EOFError) as exc:
        fh.close()
        reason = " ".join(str(getattr(exc, "error_string", None) or exc).split()) or type(exc).__name__
        raise CaptureError(f"{p}: not an audio file that can be read in blocks ({reason})") from None


def audio_info(path: str | os.PathLike) -> AudioInfo:
    """The header of the audio file at ``path`` (:class:`AudioInfo`); a :class:`CaptureError`
    when it is not one soundfile reads."""
    fh, snd = _open(path)
    with fh, snd:
        return AudioInfo(int(snd.frames), float(snd.samplerate), int(snd.channels), str(snd.subtype))


def iter_blocks(path: str | os.PathLike, block_frames: int, overlap: int = 0, *, start: int = 0,
                stop: int | None = None, dtype: str = "float64") -> Iterator[Block]:
    """The frames ``start:stop`` of the audio file at ``path`` in blocks of ``block_frames``,
    each repeating the last ``overlap`` frames of the one before (the last block may be shorter).
    Full scale is −1..1, as :func:`readchan.io.capture.load_capture` gives it."""
    _check_sizes(block_frames, overlap)
    fh, snd = _open(path)
    with fh, snd:
        stop = int(snd.frames) if stop is None else min(int(stop), int(snd.frames))
        start = max(0, int(start))
        if stop <= start:
            return
        snd.seek(start)
        pos = start
        for k, data in enumerate(snd.blocks(blocksize=block_frames, overlap=overlap, frames=stop - start,
                                            dtype=dtype, always_2d=True)):
            lead = 0 if k == 0 else overlap
            yield Block(pos - lead, data, lead)
            pos += data.shape[0] - lead


INTEGER_READS = {"PCM_16": ("int16", 2.0 ** -15), "PCM_S8": ("int16", 2.0 ** -15), "PCM_U8": ("int16", 2.0 ** -15),
                 "PCM_24": ("int32", 2.0 ** -31), "PCM_32": ("int32", 2.0 ** -31)}
"""Integer PCM subtypes read as integers, with the factor that gives the samples in full scale:
libsndfile hands integer reads over left-aligned in the integer type and divides by its full
scale (2¹⁵, 2³¹) for float reads, so ``int × factor`` is the float read exactly (checked in
tests/test_blocks.py) at a fraction of the cost (no conversion in the library)."""


def fast_dtype(subtype: str) -> tuple[str, float]:
    """The cheapest dtype to read an audio file of ``subtype`` in for a pass that only sums
    samples, and the factor to full scale: an integer type for integer PCM, else float32
    (1.0)."""
    return INTEGER_READS.get(subtype, ("float32", 1.0))


def read_span(path: str | os.PathLike, start: int, stop: int, *, dtype: str = "float64") -> np.ndarray:
    """Frames ``start:stop`` of the audio file at ``path``, shape ``(n, channels)`` (clipped to
    the file's length)."""
    fh, snd = _open(path)
    with fh, snd:
        start = max(0, int(start))
        stop = min(int(stop), int(snd.frames))
        snd.seek(min(start, int(snd.frames)))
        return snd.read(max(0, stop - start), dtype=dtype, always_2d=True)


def capture_blocks(samples: np.ndarray, block_frames: int, overlap: int = 0) -> Iterator[Block]:
    """Blocks (views, no copies) of samples already in memory, shape ``(n, channels)`` or
    ``(n,)``, cut as :func:`iter_blocks` cuts a file."""
    _check_sizes(block_frames, overlap)
    x = samples if samples.ndim == 2 else samples.reshape(-1, 1)
    n = x.shape[0]
    pos, k = 0, 0                         # pos: the first frame no block has held yet
    while pos < n:
        lead = 0 if k == 0 else overlap
        a = pos - lead
        yield Block(a, x[a:a + block_frames], lead)
        pos, k = a + block_frames, k + 1
