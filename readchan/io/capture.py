"""Capture I/O: load read-channel captures from audio or text files, and write them.

A *capture* is a block of uniformly sampled values, one column per channel: the
pickup-head voltage recorded by a sound card (WAV, FLAC, AIFF), a table exported
by an oscilloscope or data logger (CSV, TSV, whitespace-separated text), or the
logic-level output of a comparator stored in either form.

Every problem with the input is reported as a :class:`~readchan.errors.CaptureError`
(or :class:`~readchan.errors.ParameterError` for an absurd parameter) whose
message is one line naming the file and the problem.  No exception of a library
(``soundfile``, ``numpy``, the codec machinery) escapes.

Text tables
-----------
The loader accepts what instruments commonly write:

* comment lines starting with ``#``, ``;``, ``%`` or ``//`` and any other
  non-numeric lines (metadata, a header) before the data;
* the last non-numeric line before the data, when it has one name per column,
  is the header: its names become ``channel_names`` and a unit in brackets or
  parentheses (``CH1 (V)``, ``Volt [mV]``) becomes ``units``;
* the delimiter (``;``, ``,``, tab or runs of whitespace) is detected from the
  first data row; the decimal separator is ``.``; trailing empty fields (a
  trailing delimiter) are ignored;
* a first column of time in seconds (``ms``, ``us`` and ``ns`` are converted
  when the header says so) gives the sample rate, fitted by least squares.
"""

from __future__ import annotations

import math
import os
import re
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterator, Sequence

import numpy as np
import soundfile as sf

from readchan.io.atomic import atomic_output, check_path_length
from readchan.errors import CaptureError, ParameterError

__all__ = [
    "Capture",
    "ClippingWarning",
    "MAX_SAMPLES",
    "MIN_SAMPLES",
    "NonPhysicalSampleWarning",
    "RATE_RANGE_HZ",
    "TruncatedCaptureWarning",
    "WRITE_KINDS",
    "check_output_path",
    "check_rate_range",
    "describe_outliers",
    "display_path",
    "load_capture",
    "repair_outliers",
    "write_capture",
]

#: Fewest samples a loaded capture may hold.
MIN_SAMPLES = 16

#: Most sample values (samples × channels) a loaded capture may hold: 2 GB as float64, about
#: 87 minutes of a 48 kHz mono capture.  A header that declares more is not believed before the
#: data are there: the samples are read in blocks and loading stops with an error at the limit.
MAX_SAMPLES = 250_000_000

#: Sample rates readchan decodes, in Hz (inclusive).  Below 100 Hz not even the baseline
#: high-pass (20 Hz) fits under Nyquist; above 1 GHz a card swipe (tens of milliseconds)
#: would be 10⁷ samples per bit cell, and the filters lose their numerical precision.
RATE_RANGE_HZ = (100.0, 1e9)

#: A sample more than this many times the channel's level (its 99.9th percentile magnitude
#: about the median), or of magnitude 1e150 or more (its square overflows float64), cannot
#: come from a head, an amplifier or a converter: it is a fault in the file.
OUTLIER_RATIO = 1e3
_OUTLIER_ABSOLUTE = 1e150

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

_TEXT_SUFFIXES = {".csv", ".txt", ".tsv", ".dat", ".asc"}
_SUFFIX_KIND = {".wav": ("wav16", "wav24", "wav-float"), ".wave": ("wav16", "wav24", "wav-float"),
                ".flac": ("flac",), ".csv": ("csv",), ".txt": ("csv",), ".tsv": ("csv",)}
# Leading bytes of container formats: a file starting so is audio, never text.
_AUDIO_MAGIC = (b"RIFF", b"RIFX", b"RF64", b"FORM", b"fLaC", b"OggS", b".snd", b"caff")

_COMMENT_PREFIXES = ("#", ";", "%", "//")
_SNIFF_BYTES = 1 << 16
_MAX_LEADING_LINES = 10_000
_RATE_TOLERANCE = 0.01          # relative disagreement allowed between two rates
_UNIFORM_TOLERANCE = 0.5        # largest time residual allowed, in sample periods
_CSV_CHUNK_ROWS = 65_536

_UNIT_RE = re.compile(r"^(.*?)\s*[\(\[]\s*([^\)\]]*?)\s*[\)\]]\s*$")
_TIME_SUFFIX_RE = re.compile(r"^(?:time|t)[_\s-]?(s|sec|ms|us|µs|μs|ns)$")
_TIME_NAMES = {"t", "s", "sec", "secs", "second", "seconds", "time", "times"}
_TIME_SCALE = {"s": 1.0, "sec": 1.0, "secs": 1.0, "ms": 1e-3, "us": 1e-6,
               "µs": 1e-6, "μs": 1e-6, "ns": 1e-9}
# Column names that are themselves a unit: canonical spelling.
_UNIT_NAMES = {"v": "V", "volt": "V", "volts": "V", "mv": "mV", "uv": "uV", "µv": "µV", "fs": "FS"}


