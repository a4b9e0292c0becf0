"""The read channel end to end: capture → condition → transitions → reads → bits → frames → fields.

Each stage is its own module; this one only wires them together and keeps what every stage
produced, so that reports and diagnostics can point back into the capture.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field, replace
from typing import Callable

import numpy as np

from readchan.io.capture import (Capture, NonPhysicalSampleWarning, check_rate_range, describe_outliers, display_path,
                              repair_outliers)
from readchan.frontend.condition import (MIN_NOTCH_HZ, ConditionSettings, Conditioned, check_condition_settings, check_frequency,
                                condition, fit_hum, refine, signal_band_hz)
from readchan.frontend.detect import (Transitions, auto_highpass_hz, auto_lowpass_hz, classify_kind, clipped_fraction,
                             detect_head, detect_logic, pulse_width_s, quantisation_step)
from readchan.formats.iso7811.density import TrackEvidence, clocking_pw50_cell, decide_track, leading_zeros
from readchan.errors import ParameterError
from readchan.formats.iso7811.evidence import MAX_DAMAGED_CHARS, damage_evidence, damaged_characters
from readchan.formats.iso7813 import CardFields, layout_errors, parse_fields
from readchan.formats.iso7811.charset import KNOWN_FORMATS, TRACKS, CharFormat, TrackSpec
from readchan.formats.iso7811.framing import Frame, frame, frame_auto
from readchan.formats.iso7811.recover import Recovery, confirm_correction, recover
from readchan.frontend.segment import Segment, segment
from readchan.linecode.f2f import BitStream, recover_bits
from readchan.units import speed_from_period_cm_s

KINDS = ("auto", "head", "logic")


@dataclass(frozen=True)
class DecodeSettings:
    """How to decode.

    Parameters
    ----------
    fmt : character format, or None to try the known formats (``--format auto``).
    kind : ``"auto"``, ``"head"`` (pulse peaks) or ``"logic"`` (two-level edges).
    track : ISO track number (1–3) the channel holds, or None to guess from the format.
    condition : conditioning settings (head signals only).
    notch : ``"auto"`` (fit mains hum on the quiet stretches and subtract it, see
        :func:`readchan.frontend.condition.fit_hum`), ``"off"``, or a frequency to notch (Hz).
    threshold : detection threshold as a fraction of the local pulse envelope.
    loop_gain : gain α of the bit-period tracking loop.
    auto_band : band-limit the signal to the pulse rate found by a first detection pass: a
        low-pass (when none is set) and a high-pass above the baseline corner (see
        :func:`readchan.frontend.detect.auto_lowpass_hz` and :func:`readchan.frontend.detect.auto_highpass_hz`).
    recover : on a failed read, search the least confident bit decisions for the unique
        reading that passes every check (:mod:`readchan.formats.iso7811.recover`).
    field_check : a read that claims an ISO/IEC 7813 layout (track 1 format code B, or track 2)
        and breaks it (:func:`readchan.formats.iso7813.layout_errors`) is not valid; turn off for
        non-financial cards that reuse the layouts.
    """

    fmt: CharFormat | None = None
    kind: str = "auto"
    track: int | None = None
    condition: ConditionSettings = field(default_factory=ConditionSettings)
    notch: str | float = "auto"
    threshold: float = 0.4
    loop_gain: float = 0.25
    auto_band: bool = True
    recover: bool = True
    field_check: bool = True

    def __post_init__(self) -> None:
        if self.kind not in KINDS:
            raise ParameterError(f"kind must be one of {', '.join(KINDS)}, was {self.kind!r}")
        if self.track is not None and self.track not in TRACKS:
            raise ParameterError(f"track must be 1, 2 or 3, was {self.track!r}")
        if not 0.05 <= self.threshold <= 0.95:
            raise ParameterError(f"threshold must be between 0.05 and 0.95, was {self.threshold!r}")
        if not 0.0 < self.loop_gain <= 1.0:
            raise ParameterError(f"loop gain must be in (0, 1], was {self.loop_gain!r}")
        if isinstance(self.notch, str) and self.notch.strip().lower() in ("auto", "off"):
            object.__setattr__(self, "notch", self.notch.strip().lower())
        else:
            try:
                check_frequency("notch", self.notch, MIN_NOTCH_HZ)
            except ParameterError:
                raise ParameterError(f"notch must be auto, off or a mains frequency of at least {MIN_NOTCH_HZ:g} Hz "
                                     f"and below the capture's Nyquist frequency, was {self.notch!r}") from None
            object.__setattr__(self, "notch", float(self.notch))


@dataclass(frozen=True)
class ChannelResult:
    """Everything decoded from one channel: its stages' outputs and its reads."""

    channel: int
    kind: str
    conditioned: Conditioned | None
    transitions: Transitions
    segments: tuple[Segment, ...]
    reads: tuple["Read", ...]
    hum_hz: float | None
    status: "ChannelStatus | None" = None
    """What the channel holds, and why it gave no read (:mod:`readchan.measure.status`)."""
    outliers: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    """Indices of the non-physical samples replaced before decoding (see :func:`decode_channel`)."""


