"""The read channel wired from the format registry: capture → front end → transitions → line
decoder → framer → interpreter, one channel at a time.

Input: a :class:`readchan.io.capture.Capture` (or one channel's samples and rate) and
:class:`DecodeSettings`.
Output: one :class:`readchan.results.ChannelResult` per channel, holding its
:class:`readchan.results.Read` s.

This module holds no format's rules: it repairs non-physical samples, asks the registry
(:mod:`readchan.formats.registry`) which formats to try, and runs each family's channel decoder
(cards: :mod:`readchan.formats.iso7811.card`; timecode: :mod:`readchan.formats.ltc.channel`;
cassette data: :mod:`readchan.formats.kcs.channel`) until one claims the channel.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field, replace
from enum import Enum

import numpy as np

from readchan.errors import ParameterError
from readchan.formats.iso7811.charset import TRACKS, CharFormat
from readchan.frontend.condition import MIN_NOTCH_HZ, ConditionSettings, check_frequency
from readchan.frontend.head import FrontEndDecisions
from readchan.io.capture import Capture, NonPhysicalSampleWarning, check_rate_range, describe_outliers, display_path, repair_outliers
from readchan.results import ChannelResult, Read

__all__ = ["ChannelResult", "DecodeSettings", "FrontEndDecisions", "Notch", "Read", "SignalKind", "decode_capture",
           "decode_channel", "front_end_decisions"]


class SignalKind(str, Enum):
    """How transitions are found: ``auto`` (decided from the samples), ``head`` (pulse peaks of
    an inductive head's voltage) or ``logic`` (edges of a two-level signal)."""

    auto = "auto"
    head = "head"
    logic = "logic"


class Notch(str, Enum):
    """Mains hum handling besides a fixed frequency: ``auto`` (fit the hum on the quiet
    stretches and subtract it, :func:`readchan.frontend.condition.fit_hum`) or ``off``."""

    auto = "auto"
    off = "off"


KINDS = tuple(k.value for k in SignalKind)


@dataclass(frozen=True)
class DecodeSettings:
    """How to decode.

    Parameters
    ----------
    format : a registered format's name (:mod:`readchan.formats.registry`: ``iso-alpha``,
        ``iso-bcd``, ``ltc``, ``kcs``, ...), or ``"auto"`` to try every registered format.
    fmt : a card character format to read with (a registered one or a custom
        :class:`readchan.formats.iso7811.charset.CharFormat`); it takes precedence over ``format``.
    kind : :class:`SignalKind` (or its value).
    track : ISO track number (1–3) the channel holds, or None to guess from the format.
    condition : conditioning settings (head signals only).
    notch : :class:`Notch` (``auto``: fit mains hum on the quiet stretches and subtract it, see
        :func:`readchan.frontend.condition.fit_hum`; ``off``), or a frequency to notch (Hz).
    threshold : detection threshold as a fraction of the local pulse envelope.
    loop_gain : gain α of the bit-period tracking loop.
    auto_band : band-limit the signal to the pulse rate found by a first detection pass: a
        low-pass (when none is set) and a high-pass above the baseline corner (see
        :func:`readchan.frontend.band.auto_lowpass_hz` and :func:`readchan.frontend.band.auto_highpass_hz`).
    recover : on a failed read, search the least confident bit decisions for the unique
        reading that passes every check (:mod:`readchan.formats.iso7811.recover`).
    field_check : a read that claims an ISO/IEC 7813 layout (track 1 format code B, or track 2)
        and breaks it (:func:`readchan.formats.iso7813.layout_errors`) is not valid; turn off for
        non-financial cards that reuse the layouts.
    quant_step : the converter's step in capture units, when it is known for the whole capture
        (a stretch decoded on its own has too few samples to find it); None: found in the
        samples (:func:`readchan.frontend.detect.quantisation_step`).
    band_hz : the signal band of the whole capture (Hz; 0 for "none found"), when it was found
        once for the capture (:func:`readchan.frontend.condition.signal_band_hz` over its most
        energetic stretch); None: found in the samples decoded.
    hum_hz : the mains frequency of the whole capture (Hz; 0 for "no hum worth taking out"),
        when it was found once for the capture (``notch`` auto: the hum is then fitted at that
        frequency alone); None: searched for in the samples decoded.
    """

    fmt: CharFormat | None = None
    kind: SignalKind = SignalKind.auto
    track: int | None = None
    condition: ConditionSettings = field(default_factory=ConditionSettings)
    notch: Notch | float = Notch.auto
    threshold: float = 0.4
    loop_gain: float = 0.25
    auto_band: bool = True
    recover: bool = True
    field_check: bool = True
    format: str = "auto"
    quant_step: float | None = None
    band_hz: float | None = None
    hum_hz: float | None = None

    def __post_init__(self) -> None:
        if self.kind not in KINDS:
            raise ParameterError(f"kind must be one of {', '.join(KINDS)}, was {self.kind!r}")
        object.__setattr__(self, "kind", SignalKind(self.kind))
        if not isinstance(self.format, str) or (self.format != "auto" and self.fmt is None):
            from readchan.formats.registry import get

            get(self.format)          # a registered name, or a ParameterError listing them
        if self.track is not None and self.track not in TRACKS:
            raise ParameterError(f"track must be 1, 2 or 3, was {self.track!r}")
        if not 0.05 <= self.threshold <= 0.95:
            raise ParameterError(f"threshold must be between 0.05 and 0.95, was {self.threshold!r}")
        if not 0.0 < self.loop_gain <= 1.0:
            raise ParameterError(f"loop gain must be in (0, 1], was {self.loop_gain!r}")
        if self.quant_step is not None and not (isinstance(self.quant_step, (int, float)) and
                                                np.isfinite(self.quant_step) and self.quant_step >= 0):
            raise ParameterError(f"quant_step must be a finite step of at least 0, was {self.quant_step!r}")
        if self.band_hz is not None and not (isinstance(self.band_hz, (int, float)) and
                                             np.isfinite(self.band_hz) and self.band_hz >= 0):
            raise ParameterError(f"band_hz must be a finite frequency of at least 0 Hz, was {self.band_hz!r}")
        if self.hum_hz is not None and not (isinstance(self.hum_hz, (int, float)) and
                                            (self.hum_hz == 0 or 40.0 <= self.hum_hz <= 70.0)):
            raise ParameterError(f"hum_hz must be 0 or a mains frequency of 40–70 Hz, was {self.hum_hz!r}")
        if isinstance(self.notch, str) and self.notch.strip().lower() in ("auto", "off"):
            object.__setattr__(self, "notch", Notch(self.notch.strip().lower()))
        else:
            try:
                check_frequency("notch", self.notch, MIN_NOTCH_HZ)
            except ParameterError:
                raise ParameterError(f"notch must be auto, off or a mains frequency of at least {MIN_NOTCH_HZ:g} Hz "
                                     f"and below the capture's Nyquist frequency, was {self.notch!r}") from None
            object.__setattr__(self, "notch", float(self.notch))


def decode_channel(x: np.ndarray, rate_hz: float, settings: DecodeSettings = DecodeSettings(), *,
                   channel: int = 0, n_channels: int = 1, source: str = "",
                   decisions: FrontEndDecisions | None = None) -> ChannelResult:
    """Decode one channel's samples ``x`` at ``rate_hz`` (Hz).

    Non-physical samples (:func:`readchan.io.capture.repair_outliers`) are replaced by
    interpolation first, with one :class:`~readchan.io.capture.NonPhysicalSampleWarning` naming
    their count and position; the result's ``outliers`` holds their indices.  Then each family
    of the formats to try (:func:`readchan.formats.registry.candidates`) decodes the channel in
    turn; the first result its family claims is the channel's, else the first family's.

    ``decisions``: the capture's front-end decisions (:func:`front_end_decisions`), which the card
    family's head front end takes instead of deciding them from ``x`` (a stretch of a long
    capture; the tape families decide their own)."""
    from readchan.formats.registry import candidates, families

    check_rate_range(rate_hz)
    x, outliers = repair_outliers(x)
    if outliers.size:
        where = f"{display_path(source)}: " if source else ""
        warnings.warn(f"{where}channel {channel}: {describe_outliers(outliers, rate_hz)}",
                      NonPhysicalSampleWarning, stacklevel=2)
    first = None
    groups = families(candidates(settings.format, settings.fmt))
    for family, formats in groups:
        extra = {"decisions": decisions} if decisions is not None and family == "card" else {}
        result = formats[0].decode(x, rate_hz, settings, formats, kind=settings.kind.value, channel=channel,
                                   n_channels=n_channels, source=source, **extra)
        if len(groups) == 1 or formats[0].claims(result):
            first = result
            break
        first = first or result
        if first.front_end is not None and first.front_end.silent:
            break                   # white noise or constant: no other family reads it either
    return replace(first, outliers=outliers)


def front_end_decisions(x: np.ndarray, rate_hz: float, settings: DecodeSettings = DecodeSettings(), *,
                        channel: int = 0) -> FrontEndDecisions:
    """The head front end's decisions (:class:`readchan.frontend.head.FrontEndDecisions`: noise
    floor, hum frequency, band corners, converter step) from one channel's samples ``x`` at
    ``rate_hz`` (Hz), to decode the stretches of the same capture with (:func:`decode_channel`'s
    ``decisions``).  ``x`` is repaired first, as :func:`decode_channel` does."""
    from readchan.frontend.head import front_end_decisions as decide

    check_rate_range(rate_hz)
    return decide(repair_outliers(x)[0], rate_hz, settings, channel)


def decode_capture(cap: Capture, settings: DecodeSettings = DecodeSettings(),
                   channels: list[int] | None = None) -> list[ChannelResult]:
    """Decode the chosen ``channels`` (default: all) of a capture."""
    chans = range(cap.n_channels) if channels is None else channels
    # each channel copied out contiguous once: a column of a wide capture is strided in memory
    return [decode_channel(np.ascontiguousarray(cap.channel(c)), cap.rate_hz, settings, channel=c,
                           n_channels=cap.n_channels, source=cap.source) for c in chans]