class TruncatedCaptureWarning(UserWarning):
    """An audio file holds less sample data than its header declares; what is present was loaded."""


class NonPhysicalSampleWarning(UserWarning):
    """A channel holds samples far beyond any level a recording can have (a fault in the file);
    they were replaced by interpolation between their neighbours before decoding."""


class ClippingWarning(UserWarning):
    """Samples outside -1..1 were clipped while writing an integer-PCM file."""


# --------------------------------------------------------------------------- helpers


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


def display_path(path: str | os.PathLike | bytes) -> str:
    """A file name as it can be printed: bytes that are not UTF-8 (held by Python as lone
    surrogates) are shown as ``\\xe9`` escapes instead of breaking the output."""
    if isinstance(path, bytes):
        raw = path
    else:
        raw = os.fsencode(os.fspath(path)) if isinstance(path, os.PathLike) else str(path).encode(
            "utf-8", "surrogateescape")
    return raw.decode("utf-8", "backslashreplace")


def _err(source: str, problem: str) -> CaptureError:
    return CaptureError(_one_line(f"{display_path(source)}: {problem}"))


def _show(text: str, limit: int = 40) -> str:
    """Quote a piece of the user's file for a message, shortened to one line."""
    text = _one_line(text)
    if len(text) > limit:
        text = text[: limit - 3] + "..."
    return repr(text)


def _check_rate(rate_hz: object, what: str = "rate_hz") -> float:
    if isinstance(rate_hz, bool):
        raise ParameterError(f"{what} must be a number of hertz, not {rate_hz!r}")
    try:
        rate = float(rate_hz)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        raise ParameterError(_one_line(f"{what} must be a number of hertz, not {rate_hz!r}")) from None
    if not math.isfinite(rate) or rate <= 0.0:
        raise ParameterError(f"{what} must be finite and > 0 Hz, got {rate!r}")
    return rate


def check_rate_range(rate_hz: float, what: str = "sample rate") -> float:
    """Return ``rate_hz`` if readchan can decode at it (:data:`RATE_RANGE_HZ`), else raise
    :class:`~readchan.errors.ParameterError` naming the range."""
    rate = _check_rate(rate_hz, what)
    lo, hi = RATE_RANGE_HZ
    if not lo <= rate <= hi:
        raise ParameterError(f"{what} must be between {lo:g} Hz and {hi:g} Hz, was {rate:g} Hz")
    return rate


def _default_names(n: int) -> tuple[str, ...]:
    return tuple(f"ch{i}" for i in range(n))


def _first_nonfinite(samples: np.ndarray) -> tuple[int, int] | None:
    bad = ~np.isfinite(samples)
    if not bad.any():
        return None
    row, col = np.argwhere(bad)[0]
    return int(row), int(col)


def _rates_disagree(a: float, b: float) -> bool:
    return abs(a - b) > _RATE_TOLERANCE * b


# --------------------------------------------------------------------------- Capture