@dataclass(frozen=True)
class Read:
    """One framed read (a swipe of one track).

    Attributes
    ----------
    source : the capture's path.
    channel : channel index, from 0.
    segment : the read's span in the channel's transitions.
    transitions : the read's transitions.
    bits : the recovered bit stream.
    frame : the framed characters and their checks.
    fields : parsed ISO/IEC 7813 fields, or None.
    track : the assumed track (density) used for speeds.
    mean_speed_cm_s : mean swipe speed from the bit period and the track density.
    recovery : the parity-guided recovery search, when the read first failed its checks.
    track_evidence : why ``track`` was assumed (:mod:`readchan.formats.iso7811.density`).
    rejected : why a read whose checks pass is not valid, or None: ``"suspect"`` (physical
        damage in more than one character, :mod:`readchan.formats.iso7811.evidence`) or ``"fields"`` (it
        claims an ISO/IEC 7813 layout and breaks it).
    damaged_chars : characters of the frame (index into its text; ``len(text)`` is the LRC
        character) holding physical evidence of damage, with the kinds of evidence.
    field_errors : how the read breaks the layout it claims (empty when it does not).
    """

    source: str
    channel: int
    segment: Segment
    transitions: Transitions
    bits: BitStream
    frame: Frame
    fields: CardFields | None
    track: TrackSpec | None
    mean_speed_cm_s: float | None
    recovery: Recovery | None = None
    track_evidence: TrackEvidence | None = None
    rejected: str | None = None
    damaged_chars: tuple[tuple[int, tuple[str, ...]], ...] = ()
    field_errors: tuple[str, ...] = ()

    @property
    def checks_ok(self) -> bool:
        """Parity and LRC pass (after any correction)."""
        return bool(self.frame.valid)

    @property
    def valid(self) -> bool:
        """The checks pass and nothing speaks against them (see ``rejected``)."""
        return bool(self.frame.valid) and self.rejected is None

    @property
    def start_s(self) -> float:
        return self.segment.start_s

    @property
    def end_s(self) -> float:
        return self.segment.end_s


MIN_CLOCKING_ZEROS = 6
"""Zeros a read needs just before its start sentinel: every ISO track leads with clocking
zeros (ISO/IEC 7811-2), while a sentinel pattern found in noise almost never follows six."""


LOWPASS_PER_WIDTH = 0.5
"""The auto low-pass corner is at least this over the pulses' measured half-amplitude width."""

CLIPPED_FRACTION = 0.005
"""Above this fraction of samples at the extremes a capture counts as clipped, and pulses are
timed by the middle of their crests rather than by their (flattened) peaks."""

MIN_REGULARITY = 0.75
"""Smallest :attr:`BitStream.regularity` of a stretch of transitions taken for a recording."""


def suspect_bits(tr: Transitions, bs: BitStream) -> np.ndarray:
    """Bits holding a transition the detector had to guess at (any ``FLAG_*`` of
    :mod:`readchan.frontend.detect`), and the bit before each (the guess moves a cell boundary)."""
    flagged = np.flatnonzero(tr.flags)
    if flagged.size == 0 or len(bs) == 0:
        return np.zeros(0, np.int64)
    k = np.searchsorted(bs.first_transition, flagged, side="right") - 1
    return np.unique(np.concatenate((k, k - 1)).clip(0, len(bs) - 1))


def _clocked(bits: np.ndarray, fr: Frame, n: int) -> bool:
    """True when the ``n`` bits before the start sentinel, in reading order, are all zero."""
    i0 = int(fr.bit_index[0, 0])
    before = bits[max(i0 - n, 0):i0] if fr.direction == "forward" else bits[i0 + 1:i0 + 1 + n]
    return before.size == n and not before.any()


