"""Audio captures read through soundfile (WAV of any subtype, FLAC, AIFF, ...).

Input: the path of an audio file.  Output: its samples as float64 ``(frames, channels)`` in
full scale (-1..1) and the header's sample rate in Hz, with a
:class:`TruncatedCaptureWarning` when the file holds less than its header declares; a file
soundfile cannot open raises :class:`NotAudio` (the caller may try it as text).
"""

from __future__ import annotations

import os
import warnings
from pathlib import Path

import numpy as np
import soundfile as sf

from readchan.io.checks import (MAX_SAMPLES, MIN_SAMPLES, check_file_rate, display_path, file_error,
                                first_nonfinite, one_line, rates_disagree)


# Leading bytes of container formats: a file starting so is audio, never text.
AUDIO_MAGIC = (b"RIFF", b"RIFX", b"RF64", b"FORM", b"fLaC", b"OggS", b".snd", b"caff")


class TruncatedCaptureWarning(UserWarning):
    """An audio file holds less sample data than its header declares; what is present was loaded."""


class NotAudio(Exception):
    def __init__(self, reason: str) -> None:
        super().__init__(reason)
        self.reason = reason


def soundfile_reason(exc: BaseException) -> str:
    reason = getattr(exc, "error_string", None) or str(exc)
    reason = one_line(reason).strip().rstrip(".")
    return reason or type(exc).__name__


def load_audio(p: Path, source: str, rate_hz: float | None) -> tuple[np.ndarray, float]:
    """The samples of the audio file ``p`` (float64, full scale, ``(frames, channels)``) and its
    rate in Hz (``rate_hz`` when given, after checking it against the header's)."""
    # soundfile is given an open file, not the name: a name that is not UTF-8 then still opens
    try:
        fh = open(p, "rb")
    except OSError as exc:
        raise file_error(source, f"cannot read file ({exc.strerror or exc})") from None
    with fh:
        try:
            snd = sf.SoundFile(fh)
        except (sf.SoundFileError, RuntimeError, TypeError) as exc:
            raise NotAudio(soundfile_reason(exc)) from None
        except (OSError, ValueError, EOFError) as exc:
            raise file_error(source, f"cannot read audio data ({soundfile_reason(exc)})") from None
        with snd:
            file_rate = float(snd.samplerate)
            data, broke_off = _read_audio(snd, fh, source, os.fstat(fh.fileno()).st_size)

    truncated = _chunk_truncation(p)
    note = ""
    if truncated is not None:
        declared, present = truncated
        note = " (the file is truncated)"
        _warn_truncated(f"{display_path(source)}: file is truncated: its header declares {declared} bytes of sample "
                        f"data but only {present} are present; loaded the {data.shape[0]} complete samples")
    elif broke_off:
        note = " (the file is truncated)"
        _warn_truncated(f"{display_path(source)}: file is truncated: {broke_off}; loaded the {data.shape[0]} "
                        f"complete samples before it")
    if data.shape[0] < MIN_SAMPLES:
        raise file_error(source, f"holds {data.shape[0]} samples{note}; at least {MIN_SAMPLES} are needed")
    if file_rate <= 0:
        raise file_error(source, f"header gives an invalid sample rate {file_rate:g} Hz")
    if rate_hz is not None and rates_disagree(file_rate, rate_hz):
        raise file_error(source, f"file header says {file_rate:g} Hz but the given rate is {rate_hz:g} Hz "
                                 f"(more than 1 % apart)")
    if rate_hz is None:
        check_file_rate(source, file_rate, "header gives")
    bad = first_nonfinite(data)
    if bad is not None:
        raise file_error(source, f"sample {bad[0]} of channel {bad[1]} is {data[bad]!r}, not a finite number")
    return np.ascontiguousarray(data), rate_hz or file_rate


def _warn_truncated(message: str) -> None:
    warnings.warn(one_line(message), TruncatedCaptureWarning, stacklevel=4)


# Bytes per sample of the uncompressed subtypes: for these the header's frame count can be
# checked against the file size before anything is allocated.
_SUBTYPE_BYTES = {"PCM_S8": 1, "PCM_U8": 1, "PCM_16": 2, "PCM_24": 3, "PCM_32": 4, "FLOAT": 4, "DOUBLE": 8,
                  "ULAW": 1, "ALAW": 1}


_AUDIO_BLOCK_FRAMES = 1 << 16
"""Frames per block when a stream is read in blocks (our choice: 0.5 MB per float64 channel)."""