@dataclass(frozen=True, eq=False)
class Capture:
    """A uniformly sampled, possibly multi-channel capture.

    Parameters
    ----------
    samples : numpy.ndarray
        Values, shape ``(n_samples, n_channels)``; stored as a read-only,
        C-contiguous float64 array (a 1-D array is taken as one channel).
        Audio files give full scale (-1..1); text tables give their own units.
    rate_hz : float
        Sample rate in hertz, finite and > 0.
    source : str
        Where the capture came from: the path as the user gave it.
    units : str
        Unit of the values: ``'FS'`` (full scale) for audio files, otherwise
        the table's unit (``'V'`` when it names none).
    channel_names : tuple of str
        One name per channel; ``('ch0', 'ch1', ...)`` when left empty.

    Raises
    ------
    CaptureError
        If the samples are not 1-D or 2-D, are empty, or hold NaN/Inf, or if
        the number of names does not match the number of channels.
    ParameterError
        If ``rate_hz`` is not finite and > 0.

    Notes
    -----
    ``samples`` is a read-only view (no copy is made when the input already
    is C-contiguous float64), so a capture cannot be changed through it; take
    ``capture.channel(i).copy()`` to work on values in place.
    """

    samples: np.ndarray
    rate_hz: float
    source: str = "<memory>"
    units: str = "V"
    channel_names: tuple[str, ...] = field(default=())

    def __post_init__(self) -> None:
        source = display_path(self.source)      # printable in tables and valid UTF-8 in JSON
        try:
            samples = np.ascontiguousarray(self.samples, dtype=np.float64)
        except (TypeError, ValueError):
            raise _err(source, "samples are not numeric") from None
        if samples.ndim == 1:
            samples = samples.reshape(-1, 1)
        if samples.ndim != 2:
            raise _err(source, f"samples must have shape (n_samples, n_channels), got {samples.shape}")
        if samples.shape[0] == 0 or samples.shape[1] == 0:
            raise _err(source, f"samples are empty (shape {samples.shape})")
        bad = _first_nonfinite(samples)
        if bad is not None:
            raise _err(source, f"sample {bad[0]} of channel {bad[1]} is {samples[bad]!r}, not a finite number")
        samples = samples.view()          # our own read-only handle; the base is not touched
        samples.setflags(write=False)
        names = tuple(str(n) for n in self.channel_names) or _default_names(samples.shape[1])
        if len(names) != samples.shape[1]:
            raise _err(source, f"{len(names)} channel names given for {samples.shape[1]} channels")
        object.__setattr__(self, "samples", samples)
        object.__setattr__(self, "rate_hz", _check_rate(self.rate_hz))
        object.__setattr__(self, "source", source)
        object.__setattr__(self, "units", str(self.units))
        object.__setattr__(self, "channel_names", names)

    @property
    def n_samples(self) -> int:
        """Number of samples per channel."""
        return int(self.samples.shape[0])

    @property
    def n_channels(self) -> int:
        """Number of channels."""
        return int(self.samples.shape[1])

    @property
    def duration_s(self) -> float:
        """Duration in seconds: ``n_samples / rate_hz``."""
        return self.n_samples / self.rate_hz

    def channel(self, index: int) -> np.ndarray:
        """Return one channel as a 1-D float64 view (read-only).

        Parameters
        ----------
        index : int
            Channel number, ``0 <= index < n_channels``.

        Returns
        -------
        numpy.ndarray
            The channel's samples, shape ``(n_samples,)``.

        Raises
        ------
        CaptureError
            If ``index`` is not an integer in the valid range.
        """
        if isinstance(index, (bool, np.bool_)) or not isinstance(index, (int, np.integer)):
            raise _err(self.source, f"channel index must be an integer, not {index!r}")
        if not 0 <= index < self.n_channels:
            raise _err(self.source, f"channel {index} does not exist; valid channels are 0..{self.n_channels - 1}")
        return self.samples[:, int(index)]

    def __repr__(self) -> str:
        return (f"Capture(source={self.source!r}, n_samples={self.n_samples}, n_channels={self.n_channels}, "
                f"rate_hz={self.rate_hz!r}, units={self.units!r}, channel_names={self.channel_names!r})")


# --------------------------------------------------------------------------- faults in the data


