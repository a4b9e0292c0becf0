"""Writing captures: WAV (16-bit, 24-bit, float), FLAC or a CSV table, atomically.

Input: samples (numpy array ``(n_samples,)`` or ``(n_samples, n_channels)``, full scale for
audio), the sample rate in Hz, the kind of file and the target path.  Output: the file,
written through :func:`readchan.io.atomic.atomic_output` (nothing half-written, nothing
replaced without ``force``), and its path.
"""

from __future__ import annotations

import os
import warnings
from pathlib import Path
from typing import Sequence

import numpy as np
import soundfile as sf

from readchan.errors import CaptureError, ParameterError
from readchan.io.atomic import atomic_output, check_path_length
from readchan.io.audio import soundfile_reason
from readchan.io.checks import check_rate, default_names, file_error, first_nonfinite
from readchan.io.text import is_comment, is_numeric


#: Kinds of file :func:`write_capture` can produce.
WRITE_KINDS = ("wav16", "wav24", "wav-float", "flac", "csv")


# kind -> (soundfile format, soundfile subtype); None for the text writer.
_AUDIO_KINDS = {
    "wav16": ("WAV", "PCM_16"),
    "wav24": ("WAV", "PCM_24"),
    "wav-float": ("WAV", "FLOAT"),
    "flac": ("FLAC", "PCM_24"),
}


_CLIPPED_KINDS = ("wav16", "wav24", "flac")

_FLAC_MAX_CHANNELS = 8
"""Most channels a FLAC stream holds (the FLAC format; from memory)."""

_SUFFIX_KIND = {".wav": ("wav16", "wav24", "wav-float"), ".wave": ("wav16", "wav24", "wav-float"),
                ".flac": ("flac",), ".csv": ("csv",), ".txt": ("csv",), ".tsv": ("csv",)}

_CSV_CHUNK_ROWS = 65_536
"""Rows formatted at a time when writing a CSV table (our choice: bounded memory, few writes)."""


class ClippingWarning(UserWarning):
    """Samples outside -1..1 were clipped while writing an integer-PCM file."""


def write_capture(path: str | Path, samples: np.ndarray, rate_hz: float, *, kind: str = "wav16",
                  force: bool = False, channel_names: Sequence[str] | None = None) -> Path:
    """Write samples to an audio file or a CSV table, atomically.

    The data go to a temporary file in the target's directory which is then
    renamed into place, so a failure never leaves half a file behind nor
    destroys an existing one (:func:`readchan.io.atomic.atomic_output`: only a
    regular file, or a link to one, is ever replaced; the file gets the
    user's umask; SIGTERM/SIGHUP remove the temporary file).

    Parameters
    ----------
    path : str or pathlib.Path
        Target file.
    samples : numpy.ndarray
        Shape ``(n_samples,)`` for one channel or ``(n_samples, n_channels)``;
        finite values.  Audio kinds take full scale (-1..1).
    rate_hz : float
        Sample rate in hertz, finite and > 0; an integer (within 1 ppm) for
        audio kinds.
    kind : {'wav16', 'wav24', 'wav-float', 'flac', 'csv'}
        ``wav16``/``wav24``: integer PCM WAV; ``wav-float``: 32-bit float WAV;
        ``flac``: 24-bit FLAC; ``csv``: header ``time_s,ch0,...`` then one row
        per sample (time with 12 significant digits, values with 9).
    force : bool
        Replace an existing file.
    channel_names : sequence of str, optional
        Column names for ``csv`` (default ``ch0``, ``ch1``, ...); ignored by
        the audio kinds, which have no place for them.

    Returns
    -------
    pathlib.Path
        The path written.

    Raises
    ------
    ParameterError
        For an unknown kind, a kind that contradicts the file extension, a bad
        rate, samples of the wrong shape or holding NaN/Inf, or bad names.
    CaptureError
        If the file exists and ``force`` is false, is not a regular file
        (device, FIFO, socket, directory), or it cannot be written.

    Warns
    -----
    ClippingWarning
        If integer-PCM kinds had to clip values outside -1..1.
    """
    # over 60 lines only by its docstring (the parameter reference); the steps are named helpers
    target = check_output_path(path)
    source = str(path)
    _check_kind(kind, target, source)
    rate = check_rate(rate_hz)
    data = _checked_samples(samples)
    n_channels = data.shape[1]
    # Audio files carry no channel names; only a CSV header needs them to be usable.
    names = _check_names(channel_names, n_channels) if kind == "csv" else default_names(n_channels)

    if kind in _AUDIO_KINDS:
        _check_audio_rate_and_channels(kind, rate, n_channels)
        if kind in _CLIPPED_KINDS:
            outside = int(np.count_nonzero(np.abs(data) > 1.0))
            if outside:
                np.clip(data, -1.0, 1.0, out=data)
                warnings.warn(f"{source}: {outside} samples outside -1..1 were clipped for {kind}",
                              ClippingWarning, stacklevel=2)

    # The target is checked before any byte is written; see readchan.io.atomic for the rules.
    with atomic_output(target, force=force, error=CaptureError) as tmp:
        if kind in _AUDIO_KINDS:
            _write_audio(tmp, data, rate, kind, source)
        else:
            _write_csv(tmp, data, rate, names)
    return target