def guess_track(fmt_name: str, n_chars: int, channel: int, n_channels: int,
                explicit: int | None = None) -> TrackSpec | None:
    """The ISO track a read most likely came from, for its density (common practice):
    the explicit choice; else channel i of a three-channel capture is track i + 1; else
    alphanumeric → track 1, BCD → track 2 unless longer than track 2 allows (then track 3)."""
    if explicit is not None:
        return TRACKS[explicit]
    if n_channels == 3 and TRACKS[channel + 1].fmt.name == fmt_name:
        return TRACKS[channel + 1]
    if fmt_name == TRACKS[1].fmt.name:
        return TRACKS[1]
    if fmt_name == TRACKS[2].fmt.name:
        return TRACKS[2] if n_chars + 1 <= TRACKS[2].max_chars else TRACKS[3]
    return None


def mean_speed_cm_s(bits: BitStream, density_bpi: float) -> float:
    """Mean speed in cm/s: density ρ (bit/inch) and bit period T give v = 2.54/(ρ·T) cm/s."""
    return float(np.mean(speed_from_period_cm_s(bits.period_s, density_bpi)))


def quiet_mask(n: int, rate_hz: float, segments: list[Segment], *, guard_s: float = 0.01) -> np.ndarray:
    """True for samples farther than ``guard_s`` from every segment (where no pulses are)."""
    quiet = np.ones(n, bool)
    for sg in segments:
        a = max(0, int((sg.start_s - guard_s) * rate_hz))
        b = min(n, int((sg.end_s + guard_s) * rate_hz) + 1)
        quiet[a:b] = False
    return quiet


def between_pulses_mask(n: int, rate_hz: float, tr: Transitions, *, guard: float = 0.3) -> np.ndarray:
    """True for samples farther than ``guard`` × the median interval from every transition:
    the baseline between pulses, where hum can be fitted when a capture has no quiet stretch."""
    if len(tr) < 2:
        return np.ones(n, bool)
    w = int(guard * float(np.median(np.diff(tr.times_s))) * rate_hz) + 1
    edges = np.zeros(n + 1, np.int64)
    np.add.at(edges, np.clip(tr.index - w, 0, n), 1)
    np.add.at(edges, np.clip(tr.index + w + 1, 0, n), -1)
    return np.cumsum(edges[:-1]) == 0


def _detect_head_channel(x: np.ndarray, rate_hz: float, settings: DecodeSettings, channel: int):
    """Head-signal front end: condition and detect; then refine with the hum fitted on the quiet
    stretches (or a fixed notch) taken out and a low-pass matched to the pulse rate, and detect
    again on the refined signal."""
    cs = settings.condition
    hum = None
    if settings.notch not in ("auto", "off"):
        hum = float(settings.notch)
        cs = ConditionSettings(cs.highpass_hz, cs.lowpass_hz, (hum,), cs.notch_q)
    cond = condition(x, rate_hz, cs, channel=channel)
    band = signal_band_hz(cond.signal, rate_hz) if settings.auto_band and cs.lowpass_hz is None else None
    first = refine(cond, lowpass_hz=1.5 * band) if band is not None else cond
    q = quantisation_step(x)
    tr = detect_head(first.signal, rate_hz, threshold=settings.threshold, quant_step=q)
    refined = False
    if settings.notch == "auto":
        quiet = quiet_mask(x.size, rate_hz, segment(tr))
        level = 0.02
        if np.count_nonzero(quiet) < 3 * rate_hz / 50.0:
            # No quiet stretch: fit between pulses, mid-gap only.  Pulse tails leak the data's
            # own pattern in there (a run of BCD zeros repeats at bit rate / 5, which can sit
            # near 50 or 60 Hz), so only hum strong enough to matter (10 % of the peak) counts.
            quiet = between_pulses_mask(x.size, rate_hz, tr, guard=0.4)
            level = 0.1
        fit = fit_hum(cond.signal, rate_hz, quiet, min_level=level)
        if fit is not None:
            hum = fit.freq_hz
            cond = Conditioned(cond.signal - fit.waveform(x.size, rate_hz), rate_hz, cond.dc_offset, channel)
            refined = True
    f_lp = f_hp = None
    if settings.auto_band:
        f_lp = auto_lowpass_hz(tr, rate_hz) if cs.lowpass_hz is None else None
        if f_lp is None and band is not None:
            f_lp = 1.5 * band
        width = pulse_width_s(first.signal, tr) if f_lp is not None else None
        if width is not None:
            # never narrower than the pulses themselves: narrow pulses on a long cell (track 2
            # at a slow swipe) reach well above 1 / half cell, and a corner below them rings
            f_lp = max(f_lp, LOWPASS_PER_WIDTH / width)
        if f_lp is not None and f_lp >= 0.4 * rate_hz:
            f_lp = None             # pulses as narrow as the sampling: nothing to take away
        f_hp = auto_highpass_hz(tr)
        if f_hp is not None and (f_hp <= (cs.highpass_hz or 0.0) or f_hp >= 0.25 * rate_hz):
            f_hp = None
        if f_lp is not None or f_hp is not None:
            cond = refine(cond, lowpass_hz=f_lp, highpass_hz=f_hp)
            refined = True
    clipped = clipped_fraction(x) > CLIPPED_FRACTION
    if refined or clipped:
        tr = detect_head(cond.signal, rate_hz, threshold=settings.threshold, quant_step=q,
                         timing="midpoint" if clipped else "peak")
    return cond, tr, hum