def _read_audio(snd: sf.SoundFile, fh, source: str, size: int) -> tuple[np.ndarray, str]:
    """All frames of ``snd`` (opened on ``fh``) as float64 (frames, channels), and why the stream
    broke off ('' if it did not).  A header's frame count is trusted for one allocation only when
    the file is large enough to hold that many uncompressed samples and they are within
    :data:`MAX_SAMPLES`; otherwise the data are read in blocks, so a header that claims 2³⁶
    samples costs nothing, and loading stops at the limit."""
    channels = max(int(snd.channels), 1)
    declared = int(snd.frames)
    limit_frames = MAX_SAMPLES // channels
    width = _SUBTYPE_BYTES.get(snd.subtype)
    if width is not None and 0 <= declared <= limit_frames and declared * channels * width <= size:
        try:
            return snd.read(dtype="float64", always_2d=True), ""
        except _AUDIO_ERRORS as exc:
            raise file_error(source, f"cannot read audio data ({soundfile_reason(exc)})") from None
    blocks: list[np.ndarray] = []
    total = 0
    fault = None
    while True:
        try:
            block = snd.read(_AUDIO_BLOCK_FRAMES, dtype="float64", always_2d=True)
        except _AUDIO_ERRORS as exc:
            fault = soundfile_reason(exc)
            break
        if block.shape[0]:
            blocks.append(block)
            total += block.shape[0]
        if total > limit_frames:
            raise file_error(source, f"holds more than {MAX_SAMPLES:,} sample values ({channels} channel(s)), the most "
                                     f"readchan loads; cut the capture into parts")
        if block.shape[0] < _AUDIO_BLOCK_FRAMES:
            break
    data = np.concatenate(blocks) if len(blocks) > 1 else (blocks[0] if blocks else np.zeros((0, channels)))
    if fault is not None:
        # the last block failed as a whole: read again up to the fault in ever smaller blocks
        data = _salvage(fh, data, channels)
        if data.shape[0] == 0:
            raise file_error(source, f"cannot read audio data ({fault})")
        claim = f"its header declares {declared} samples but " if declared > data.shape[0] else ""
        return data, f"{claim}the audio stream breaks off after sample {data.shape[0]} ({fault})"
    if declared > data.shape[0]:
        return data, f"its header declares {declared} samples but the stream holds {data.shape[0]}"
    return data, ""


_AUDIO_ERRORS = (sf.SoundFileError, RuntimeError, OSError, ValueError, EOFError)

SALVAGE_BLOCK_FRAMES = (4096, 256, 16, 1)
"""Block sizes, in frames, of the passes that read a damaged stream up to its fault (our
choice: each pass 16 times finer, so the last complete frame is reached in four passes)."""

MAX_RIFF_CHUNKS = 10_000
"""Most chunks walked looking for the sample data of a RIFF or AIFF file (a guard against a
corrupt chain of chunk sizes, not a tuned figure)."""

RF64_SIZE_MARKER = 0xFFFFFFFF
"""A 32-bit chunk size of all ones: the real size is in the ds64 chunk (RF64, EBU Tech 3306;
from memory)."""


def _salvage(fh, good: np.ndarray, channels: int) -> np.ndarray:
    """The frames of the file on ``fh`` up to a decoding fault: ``good`` (read before the
    failing block), then blocks of :data:`SALVAGE_BLOCK_FRAMES` frames, each pass reopening the file and
    continuing from what the previous pass read."""
    have = good
    for frames in SALVAGE_BLOCK_FRAMES:
        try:
            fh.seek(0)
            with sf.SoundFile(fh) as snd:
                if have.shape[0]:
                    snd.read(have.shape[0], dtype="float64", always_2d=True)
                more: list[np.ndarray] = [have]
                try:
                    while True:
                        block = snd.read(frames, dtype="float64", always_2d=True)
                        if block.shape[0]:
                            more.append(block)
                        if block.shape[0] < frames:
                            break
                except _AUDIO_ERRORS:
                    pass
                have = np.concatenate(more)
        except _AUDIO_ERRORS:
            break
    return have


def riff_cut_short(head: bytes, size: int) -> bool:
    """True if a RIFF file is shorter than its own header says."""
    if size < 12:
        return True
    return head.startswith(b"RIFF") and size < int.from_bytes(head[4:8], "little") + 8


def _chunk_truncation(p: Path) -> tuple[int, int] | None:
    """Return (declared, present) bytes of a RIFF/WAVE ``data`` or AIFF ``SSND`` chunk cut short,
    else None."""
    try:
        size = p.stat().st_size
        with open(p, "rb") as fh:
            magic = fh.read(4)
            if magic == b"RIFF":
                order, data_id, forms = "little", b"data", (b"WAVE",)
            elif magic == b"FORM":
                order, data_id, forms = "big", b"SSND", (b"AIFF", b"AIFC")
            else:
                return None
            fh.read(4)
            if fh.read(4) not in forms:
                return None
            offset = 12
            for _ in range(MAX_RIFF_CHUNKS):
                hdr = fh.read(8)
                if len(hdr) < 8:
                    return None
                chunk_id, chunk_size = hdr[:4], int.from_bytes(hdr[4:], order)
                if chunk_id == data_id:
                    present = size - (offset + 8)
                    if chunk_size != RF64_SIZE_MARKER and chunk_size > present:
                        return chunk_size, max(present, 0)
                    return None
                offset += 8 + chunk_size + (chunk_size & 1)
                fh.seek(offset)
    except OSError:
        return None
    return None
