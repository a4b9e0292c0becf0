"""readchan: decode, diagnose and synthesize magnetic read-channel captures.

The public Python API, four entry points over the package's stages:

* :func:`load` — a file → :class:`Capture` (samples × channels, rate, units);
* :func:`decode` — a capture (or a file) → one :class:`ChannelResult` per channel, each with
  its :class:`Read` s (bits, frame, fields);
* :func:`inspect` — a capture (or a file) → one :class:`ChannelReport` per channel (front end,
  noise, pulse shape, speed, timing, anomalies, verdict);
* :func:`synthesize` — a :class:`SynthSpec` → a :class:`SynthResult` (samples and their truth);
* :func:`decode_many` — many captures (paths, directories, globs) → one :class:`CaptureResult`
  per capture, in input order, over any :class:`concurrent.futures.Executor`.

Settings are typed objects (:class:`DecodeSettings`, :class:`ConditionSettings`,
:class:`SynthSpec`); every error readchan raises on purpose is a :class:`ReadchanError` whose
message names the offending parameter.  The modules behind these names are imported on first
use, so ``import readchan`` stays cheap (no numpy, scipy or matplotlib).
"""

from __future__ import annotations

import importlib
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterator

__version__ = "0.1.0"

if TYPE_CHECKING:          # for type checkers only; at run time these load lazily (__getattr__)
    from readchan.io.capture import Capture
    from readchan.frontend.condition import ConditionSettings
    from readchan.channel import ChannelResult, DecodeSettings, Read
    from readchan.measure.diagnose import ChannelReport, ReadReport
    from readchan.errors import CaptureError, FormatError, OutputError, ParameterError, ReadchanError
    from readchan.formats.iso7811.framing import Frame
    from readchan.synth import Impairments, SpeedProfile, SynthResult, SynthSpec
    from readchan.linecode.f2f import BitStream
    from readchan.batch import CaptureResult

# public name → the module that defines it
_LAZY = {
    "Capture": "readchan.io.capture",
    "ConditionSettings": "readchan.frontend.condition",
    "DecodeSettings": "readchan.channel", "ChannelResult": "readchan.channel", "Read": "readchan.channel",
    "ChannelReport": "readchan.measure.diagnose", "ReadReport": "readchan.measure.diagnose",
    "ReadchanError": "readchan.errors", "CaptureError": "readchan.errors", "FormatError": "readchan.errors",
    "ParameterError": "readchan.errors", "OutputError": "readchan.errors",
    "Frame": "readchan.formats.iso7811.framing",
    "BitStream": "readchan.linecode.f2f",
    "SynthSpec": "readchan.synth", "SynthResult": "readchan.synth", "Impairments": "readchan.synth",
    "SpeedProfile": "readchan.synth",
    "CaptureResult": "readchan.batch",
}

__all__ = ["load", "decode", "decode_many", "inspect", "synthesize", "__version__", *_LAZY]


def __getattr__(name: str) -> Any:
    """The result and settings types, imported from their modules on first use (PEP 562)."""
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'readchan' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_LAZY))


def load(path: str | Path, *, rate_hz: float | None = None, time_column: bool | None = None) -> "Capture":
    """Load a capture from an audio file (WAV, FLAC, AIFF) or a text table (CSV, ...).

    ``rate_hz`` (Hz) is needed for a table without a time column; ``time_column`` says whether
    the first column is time (None: detect it).  See :func:`readchan.io.capture.load_capture`.
    """
    from readchan.io.capture import load_capture

    return load_capture(path, rate_hz=rate_hz, time_column=time_column)


def _capture_of(path_or_capture: Any, rate_hz: float | None) -> "Capture":
    from readchan.io.capture import Capture
    from readchan.errors import ParameterError

    if isinstance(path_or_capture, Capture):
        if rate_hz is not None:
            raise ParameterError("rate_hz applies to a file to be loaded; a Capture carries its own rate")
        return path_or_capture
    if isinstance(path_or_capture, (str, bytes, Path)):
        return load(path_or_capture, rate_hz=rate_hz)
    raise ParameterError(f"path_or_capture must be a path or a Capture, was {type(path_or_capture).__name__}")