NOISE_BLOCK = 256
"""Samples per block of the stationarity test of :func:`only_white_noise`."""


def only_white_noise(x: np.ndarray, rate_hz: float) -> bool:
    """True when a channel is stationary white Gaussian noise (or constant), so holds nothing
    above its noise.  Three tests, each at about five standard deviations of what Gaussian
    white noise itself scatters by (sampling statistics; common practice):

    * stationary: no block of :data:`NOISE_BLOCK` samples has an RMS above the median block's
      by more than (√(2 ln N) + 3)·s, with N blocks and s = 1/√(2·256) ≈ 4.4 % the scatter of
      one block's RMS (√(2 ln N)·s is the expected largest excursion);
    * Gaussian: the kurtosis within 2.5–3.6 (3; it scatters by √(24/n) over n samples);
    * white: the Welch spectrum (K Hann-windowed 256-sample segments, K ≤ 4096) within
      1 ± 5/√K of its median at every frequency but DC (each bin scatters by 1/√K).

    A swipe raises the RMS where it is (by 1.5× for a track 2 swipe at 8 dB SNR, where decoding
    already fails; README, *Benchmarks*), a capture that is all swipe has a band edge and a
    peaky or flat-topped distribution, and hum is a spectral line; failing any test only means
    the channel is decoded in full.  Channels under 12,800 samples (50 segments) are never
    called noise."""
    n = x.size
    nb = n // NOISE_BLOCK
    if nb < 50:
        return False
    y = x - float(np.median(x[:: max(1, n // 100_000)]))
    if not np.any(y):
        return True                       # constant: an idle channel
    r = np.sqrt(np.mean(y[: nb * NOISE_BLOCK].reshape(nb, NOISE_BLOCK) ** 2, axis=1))
    med = float(np.median(r))
    spread = (math.sqrt(2.0 * math.log(nb)) + 3.0) / math.sqrt(2.0 * NOISE_BLOCK)
    if not med > 0 or float(r.max()) > (1.0 + spread) * med:
        return False
    m2 = float(np.mean(y * y))
    kurtosis = float(np.mean(y ** 4)) / (m2 * m2)
    if not 2.5 <= kurtosis <= 3.6:
        return False
    seg = 256                             # Welch: Hann-windowed segments, no overlap, one FFT call
    k = min(n // seg, 4096)
    starts = np.linspace(0, n - seg, k).astype(np.int64)
    frames = y[starts[:, None] + np.arange(seg)] * np.hanning(seg)
    p = np.mean(np.abs(np.fft.rfft(frames, axis=1)) ** 2, axis=0)[1:-1]
    ref = float(np.median(p))
    tol = 5.0 / math.sqrt(k)
    return bool(ref > 0 and p.min() > (1.0 - tol) * ref and p.max() < (1.0 + tol) * ref)


def decode_channel(x: np.ndarray, rate_hz: float, settings: DecodeSettings = DecodeSettings(), *,
                   channel: int = 0, n_channels: int = 1, source: str = "") -> ChannelResult:
    """Decode one channel's samples ``x`` at ``rate_hz``.

    Non-physical samples (:func:`readchan.io.capture.repair_outliers`) are replaced by
    interpolation first, with one :class:`~readchan.io.capture.NonPhysicalSampleWarning` naming
    their count and position; the result's ``outliers`` holds their indices."""
    check_rate_range(rate_hz)
    x, outliers = repair_outliers(x)
    if outliers.size:
        where = f"{display_path(source)}: " if source else ""
        warnings.warn(f"{where}channel {channel}: {describe_outliers(outliers, rate_hz)}",
                      NonPhysicalSampleWarning, stacklevel=2)
    kind = classify_kind(x) if settings.kind == "auto" else settings.kind
    cond = None
    hum = None
    if kind == "logic":
        tr = detect_logic(x, rate_hz)
    elif only_white_noise(x, rate_hz):
        # nothing above the noise: conditioned (which checks the settings against the rate),
        # but no detection, which would only time thousands of noise peaks
        check_condition_settings(settings.condition, rate_hz)
        z = np.zeros(0)
        tr = Transitions(z, np.zeros(0, np.int64), z, z, np.zeros(0, np.uint8), float(rate_hz), "head",
                         float(np.std(x)))
    else:
        cond, tr, hum = _detect_head_channel(x, rate_hz, settings, channel)
    segs = segment(tr)
    skipped: list = []
    clipped = kind == "head" and clipped_fraction(x) > CLIPPED_FRACTION
    reads = reads_from(tr, segs, settings, channel=channel, n_channels=n_channels, source=source, skipped=skipped,
                       clipped=clipped)
    reads = assign_tracks(reads, x, rate_hz, settings, kind=kind, channel=channel, n_channels=n_channels)
    if settings.field_check:
        reads = check_fields(reads)
    from readchan.measure.status import channel_status

    status = channel_status(x, rate_hz, channel, tr, segs, reads, skipped, settings.fmt)
    return ChannelResult(channel, kind, cond, tr, tuple(segs), reads, hum, status, outliers)


def check_fields(reads: tuple[Read, ...]) -> tuple[Read, ...]:
    """Each read whose checks pass, with how it breaks the ISO/IEC 7813 layout it claims on its
    (decided) track (:func:`readchan.formats.iso7813.layout_errors`); such a read is not valid
    (``rejected="fields"``) unless it is already ``"suspect"``."""
    out = []
    for r in reads:
        errors = layout_errors(r.frame.text, r.frame.format, r.track.number if r.track else None) \
            if r.frame.valid else ()
        if errors:
            r = replace(r, field_errors=errors, rejected=r.rejected or "fields")
        out.append(r)
    return tuple(out)


def assign_tracks(reads: tuple[Read, ...], x: np.ndarray, rate_hz: float, settings: DecodeSettings, *,
                  kind: str = "head", channel: int = 0, n_channels: int = 1) -> tuple[Read, ...]:
    """Each read with its track decided from the evidence (:func:`readchan.formats.iso7811.density.decide_track`):
    the clocking zeros' PW50 over the bit cell (head captures, on the signal with only the
    baseline removed, so that no low-pass widens the pulses; measured on every head read, for
    the sampling check too) and the leading zeros; the speed and the fields follow the track."""
    wide = None
    out = []
    for r in reads:
        fr, bs = r.frame, r.bits
        zeros = leading_zeros(bs.bits, int(fr.bit_index[0, 0]), fr.direction)
        pw = None
        if kind == "head":
            if wide is None:
                hp = settings.condition.highpass_hz
                wide = condition(x, rate_hz, ConditionSettings(highpass_hz=hp or None), channel=channel).signal
            tr = r.transitions
            bit_of = np.clip(np.searchsorted(bs.first_transition, np.arange(len(tr)), side="right") - 1,
                             0, max(len(bs) - 1, 0))
            if len(bs):
                pw = clocking_pw50_cell(wide, rate_hz, tr.index, np.sign(tr.amplitude), bs.ratio,
                                        bs.period_s[bit_of])
        ev = decide_track(fr.format, len(fr.text), channel, n_channels, settings.track, pw50_cell=pw, zeros=zeros)
        track = ev.track
        if track is r.track:
            out.append(replace(r, track_evidence=ev))
            continue
        speed = mean_speed_cm_s(bs, track.density_bpi) if track else None
        fields = parse_fields(fr.text, fr.format) if not (track and track.number == 3) else None
        out.append(replace(r, track=track, mean_speed_cm_s=speed, fields=fields, track_evidence=ev))
    return tuple(out)


def reads_from(tr: Transitions, segs: list[Segment] | tuple[Segment, ...], settings: DecodeSettings, *,
               channel: int = 0, n_channels: int = 1, source: str = "",
               period_at: Callable[[np.ndarray], np.ndarray] | None = None,
               skipped: list | None = None, clipped: bool = False) -> tuple[Read, ...]:
    """Timing recovery, framing, checks, recovery, acceptance and fields for each segment of ``tr``.

    ``period_at`` (a function of time giving the bit period in seconds) replaces the timing
    loop's estimate: the reference decoder of the accuracy benchmark.  ``skipped``, when a
    list, receives a :class:`readchan.measure.status.Skipped` for each segment that gave no read.
    ``clipped``: the capture was clipped, which raises the floors of the timing evidence
    (:data:`readchan.formats.iso7811.evidence.CLIPPED_FLOORS`).

    Acceptance: a read whose checks pass is still not valid when the physical evidence of
    damage (:func:`readchan.formats.iso7811.evidence.damage_evidence`) touches more than
    :data:`readchan.formats.iso7811.evidence.MAX_DAMAGED_CHARS` character (``rejected="suspect"``); the field
    check (:func:`check_fields`) follows once the track is decided.
    """
    from readchan.measure.status import Skipped

    def skip(stage, seg, bs, **kw):
        if skipped is not None:
            skipped.append(Skipped(stage, seg, len(bs), bs.regularity, **kw))

    reads = []
    for seg in segs:
        bs = recover_bits(tr.times_s[seg.start:seg.stop], loop_gain=settings.loop_gain, period_at=period_at)
        span = bs.regular_span()
        if span is None:
            skip("irregular", seg, bs)
            continue
        # trim the noise detections around the recording, and time the read by what is left
        if span != (0, seg.stop - seg.start):
            bs = bs.between(*span)
        a, b = seg.start + span[0], seg.start + span[1]
        seg = Segment(a, b, float(tr.times_s[a]), float(tr.times_s[b - 1]))
        sub = tr.subset(a, b)
        if bs.regularity < MIN_REGULARITY:
            skip("irregular", seg, bs)
            continue
        fr = frame(bs.bits, settings.fmt) if settings.fmt is not None else frame_auto(bs.bits)
        if fr is None:
            skip("no-sentinel", seg, bs)
            continue
        if not _clocked(bs.bits, fr, MIN_CLOCKING_ZEROS):
            skip("few-zeros", seg, bs, zeros=leading_zeros(bs.bits, int(fr.bit_index[0, 0]), fr.direction))
            continue
        recovery = None
        fmt = settings.fmt or next(f for f in KNOWN_FORMATS if f.name == fr.format)
        # only a corrected or failed read needs to know where the detector guessed
        suspects = suspect_bits(sub, bs) if fr.corrected or not fr.valid else ()
        if fr.corrected:
            fr = confirm_correction(fr, bs.bits, bs.margin, fmt, suspects)
        if not fr.valid and settings.recover:
            recovery = recover(bs.bits, bs.margin, fr, fmt, suspect_bits=suspects)
            if recovery.frame is not None:
                fr = recovery.frame
        track = guess_track(fr.format, len(fr.text), channel, n_channels, settings.track)
        speed = mean_speed_cm_s(bs, track.density_bpi) if track else None
        # track 3 follows ISO 4909, whose fields readchan does not interpret
        fields = parse_fields(fr.text, fr.format) if not (track and track.number == 3) else None
        rejected, damaged = None, ()
        if fr.valid:
            damaged = damaged_characters(fr, damage_evidence(sub, bs, clipped=clipped), fr.corrected)
            if len(damaged) > MAX_DAMAGED_CHARS:
                rejected = "suspect"
        reads.append(Read(source, channel, seg, sub, bs, fr, fields, track, speed, recovery,
                          rejected=rejected, damaged_chars=damaged))
    return tuple(reads)


def decode_capture(cap: Capture, settings: DecodeSettings = DecodeSettings(),
                   channels: list[int] | None = None) -> list[ChannelResult]:
    """Decode the chosen ``channels`` (default: all) of a capture."""
    chans = range(cap.n_channels) if channels is None else channels
    # each channel copied out contiguous once: a column of a wide capture is strided in memory
    return [decode_channel(np.ascontiguousarray(cap.channel(c)), cap.rate_hz, settings, channel=c,
                           n_channels=cap.n_channels, source=cap.source) for c in chans]
