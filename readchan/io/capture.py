"""Captures: the :class:`Capture` type, its checks, non-physical samples, and the loader.

Input: a path to an audio file or a text table (:func:`load_capture`), or samples in memory
(:class:`Capture`).  Output: a :class:`Capture` (float64 samples × channels, rate in Hz,
units, channel names).  Reading is :mod:`readchan.io.audio`'s and :mod:`readchan.io.text`'s;
writing (:func:`write_capture`, re-exported here) is :mod:`readchan.io.write`'s.

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
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from readchan.errors import ParameterError
from readchan.io.audio import AUDIO_MAGIC, NotAudio, TruncatedCaptureWarning, load_audio, riff_cut_short
from readchan.io.checks import (MAX_SAMPLES, MIN_SAMPLES, RATE_RANGE_HZ, check_rate, check_rate_range,
                                default_names, display_path, file_error, first_nonfinite)
from readchan.io.text import SNIFF_BYTES, TEXT_SUFFIXES, load_text, text_encoding
# write_capture and its companions stay importable from here (readchan.cli.synth imports them)
from readchan.io.write import WRITE_KINDS, ClippingWarning, check_output_path, write_capture

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


#: A sample more than this many times the channel's level (its 99.9th percentile magnitude
#: about the median), or of magnitude 1e150 or more (its square overflows float64), cannot
#: come from a head, an amplifier or a converter: it is a fault in the file.
OUTLIER_RATIO = 1e3


_OUTLIER_ABSOLUTE = 1e150

OUTLIER_LEVEL_PERCENTILE = 99.9
"""Percentile of the magnitudes about the median that sets a channel's level for
:func:`repair_outliers` (at the pulse peaks with a swipe present, at the noise peaks without)."""

OUTLIER_SUBSAMPLE = 1_000_000
"""Samples (about) the median and the level are taken over: every k-th of a longer channel
(our choice: a million samples fix both well; the whole channel is still tested)."""


class NonPhysicalSampleWarning(UserWarning):
    """A channel holds samples far beyond any level a recording can have (a fault in the file);
    they were replaced by interpolation between their neighbours before decoding."""


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
            raise file_error(source, "samples are not numeric") from None
        if samples.ndim == 1:
            samples = samples.reshape(-1, 1)
        if samples.ndim != 2:
            raise file_error(source, f"samples must have shape (n_samples, n_channels), got {samples.shape}")
        if samples.shape[0] == 0 or samples.shape[1] == 0:
            raise file_error(source, f"samples are empty (shape {samples.shape})")
        bad = first_nonfinite(samples)
        if bad is not None:
            raise file_error(source, f"sample {bad[0]} of channel {bad[1]} is {samples[bad]!r}, not a finite number")
        samples = samples.view()          # our own read-only handle; the base is not touched
        samples.setflags(write=False)
        names = tuple(str(n) for n in self.channel_names) or default_names(samples.shape[1])
        if len(names) != samples.shape[1]:
            raise file_error(source, f"{len(names)} channel names given for {samples.shape[1]} channels")
        object.__setattr__(self, "samples", samples)
        object.__setattr__(self, "rate_hz", check_rate(self.rate_hz))
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
            raise file_error(self.source, f"channel index must be an integer, not {index!r}")
        if not 0 <= index < self.n_channels:
            raise file_error(self.source, f"channel {index} does not exist; valid channels are 0..{self.n_channels - 1}")
        return self.samples[:, int(index)]

    def __repr__(self) -> str:
        return (f"Capture(source={self.source!r}, n_samples={self.n_samples}, n_channels={self.n_channels}, "
                f"rate_hz={self.rate_hz!r}, units={self.units!r}, channel_names={self.channel_names!r})")


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
    step = max(1, x.size // OUTLIER_SUBSAMPLE)
    centre = float(np.median(x[::step]))
    if _none_wild(x, step, centre):
        return x, np.zeros(0, np.int64)
    dev = np.abs(x - centre)
    wild = dev >= _OUTLIER_ABSOLUTE
    sane = dev[::step][dev[::step] < _OUTLIER_ABSOLUTE]
    if sane.size:
        level = float(np.percentile(sane, OUTLIER_LEVEL_PERCENTILE))
        if level > 0:
            wild |= dev > OUTLIER_RATIO * level
    bad = np.flatnonzero(wild)
    if bad.size == 0:
        return x, bad.astype(np.int64)
    good = np.flatnonzero(~wild)
    y = x.copy()
    y[bad] = np.interp(bad, good, x[good]) if good.size else centre
    return y, bad.astype(np.int64)


def _none_wild(x: np.ndarray, step: int, centre: float) -> bool:
    """True when :func:`repair_outliers` would find no sample of ``x`` non-physical, decided
    without its full-length arrays (the common case, and the same answer).

    The largest deviation is at an extreme: x − c rounds monotonically in x, so max |x − c| is
    the larger of max(x) − c and c − min(x).  The level (the 99.9th percentile of the
    subsample's deviations) is then bounded from below by a count instead of a sort: when more
    than 0.1 % of them reach v = max|x − c| / 999, the percentile is at least v, and
    10³ × level ≥ 1.001 × the largest deviation, which no sample then exceeds.  Otherwise
    (False) the full test decides."""
    worst = max(float(x.max()) - centre, centre - float(x.min()))
    if not worst < _OUTLIER_ABSOLUTE:
        return False
    if worst == 0.0:
        return True
    dev = np.abs(x[::step] - centre)
    n = dev.size
    reach = int(np.count_nonzero(dev >= worst / (OUTLIER_RATIO - 1.0)))
    # the percentile's lower sample sits at index floor(q (n − 1)) of the sorted deviations
    # (one less here: q (n − 1) may round to either side of a whole number)
    lower = int(math.floor(OUTLIER_LEVEL_PERCENTILE / 100.0 * (n - 1))) - 1
    return n - reach <= lower


def describe_outliers(positions: np.ndarray, rate_hz: float) -> str:
    """One line naming how many samples were replaced and where (first and last, in samples and
    seconds)."""
    n = int(positions.size)
    first, last = int(positions[0]), int(positions[-1])
    where = (f"sample {first} (t = {first / rate_hz:.6g} s)" if n == 1 else
             f"samples {first} (t = {first / rate_hz:.6g} s) to {last} (t = {last / rate_hz:.6g} s)")
    return (f"{n} non-physical sample{'s' if n > 1 else ''} (over {OUTLIER_RATIO:g}× the channel's level) at "
            f"{where}, replaced by interpolation before decoding")


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
    # over 60 lines only by its docstring (the parameter reference); the steps are named helpers
    p, source, rate_hz = _checked_arguments(path, rate_hz, time_column)
    head, size = _first_bytes(p, source)
    if p.suffix.lower() in TEXT_SUFFIXES and not head.startswith(AUDIO_MAGIC):
        return _table_capture(p, source, head, rate_hz, time_column)
    try:
        samples, rate = load_audio(p, source, rate_hz)
    except NotAudio as not_audio:
        if head.startswith(AUDIO_MAGIC):
            cut = " it is truncated inside its header;" if riff_cut_short(head, size) else ""
            raise file_error(source, f"not a readable audio file:{cut} {not_audio.reason}") from None
        if text_encoding(head) is None:
            raise file_error(source, f"neither a readable audio file ({not_audio.reason}) nor a text table") from None
        return _table_capture(p, source, head, rate_hz, time_column)
    return Capture(samples=samples, rate_hz=rate, source=source, units="FS",
                   channel_names=default_names(samples.shape[1]))


def _checked_arguments(path, rate_hz: float | None, time_column: bool | None) -> tuple[Path, str, float | None]:
    """:func:`load_capture`'s arguments checked: the path, its name as given, the rate in Hz."""
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
    return p, source, rate_hz


def _first_bytes(p: Path, source: str) -> tuple[bytes, int]:
    """The first :data:`~readchan.io.text.SNIFF_BYTES` of the file ``p`` and its size in bytes;
    a missing, directory, empty or unreadable file is a one-line error."""
    try:
        if not p.exists():
            raise file_error(source, "no such file")
        if p.is_dir():
            raise file_error(source, "is a directory, not a capture file")
        size = p.stat().st_size
        if size == 0:
            raise file_error(source, "file is empty")
        with open(p, "rb") as fh:
            return fh.read(SNIFF_BYTES), size
    except OSError as exc:
        raise file_error(source, f"cannot read file ({exc.strerror or exc})") from None


def _table_capture(p: Path, source: str, head: bytes, rate_hz: float | None, time_column: bool | None) -> Capture:
    samples, rate, units, names = load_text(p, source, head, rate_hz, time_column)
    return Capture(samples=samples, rate_hz=rate, source=source, units=units, channel_names=names)