def _settings_of(settings: "DecodeSettings | None") -> "DecodeSettings":
    from readchan.channel import DecodeSettings
    from readchan.errors import ParameterError

    if settings is None:
        return DecodeSettings()
    if not isinstance(settings, DecodeSettings):
        raise ParameterError(f"settings must be a DecodeSettings, was {type(settings).__name__}")
    return settings


def decode(path_or_capture: "str | Path | Capture", settings: "DecodeSettings | None" = None, *,
           channels: list[int] | None = None, rate_hz: float | None = None) -> "list[ChannelResult]":
    """Decode every channel (or the chosen ``channels``, from 0) of a capture or of a file.

    ``settings`` defaults to ``DecodeSettings()`` (format, signal kind and track guessed);
    ``rate_hz`` (Hz) is passed to :func:`load` when a path is given.  Returns one
    :class:`ChannelResult` per channel; see :func:`readchan.channel.decode_capture`.
    """
    from readchan.channel import decode_capture

    return decode_capture(_capture_of(path_or_capture, rate_hz), _settings_of(settings), channels=channels)


def decode_many(paths: Any, *, executor: Any = None, settings: "DecodeSettings | None" = None,
                channels: list[int] | None = None, rate_hz: float | None = None, **vcd: Any) -> Iterator["CaptureResult"]:
    """Decode many captures: yields one :class:`CaptureResult` per capture, in input order, each
    as soon as it and those before it are done.

    ``paths`` is a path or an iterable of paths, directories (their capture files, recursively),
    globs and ``"-"`` (standard input).  ``executor`` is any :class:`concurrent.futures.Executor`
    (a thread or process pool, or a cluster's: ``distributed.Client(...).get_executor()``); None
    decodes one after the other here.  A bad capture gives a result with its one-line ``error``
    and exit code; the others go on.  ``vcd`` takes ``signal_name``, ``strobe_name``,
    ``data_name`` and ``window``; see :func:`readchan.batch.decode_many`.
    """
    from readchan.batch import decode_many as _decode_many

    return _decode_many(paths, executor=executor, settings=_settings_of(settings), channels=channels,
                        rate_hz=rate_hz, **vcd)


def inspect(path_or_capture: "str | Path | Capture", settings: "DecodeSettings | None" = None, *,
            channels: list[int] | None = None, rate_hz: float | None = None) -> "list[ChannelReport]":
    """Decode and diagnose every channel (or the chosen ``channels``) of a capture or a file.

    The arguments are those of :func:`decode`.  Returns one :class:`ChannelReport` per
    channel; see :func:`readchan.measure.diagnose.inspect_capture`.
    """
    from readchan.measure.diagnose import inspect_capture

    return inspect_capture(_capture_of(path_or_capture, rate_hz), _settings_of(settings), channels=channels)


_DEFAULT_LIMIT: Any = object()


def synthesize(spec: "SynthSpec", *, max_samples: Any = _DEFAULT_LIMIT) -> "SynthResult":
    """Render a :class:`SynthSpec` into samples and the ground truth behind them.

    ``max_samples`` caps the capture's size (default :data:`readchan.synth.SAMPLE_LIMIT`;
    None for the hard limit).  See :func:`readchan.synth.synthesize`.
    """
    from readchan.errors import ParameterError
    from readchan.synth import SAMPLE_LIMIT, SynthSpec
    from readchan.synth import synthesize as _synthesize

    if not isinstance(spec, SynthSpec):
        raise ParameterError(f"spec must be a SynthSpec, was {type(spec).__name__}")
    return _synthesize(spec, max_samples=SAMPLE_LIMIT if max_samples is _DEFAULT_LIMIT else max_samples)