WHOLE_HZ_TOLERANCE = 1e-6
"""Relative distance from a whole number of hertz an audio rate may have (1 ppm: far below any
converter's clock tolerance, common practice); audio headers hold whole hertz."""


def _check_kind(kind: str, target: Path, source: str) -> None:
    """``kind`` is one of :data:`WRITE_KINDS` and agrees with the target's extension."""
    if kind not in WRITE_KINDS:
        raise ParameterError(f"unknown capture kind {kind!r}; choose one of {', '.join(WRITE_KINDS)}")
    allowed = _SUFFIX_KIND.get(target.suffix.lower())
    if allowed is not None and kind not in allowed:
        raise ParameterError(f"{source}: kind {kind!r} does not match the extension {target.suffix!r}")


def _checked_samples(samples: np.ndarray) -> np.ndarray:
    """A float64 C-ordered copy of ``samples`` as ``(n_samples, n_channels)``, non-empty and finite."""
    try:
        data = np.array(samples, dtype=np.float64, order="C", copy=True)
    except (TypeError, ValueError):
        raise ParameterError("samples must be numeric") from None
    if data.ndim == 1:
        data = data.reshape(-1, 1)
    if data.ndim != 2 or data.shape[0] == 0 or data.shape[1] == 0:
        raise ParameterError(f"samples must have shape (n_samples,) or (n_samples, n_channels) "
                             f"with at least one of each, got {np.shape(samples)}")
    bad = first_nonfinite(data)
    if bad is not None:
        raise ParameterError(f"samples must be finite; sample {bad[0]} of channel {bad[1]} is {data[bad]!r}")
    return data


def _check_audio_rate_and_channels(kind: str, rate: float, n_channels: int) -> None:
    """An audio kind needs a whole number of hertz, and FLAC at most :data:`_FLAC_MAX_CHANNELS`."""
    int_rate = round(rate)
    if int_rate < 1 or abs(rate - int_rate) > WHOLE_HZ_TOLERANCE * rate:
        raise ParameterError(f"{kind} needs a whole number of hertz; {rate!r} Hz is not")
    if kind == "flac" and n_channels > _FLAC_MAX_CHANNELS:
        raise ParameterError(f"flac holds at most {_FLAC_MAX_CHANNELS} channels, got {n_channels}")


def _write_audio(tmp: Path, data: np.ndarray, rate: float, kind: str, source: str) -> None:
    """Write ``data`` (full scale) to ``tmp`` as the audio ``kind`` at ``rate`` Hz (whole)."""
    fmt, subtype = _AUDIO_KINDS[kind]
    try:
        with open(tmp, "wb") as fh:       # by the file, not its name: names need not be UTF-8
            sf.write(fh, data, int(round(rate)), subtype=subtype, format=fmt)
    except (sf.SoundFileError, RuntimeError, ValueError, TypeError) as exc:
        raise file_error(source, f"cannot write {kind} ({soundfile_reason(exc)})") from None


def check_output_path(path: str | os.PathLike) -> Path:
    """``path`` as a Path if a file of that name can be created, as far as the name goes: each
    component within the file system's name limit (``NAME_MAX``, 255 bytes on most) and the
    whole within ``PATH_MAX``; else a one-line :class:`~readchan.errors.ParameterError`.
    (The rules on the file itself are :func:`readchan.io.atomic.check_output_path`'s.)"""
    try:
        target = Path(path)
    except TypeError:
        raise ParameterError(f"an output path must be a string or a Path, not {type(path).__name__}") from None
    check_path_length(target, error=ParameterError)
    return target


def _check_names(channel_names: Sequence[str] | None, n_channels: int) -> tuple[str, ...]:
    if channel_names is None:
        return default_names(n_channels)
    if isinstance(channel_names, str):
        raise ParameterError("channel_names must be a sequence of names, not one string")
    names = tuple(str(n).strip() for n in channel_names)
    if len(names) != n_channels:
        raise ParameterError(f"{len(names)} channel names given for {n_channels} channels")
    for name in names:
        if not name or any(c in name for c in ',;\t\r\n"') or is_comment(name) or is_numeric([name]):
            raise ParameterError(f"channel name {name!r} is not usable in a CSV header "
                                 f"(empty, numeric, or holds a delimiter, quote or comment mark)")
    return names


def _write_csv(tmp: Path, data: np.ndarray, rate: float, names: tuple[str, ...]) -> None:
    n, n_channels = data.shape
    row_format = ",".join(["%.12g"] + ["%.9g"] * n_channels) + "\n"
    with open(tmp, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(",".join(("time_s",) + names) + "\n")
        for start in range(0, n, _CSV_CHUNK_ROWS):
            stop = min(start + _CSV_CHUNK_ROWS, n)
            block = np.empty((stop - start, n_channels + 1), dtype=np.float64)
            block[:, 0] = np.arange(start, stop, dtype=np.float64) / rate
            block[:, 1:] = data[start:stop]
            fh.write((row_format * (stop - start)) % tuple(block.ravel().tolist()))