def repair_outliers(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Replace the non-physical samples of one channel by linear interpolation between their
    neighbours.

    A sample is non-physical when its magnitude about the channel's median is 1e150 or more
    (its square overflows float64), or more than :data:`OUTLIER_RATIO` (10³, 60 dB) times the
    channel's level: the 99.9th percentile of the other samples' magnitudes about the median,
    which sits at the pulse peaks when a swipe is present and at the noise peaks when not.  No
    head, amplifier or converter produces such a value next to its neighbours: it is a fault
    in the file (a bad write, a corrupted float), and left in place it would set every level
    the decoder derives (noise, envelope, filters) and hide the whole channel.

    Parameters
    ----------
    x : one channel's samples, finite.

    Returns
    -------
    (samples, positions)
        ``x`` itself when nothing is wrong, else a repaired copy; and the indices of the samples
        replaced (int64, increasing; empty when none).
    """
    x = np.asarray(x, dtype=np.float64)
    if x.size < 2:
        return x, np.zeros(0, np.int64)
    step = max(1, x.size // 1_000_000)
    centre = float(np.median(x[::step]))
    dev = np.abs(x - centre)
    wild = dev >= _OUTLIER_ABSOLUTE
    sane = dev[::step][dev[::step] < _OUTLIER_ABSOLUTE]
    if sane.size:
        level = float(np.percentile(sane, 99.9))
        if level > 0:
            wild |= dev > OUTLIER_RATIO * level
    bad = np.flatnonzero(wild)
    if bad.size == 0:
        return x, bad.astype(np.int64)
    good = np.flatnonzero(~wild)
    y = x.copy()
    y[bad] = np.interp(bad, good, x[good]) if good.size else centre
    return y, bad.astype(np.int64)


def describe_outliers(positions: np.ndarray, rate_hz: float) -> str:
    """One line naming how many samples were replaced and where (first and last, in samples and
    seconds)."""
    n = int(positions.size)
    first, last = int(positions[0]), int(positions[-1])
    where = (f"sample {first} (t = {first / rate_hz:.6g} s)" if n == 1 else
             f"samples {first} (t = {first / rate_hz:.6g} s) to {last} (t = {last / rate_hz:.6g} s)")
    return (f"{n} non-physical sample{'s' if n > 1 else ''} (over {OUTLIER_RATIO:g}× the channel's level) at "
            f"{where}, replaced by interpolation before decoding")


# --------------------------------------------------------------------------- loading


def load_capture(path: str | Path, *, rate_hz: float | None = None,
                 time_column: bool | None = None) -> Capture:
    """Load a capture from an audio file or a text table.

    Parameters
    ----------
    path : str, bytes or pathlib.Path
        The file.  ``.csv``, ``.txt``, ``.tsv``, ``.dat`` and ``.asc`` are read
        as text; anything else is tried as audio (WAV of any subtype, FLAC,
        AIFF, ...) and, failing that, as text.  A name need not be valid
        UTF-8: the file is opened by its bytes.
    rate_hz : float, optional
        Sample rate in hertz, within :data:`RATE_RANGE_HZ`.  Required for a
        text table without a time column.  When the file carries its own rate
        (an audio header or a time column) the two must agree within 1 % and
        ``rate_hz`` is used.
    time_column : bool, optional
        For text tables: whether the first column is time.  ``None`` (the
        default) detects it: a header naming it time (``time``, ``t``, ``s``,
        ``sec``, ``Time (ms)`` ...), or, with no header and no ``rate_hz``, a
        strictly increasing first column when there are at least two columns.

    Returns
    -------
    Capture
        float64 samples of shape ``(n_samples, n_channels)``; ``units`` is
        ``'FS'`` for audio.

    Raises
    ------
    CaptureError
        If the file is missing, a directory, empty, unreadable, truncated
        inside its header, not uniformly sampled, ill-formed, holds NaN/Inf,
        fewer than :data:`MIN_SAMPLES` samples or more than
        :data:`MAX_SAMPLES` sample values, or its rate (header or time
        column) lies outside :data:`RATE_RANGE_HZ`.
    ParameterError
        If ``rate_hz`` is given but outside :data:`RATE_RANGE_HZ`.

    Warns
    -----
    TruncatedCaptureWarning
        If an audio file (WAV, AIFF, FLAC, ...) holds less data than its
        header declares, or its stream breaks off; the complete samples
        present are loaded.
    """
    if isinstance(path, bytes):
        path = os.fsdecode(path)          # a name that is not UTF-8 keeps its bytes (surrogates)
    source = str(path)
    if rate_hz is not None:
        rate_hz = check_rate_range(rate_hz, "the given sample rate (rate_hz)")
    if time_column not in (None, True, False):
        raise ParameterError(f"time_column must be True, False or None, not {time_column!r}")
    try:
        p = Path(path)
    except TypeError:
        raise ParameterError(f"a capture path must be a string or a Path, not {type(path).__name__}") from None
    try:
        if not p.exists():
            raise _err(source, "no such file")
        if p.is_dir():
            raise _err(source, "is a directory, not a capture file")
        size = p.stat().st_size
        if size == 0:
            raise _err(source, "file is empty")
        with open(p, "rb") as fh:
            head = fh.read(_SNIFF_BYTES)
    except OSError as exc:
        raise _err(source, f"cannot read file ({exc.strerror or exc})") from None

    suffix = p.suffix.lower()
    if suffix in _TEXT_SUFFIXES and not head.startswith(_AUDIO_MAGIC):
        return _load_text(p, source, head, rate_hz, time_column)

    try:
        return _load_audio(p, source, rate_hz)
    except _NotAudio as not_audio:
        if head.startswith(_AUDIO_MAGIC):
            cut = " it is truncated inside its header;" if _riff_cut_short(head, size) else ""
            raise _err(source, f"not a readable audio file:{cut} {not_audio.reason}") from None
        if _text_encoding(head) is None:
            raise _err(source, f"neither a readable audio file ({not_audio.reason}) nor a text table") from None
        return _load_text(p, source, head, rate_hz, time_column)


class _NotAudio(Exception):
    def __init__(self, reason: str) -> None:
        super().__init__(reason)
        self.reason = reason


def _soundfile_reason(exc: BaseException) -> str:
    reason = getattr(exc, "error_string", None) or str(exc)
    reason = _one_line(reason).strip().rstrip(".")
    return reason or type(exc).__name__


def _load_audio(p: Path, source: str, rate_hz: float | None) -> Capture:
    # soundfile is given an open file, not the name: a name that is not UTF-8 then still opens
    try:
        fh = open(p, "rb")
    except OSError as exc:
        raise _err(source, f"cannot read file ({exc.strerror or exc})") from None
    with fh:
        try:
            snd = sf.SoundFile(fh)
        except (sf.SoundFileError, RuntimeError, TypeError) as exc:
            raise _NotAudio(_soundfile_reason(exc)) from None
        except (OSError, ValueError, EOFError) as exc:
            raise _err(source, f"cannot read audio data ({_soundfile_reason(exc)})") from None
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
        raise _err(source, f"holds {data.shape[0]} samples{note}; at least {MIN_SAMPLES} are needed")
    if file_rate <= 0:
        raise _err(source, f"header gives an invalid sample rate {file_rate:g} Hz")
    if rate_hz is not None and _rates_disagree(file_rate, rate_hz):
        raise _err(source, f"file header says {file_rate:g} Hz but the given rate is {rate_hz:g} Hz "
                           f"(more than 1 % apart)")
    if rate_hz is None:
        _check_file_rate(source, file_rate, "header gives")
    bad = _first_nonfinite(data)
    if bad is not None:
        raise _err(source, f"sample {bad[0]} of channel {bad[1]} is {data[bad]!r}, not a finite number")
    return Capture(samples=np.ascontiguousarray(data), rate_hz=rate_hz or file_rate, source=source,
                   units="FS", channel_names=_default_names(data.shape[1]))


def _warn_truncated(message: str) -> None:
    warnings.warn(_one_line(message), TruncatedCaptureWarning, stacklevel=4)


def _check_file_rate(source: str, rate_hz: float, how: str) -> None:
    lo, hi = RATE_RANGE_HZ
    if not lo <= rate_hz <= hi:
        raise _err(source, f"{how} a sample rate of {rate_hz:.6g} Hz; readchan decodes {lo:g} Hz to {hi:g} Hz")


# Bytes per sample of the uncompressed subtypes: for these the header's frame count can be
# checked against the file size before anything is allocated.
_SUBTYPE_BYTES = {"PCM_S8": 1, "PCM_U8": 1, "PCM_16": 2, "PCM_24": 3, "PCM_32": 4, "FLOAT": 4, "DOUBLE": 8,
                  "ULAW": 1, "ALAW": 1}
_AUDIO_BLOCK_FRAMES = 1 << 16


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
            raise _err(source, f"cannot read audio data ({_soundfile_reason(exc)})") from None
    blocks: list[np.ndarray] = []
    total = 0
    fault = None
    while True:
        try:
            block = snd.read(_AUDIO_BLOCK_FRAMES, dtype="float64", always_2d=True)
        except _AUDIO_ERRORS as exc:
            fault = _soundfile_reason(exc)
            break
        if block.shape[0]:
            blocks.append(block)
            total += block.shape[0]
        if total > limit_frames:
            raise _err(source, f"holds more than {MAX_SAMPLES:,} sample values ({channels} channel(s)), the most "
                               f"readchan loads; cut the capture into parts")
        if block.shape[0] < _AUDIO_BLOCK_FRAMES:
            break
    data = np.concatenate(blocks) if len(blocks) > 1 else (blocks[0] if blocks else np.zeros((0, channels)))
    if fault is not None:
        # the last block failed as a whole: read again up to the fault in ever smaller blocks
        data = _salvage(fh, data, channels)
        if data.shape[0] == 0:
            raise _err(source, f"cannot read audio data ({fault})")
        claim = f"its header declares {declared} samples but " if declared > data.shape[0] else ""
        return data, f"{claim}the audio stream breaks off after sample {data.shape[0]} ({fault})"
    if declared > data.shape[0]:
        return data, f"its header declares {declared} samples but the stream holds {data.shape[0]}"
    return data, ""


_AUDIO_ERRORS = (sf.SoundFileError, RuntimeError, OSError, ValueError, EOFError)


def _salvage(fh, good: np.ndarray, channels: int) -> np.ndarray:
    """The frames of the file on ``fh`` up to a decoding fault: ``good`` (read before the
    failing block), then blocks of 4096, 256, 16 and 1 frames, each pass reopening the file and
    continuing from what the previous pass read."""
    have = good
    for frames in (4096, 256, 16, 1):
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


def _riff_cut_short(head: bytes, size: int) -> bool:
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
            for _ in range(10_000):
                hdr = fh.read(8)
                if len(hdr) < 8:
                    return None
                chunk_id, chunk_size = hdr[:4], int.from_bytes(hdr[4:], order)
                if chunk_id == data_id:
                    present = size - (offset + 8)
                    if chunk_size != 0xFFFFFFFF and chunk_size > present:
                        return chunk_size, max(present, 0)
                    return None
                offset += 8 + chunk_size + (chunk_size & 1)
                fh.seek(offset)
    except OSError:
        return None
    return None


# ---- text tables


def _text_encoding(head: bytes) -> str | None:
    """Guess the encoding of a text file from its first bytes; None if it looks binary."""
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        return "utf-16"
    if head.startswith(b"\xef\xbb\xbf"):
        return "utf-8-sig"
    if b"\x00" in head:
        return None
    try:
        head.decode("utf-8")
        return "utf-8"
    except UnicodeDecodeError as exc:
        if exc.start >= len(head) - 4 and len(head) == _SNIFF_BYTES:
            return "utf-8"          # a character cut by the sniff window
        return "latin-1"


def _is_comment(stripped: str) -> bool:
    return stripped.startswith(_COMMENT_PREFIXES)


def _detect_delimiter(line: str) -> str | None:
    for delim in (";", ",", "\t"):
        if delim in line:
            return delim
    return None


def _split(line: str, delim: str | None) -> list[str]:
    fields = [f.strip().strip('"').strip("'").strip() for f in line.strip().split(delim)]
    return fields


def _strip_trailing_empty(fields: list[str]) -> tuple[list[str], int]:
    n = len(fields)
    while n > 0 and fields[n - 1] == "":
        n -= 1
    return fields[:n], len(fields) - n


def _numeric(fields: Sequence[str]) -> bool:
    if not fields:
        return False
    try:
        for f in fields:
            float(f)
    except ValueError:
        return False
    return True


def _parse_name(name: str) -> tuple[str, str | None]:
    """Split a header name into (name, unit) for 'CH1 (V)' or 'Volt [mV]'."""
    m = _UNIT_RE.match(name)
    if m and m.group(2):
        return (m.group(1).strip() or m.group(2)), m.group(2)
    return name.strip(), None


def _time_scale(name: str, unit: str | None) -> float | None | str:
    """Seconds per unit of a time-like column; None if not a time name; the unit string if unknown."""
    low = name.strip().lower()
    m = _TIME_SUFFIX_RE.match(low)
    if m:
        return _TIME_SCALE[m.group(1)]
    if unit is not None and unit.strip().lower() in _TIME_SCALE:
        return _TIME_SCALE[unit.strip().lower()]
    if low in _TIME_NAMES or low.startswith("time"):
        if unit is None:
            return 1.0
        return unit
    return None


def _merge_unit_tokens(fields: list[str]) -> list[str]:
    """For whitespace-separated headers: glue '(V)' / '[mV]' tokens onto the name before them."""
    out: list[str] = []
    for f in fields:
        if out and f[:1] in "([" and f[-1:] in ")]":
            out[-1] = f"{out[-1]} {f}"
        else:
            out.append(f)
    return out


@dataclass(frozen=True)
class _Layout:
    encoding: str
    skip_lines: int            # physical lines before the first data row
    first_data_line: int       # 1-based line number of the first data row
    delimiter: str | None
    n_fields: int              # real (non-empty) fields per row
    n_trailing: int            # empty trailing fields per row
    header: tuple[str, ...] | None


def _scan_layout(p: Path, source: str, encoding: str) -> _Layout:
    """Read the leading comment/header lines and the first data row."""
    candidates: list[str] = []
    with open(p, encoding=encoding, newline=None) as fh:
        for lineno, raw in enumerate(fh, start=1):
            if lineno > _MAX_LEADING_LINES:
                raise _err(source, f"no numeric data in the first {_MAX_LEADING_LINES} lines")
            stripped = raw.strip()
            if not stripped or _is_comment(stripped):
                continue
            delim = _detect_delimiter(stripped)
            fields, n_trailing = _strip_trailing_empty(_split(stripped, delim))
            if _numeric(fields):
                header = None
                if candidates:
                    names, _ = _strip_trailing_empty(_split(candidates[-1], delim))
                    if delim is None:
                        names = _merge_unit_tokens(names)
                    if len(names) == len(fields):
                        header = tuple(names)
                return _Layout(encoding, lineno - 1, lineno, delim, len(fields), n_trailing, header)
            candidates.append(stripped)
    raise _err(source, "no numeric data found (not a capture table)")


def _iter_data_lines(p: Path, layout: _Layout) -> Iterator[tuple[int, str]]:
    """Yield (line number, content) for every data row, comments and blank lines left out."""
    with open(p, encoding=layout.encoding, newline=None, errors="replace") as fh:
        for lineno, raw in enumerate(fh, start=1):
            if lineno <= layout.skip_lines:
                continue
            stripped = raw.strip()
            if not stripped or _is_comment(stripped):
                continue
            stripped = stripped.split("#", 1)[0].strip()
            if stripped:
                yield lineno, stripped


def _diagnose(p: Path, source: str, layout: _Layout) -> CaptureError:
    """Find the first ill-formed row of a table that numpy refused, and describe it."""
    expected = layout.n_fields + layout.n_trailing
    for lineno, line in _iter_data_lines(p, layout):
        fields = _split(line, layout.delimiter)
        if len(fields) != expected:
            return _err(source, f"line {lineno} has {len(fields)} fields, expected {expected} "
                                f"like line {layout.first_data_line}")
        for col, text in enumerate(fields[:layout.n_fields], start=1):
            if text == "":
                return _err(source, f"line {lineno} has an empty value in column {col}")
            try:
                value = float(text)
            except ValueError:
                return _err(source, f"line {lineno}, column {col}: {_show(text)} is not a number")
            if not math.isfinite(value):
                return _err(source, f"line {lineno}, column {col}: value {_show(text)} is not finite")
        if any(f != "" for f in fields[layout.n_fields:]):
            return _err(source, f"line {lineno} has more values than line {layout.first_data_line}")
    return _err(source, "table could not be parsed as numbers")


def _line_of_row(p: Path, layout: _Layout, row: int) -> int:
    for k, (lineno, _) in enumerate(_iter_data_lines(p, layout)):
        if k == row:
            return lineno
    return -1


def _read_table(p: Path, source: str, layout: _Layout) -> np.ndarray:
    """Parse the data rows with numpy (vectorised); describe the first bad row on failure."""
    converters = None
    if layout.n_trailing:
        # Trailing delimiters: the extra fields must be empty; anything else marks the row.
        def empty_field(text: str) -> float:
            return 0.0 if not text.strip() else math.nan
        converters = {layout.n_fields + j: empty_field for j in range(layout.n_trailing)}
    common = dict(delimiter=layout.delimiter, skiprows=layout.skip_lines, ndmin=2,
                  dtype=np.float64, converters=converters)
    attempts = (
        dict(comments="#", quotechar='"'),
        dict(comments=["#", "//", "%"] + ([";"] if layout.delimiter != ";" else []), quotechar=None),
    )
    data = None
    encoding = layout.encoding
    for attempt in attempts:
        for enc in (encoding, "latin-1"):
            try:
                data = np.loadtxt(p, encoding=enc, **common, **attempt)
                break
            except UnicodeError:
                if enc == "latin-1":
                    raise _err(source, "cannot decode the text") from None
                encoding = "latin-1"
                continue
            except (ValueError, IndexError):
                break
            except OSError as exc:
                raise _err(source, f"cannot read file ({exc.strerror or exc})") from None
        if data is not None:
            break
    layout = _Layout(encoding, layout.skip_lines, layout.first_data_line, layout.delimiter,
                     layout.n_fields, layout.n_trailing, layout.header)
    if data is None:
        raise _diagnose(p, source, layout)
    if data.shape[1] != layout.n_fields + layout.n_trailing:
        raise _diagnose(p, source, layout)
    if not np.isfinite(data).all():
        raise _diagnose(p, source, layout)
    return np.ascontiguousarray(data[:, :layout.n_fields])


def _load_text(p: Path, source: str, head: bytes, rate_hz: float | None,
               time_column: bool | None) -> Capture:
    encoding = _text_encoding(head)
    if encoding is None:
        raise _err(source, "is a binary file, not a readable audio file or text table")
    try:
        layout = _scan_layout(p, source, encoding)
    except UnicodeError:
        layout = _scan_layout(p, source, "latin-1")
    except OSError as exc:
        raise _err(source, f"cannot read file ({exc.strerror or exc})") from None

    names: list[str] = []
    units: list[str | None] = []
    if layout.header is not None:
        for raw_name in layout.header:
            name, unit = _parse_name(raw_name)
            names.append(name)
            units.append(unit)

    # Is the first column time?
    scale: float | None = None
    if layout.header is not None:
        found = _time_scale(names[0], units[0])
        if isinstance(found, str):
            if time_column is not False:
                raise _err(source, f"time column unit {found!r} is not understood (expected s, ms, us or ns)")
        elif found is not None and time_column is not False:
            scale = found
        elif time_column:
            scale = 1.0
    has_time = scale is not None
    if not has_time and time_column:
        has_time, scale = True, 1.0

    data = _read_table(p, source, layout)
    n_rows = data.shape[0]
    if n_rows < MIN_SAMPLES:
        raise _err(source, f"holds {n_rows} samples; at least {MIN_SAMPLES} are needed")

    if (layout.header is None and time_column is None and rate_hz is None
            and data.shape[1] >= 2 and bool(np.all(np.diff(data[:, 0]) > 0))):
        has_time, scale = True, 1.0

    if has_time:
        if data.shape[1] < 2:
            raise _err(source, "has a time column but no value columns")
        times = data[:, 0] * (scale or 1.0)
        fitted = _fit_rate(p, source, layout, times)
        if rate_hz is None:
            _check_file_rate(source, fitted, f"time column (step {1.0 / fitted:.3g} s) gives")
        if rate_hz is not None and _rates_disagree(fitted, rate_hz):
            raise _err(source, f"time column gives {fitted:.6g} Hz but the given rate is {rate_hz:.6g} Hz "
                               f"(more than 1 % apart)")
        rate = rate_hz if rate_hz is not None else fitted
        values = np.ascontiguousarray(data[:, 1:])
        value_names, value_units = names[1:], units[1:]
    else:
        if rate_hz is None:
            if data.shape[1] == 1:
                raise _err(source, "has a single column and no time column; pass rate_hz to give the sample rate")
            raise _err(source, "has no time column (the first column is not named time and is not increasing); "
                               "pass rate_hz to give the sample rate")
        rate = rate_hz
        values = data
        value_names, value_units = names, units

    channel_names = tuple(n or f"ch{i}" for i, n in enumerate(value_names)) or _default_names(values.shape[1])
    return Capture(samples=values, rate_hz=rate, source=source,
                   units=_table_units(value_names, value_units), channel_names=channel_names)


def _table_units(names: Sequence[str], units: Sequence[str | None]) -> str:
    found: list[str] = []
    for name, unit in zip(names, units):
        if unit:
            found.append(unit)
        elif name.strip().lower() in _UNIT_NAMES:
            found.append(_UNIT_NAMES[name.strip().lower()])
        else:
            found.append("V")
    distinct = list(dict.fromkeys(found))
    if not distinct:
        return "V"
    return distinct[0] if len(distinct) == 1 else ",".join(found)


def _fit_rate(p: Path, source: str, layout: _Layout, times: np.ndarray) -> float:
    """Fit t = t0 + i*dt by least squares; require every residual within half a period."""
    n = times.shape[0]
    i = np.arange(n, dtype=np.float64)
    i_mean = (n - 1) / 2.0
    t_mean = float(times.mean())
    di = i - i_mean
    dt = float(np.dot(di, times - t_mean) / np.dot(di, di))
    if not math.isfinite(dt) or dt <= 0.0:
        raise _err(source, "time column is not increasing")
    residual = times - (t_mean + di * dt)
    worst = int(np.argmax(np.abs(residual)))
    if abs(residual[worst]) > _UNIFORM_TOLERANCE * dt:
        line = _line_of_row(p, layout, worst)
        raise _err(source, f"time column is not uniformly sampled (largest deviation "
                           f"{abs(residual[worst]):.3g} s at row {worst + 1}, line {line})")
    # A single dropped or doubled row can hide inside the residual bound; steps catch it.
    steps = np.diff(times)
    step_error = np.abs(steps - dt)
    worst = int(np.argmax(step_error))
    if step_error[worst] > _UNIFORM_TOLERANCE * dt:
        line = _line_of_row(p, layout, worst + 1)
        raise _err(source, f"time column is not uniformly sampled (step of {steps[worst]:.3g} s at row "
                           f"{worst + 2}, line {line}, where the sample period is {dt:.3g} s)")
    return 1.0 / dt


# --------------------------------------------------------------------------- writing


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
    target = check_output_path(path)
    source = str(path)
    if kind not in WRITE_KINDS:
        raise ParameterError(f"unknown capture kind {kind!r}; choose one of {', '.join(WRITE_KINDS)}")
    allowed = _SUFFIX_KIND.get(target.suffix.lower())
    if allowed is not None and kind not in allowed:
        raise ParameterError(f"{source}: kind {kind!r} does not match the extension {target.suffix!r}")
    rate = _check_rate(rate_hz)
    try:
        data = np.array(samples, dtype=np.float64, order="C", copy=True)
    except (TypeError, ValueError):
        raise ParameterError("samples must be numeric") from None
    if data.ndim == 1:
        data = data.reshape(-1, 1)
    if data.ndim != 2 or data.shape[0] == 0 or data.shape[1] == 0:
        raise ParameterError(f"samples must have shape (n_samples,) or (n_samples, n_channels) "
                             f"with at least one of each, got {np.shape(samples)}")
    bad = _first_nonfinite(data)
    if bad is not None:
        raise ParameterError(f"samples must be finite; sample {bad[0]} of channel {bad[1]} is {data[bad]!r}")
    n_channels = data.shape[1]
    # Audio files carry no channel names; only a CSV header needs them to be usable.
    names = _check_names(channel_names, n_channels) if kind == "csv" else _default_names(n_channels)

    if kind in _AUDIO_KINDS:
        int_rate = round(rate)
        if int_rate < 1 or abs(rate - int_rate) > 1e-6 * rate:
            raise ParameterError(f"{kind} needs a whole number of hertz; {rate!r} Hz is not")
        if kind == "flac" and n_channels > _FLAC_MAX_CHANNELS:
            raise ParameterError(f"flac holds at most {_FLAC_MAX_CHANNELS} channels, got {n_channels}")
        if kind in _CLIPPED_KINDS:
            outside = int(np.count_nonzero(np.abs(data) > 1.0))
            if outside:
                np.clip(data, -1.0, 1.0, out=data)
                warnings.warn(f"{source}: {outside} samples outside -1..1 were clipped for {kind}",
                              ClippingWarning, stacklevel=2)

    # The target is checked before any byte is written; see readchan.io.atomic for the rules.
    with atomic_output(target, force=force, error=CaptureError) as tmp:
        if kind in _AUDIO_KINDS:
            fmt, subtype = _AUDIO_KINDS[kind]
            try:
                with open(tmp, "wb") as fh:       # by the file, not its name: names need not be UTF-8
                    sf.write(fh, data, int(round(rate)), subtype=subtype, format=fmt)
            except (sf.SoundFileError, RuntimeError, ValueError, TypeError) as exc:
                raise _err(source, f"cannot write {kind} ({_soundfile_reason(exc)})") from None
        else:
            _write_csv(tmp, data, rate, names)
    return target


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
        return _default_names(n_channels)
    if isinstance(channel_names, str):
        raise ParameterError("channel_names must be a sequence of names, not one string")
    names = tuple(str(n).strip() for n in channel_names)
    if len(names) != n_channels:
        raise ParameterError(f"{len(names)} channel names given for {n_channels} channels")
    for name in names:
        if not name or any(c in name for c in ',;\t\r\n"') or _is_comment(name) or _numeric([name]):
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
