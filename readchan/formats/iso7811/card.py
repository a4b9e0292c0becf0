"""The ISO/IEC 7811 card format's rules over the read channel: from F2F transitions to card reads.

Input: one channel's transitions (:class:`readchan.frontend.detect.Transitions`) cut into
segments (:class:`readchan.frontend.segment.Segment`), and the card settings.
Output: :class:`readchan.results.Read` s whose payload is a :class:`CardRead` (characters with
parity and LRC, the correction and recovery applied, the track and its density, the ISO/IEC 7813
fields), and, through :func:`decode_card_channel`, the channel's
:class:`readchan.results.ChannelResult`.

Rules that belong to the card code and live here, not in the channel: the clocking zeros before
the start sentinel (:data:`MIN_CLOCKING_ZEROS`), the correction check and the parity-and-LRC
recovery (:mod:`.recover`), the acceptance by physical evidence (:mod:`.evidence`), the track
and density guess (:mod:`.density`) and the field check (:mod:`readchan.formats.iso7813`).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Callable, Protocol

import numpy as np

from readchan.formats.iso7811.charset import ISO_ALPHA, ISO_BCD, KNOWN_FORMATS, TRACKS, CharFormat, TrackSpec
from readchan.formats.iso7811.density import TrackEvidence, clocking_pw50_cell, decide_track, leading_zeros
from readchan.formats.iso7811.evidence import MAX_DAMAGED_CHARS, damage_evidence, damaged_characters
from readchan.formats.iso7811.framing import Frame, frame, frame_auto
from readchan.formats.iso7811.recover import Recovery, confirm_correction, recover
from readchan.formats.iso7813 import CardFields, layout_errors, parse_fields
from readchan.formats.registry import Format, register
from readchan.frontend.condition import ConditionSettings, check_condition_settings, condition
from readchan.frontend.detect import Transitions, classify_kind, clipped_fraction, detect_logic
from readchan.frontend.head import (CLIPPED_FRACTION, FrontEndDecisions, FrontEndRecord, conditioning_settings,
                                    head_front_end, only_white_noise)
from readchan.frontend.segment import Segment, segment
from readchan.linecode.f2f import BitStream, recover_bits
from readchan.results import ChannelResult, Read
from readchan.units import speed_from_period_cm_s


class CardSettings(Protocol):
    """What the card rules read from the decode settings."""

    fmt: CharFormat | None
    track: int | None
    condition: ConditionSettings
    loop_gain: float
    recover: bool
    field_check: bool


@dataclass(frozen=True)
class CardRead:
    """A card read's payload: what only the ISO card format knows.

    Attributes
    ----------
    frame : the framed characters and their checks.
    fields : parsed ISO/IEC 7813 fields, or None.
    track : the assumed track (density) used for speeds.
    mean_speed_cm_s : mean swipe speed from the bit period and the track density, cm/s.
    recovery : the parity-guided recovery search, when the read first failed its checks.
    track_evidence : why ``track`` was assumed (:mod:`readchan.formats.iso7811.density`).
    rejected : why a read whose checks pass is not valid, or None: ``"suspect"`` (physical
        damage in more than one character, :mod:`readchan.formats.iso7811.evidence`) or
        ``"fields"`` (it claims an ISO/IEC 7813 layout and breaks it).
    damaged_chars : characters of the frame (index into its text; ``len(text)`` is the LRC
        character) holding physical evidence of damage, with the kinds of evidence.
    field_errors : how the read breaks the layout it claims (empty when it does not).
    """

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
    def direction(self) -> str:
        return self.frame.direction


def _with(r: Read, **changes) -> Read:
    """``r`` with its card payload changed."""
    return replace(r, payload=replace(r.payload, **changes))


MIN_CLOCKING_ZEROS = 6
"""Zeros a read needs just before its start sentinel: every ISO track leads with clocking
zeros (ISO/IEC 7811-2), while a sentinel pattern found in noise almost never follows six."""


MIN_REGULARITY = 0.75
"""Smallest :attr:`BitStream.regularity` of a stretch of transitions taken for a recording."""


def suspect_bits(tr: Transitions, bs: BitStream) -> np.ndarray:
    """Bits holding a transition the detector had to guess at (any ``TR_*`` of
    :mod:`readchan.frontend.detect`), and the bit before each (the guess moves a cell boundary)."""
    flagged = tr.flags.nonzero()[0]
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


def check_fields(reads: tuple[Read, ...]) -> tuple[Read, ...]:
    """Each read whose checks pass, with how it breaks the ISO/IEC 7813 layout it claims on its
    (decided) track (:func:`readchan.formats.iso7813.layout_errors`); such a read is not valid
    (``rejected="fields"``) unless it is already ``"suspect"``."""
    out = []
    for r in reads:
        errors = layout_errors(r.frame.text, r.frame.format, r.track.number if r.track else None) \
            if r.frame.valid else ()
        if errors:
            r = _with(r, field_errors=errors, rejected=r.rejected or "fields")
        out.append(r)
    return tuple(out)


def wide_settings(settings: "CardSettings") -> ConditionSettings:
    """The conditioning of the signal the PW50 is measured on: the baseline high-pass alone."""
    return ConditionSettings(highpass_hz=settings.condition.highpass_hz or None)


def assign_tracks(reads: tuple[Read, ...], x: np.ndarray, rate_hz: float, settings: "CardSettings", *,
                  kind: str = "head", channel: int = 0, n_channels: int = 1,
                  wide: np.ndarray | None = None) -> tuple[Read, ...]:
    """Each read with its track decided from the evidence (:func:`readchan.formats.iso7811.density.decide_track`):
    the clocking zeros' PW50 over the bit cell (head captures, on the signal with only the
    baseline removed, so that no low-pass widens the pulses; measured on every head read, for
    the sampling check too) and the leading zeros; the speed and the fields follow the track.
    ``wide``: that signal, when the caller has it (``x`` through :func:`wide_settings`)."""
    out = []
    for r in reads:
        fr, bs = r.frame, r.bits
        zeros = leading_zeros(bs.bits, int(fr.bit_index[0, 0]), fr.direction)
        pw = None
        if kind == "head":
            if wide is None:
                wide = condition(x, rate_hz, wide_settings(settings), channel=channel).signal
            tr = r.transitions
            bit_of = np.clip(np.searchsorted(bs.first_transition, np.arange(len(tr)), side="right") - 1,
                             0, max(len(bs) - 1, 0))
            if len(bs):
                pw = clocking_pw50_cell(wide, rate_hz, tr.index, np.sign(tr.amplitude), bs.ratio,
                                        bs.period_s[bit_of])
        ev = decide_track(fr.format, len(fr.text), channel, n_channels, settings.track, pw50_cell=pw, zeros=zeros)
        track = ev.track
        if track is r.track:
            out.append(_with(r, track_evidence=ev))
            continue
        speed = mean_speed_cm_s(bs, track.density_bpi) if track else None
        fields = parse_fields(fr.text, fr.format) if not (track and track.number == 3) else None
        out.append(_with(r, track=track, mean_speed_cm_s=speed, fields=fields, track_evidence=ev))
    return tuple(out)


def reads_from(tr: Transitions, segs: list[Segment] | tuple[Segment, ...], settings: "CardSettings", *,
               channel: int = 0, n_channels: int = 1, source: str = "",
               period_at: Callable[[np.ndarray], np.ndarray] | None = None,
               skipped: list | None = None, clipped: bool = False,
               formats: tuple[CharFormat, ...] = KNOWN_FORMATS) -> tuple[Read, ...]:
    """Timing recovery, framing, checks, recovery, acceptance and fields for each segment of ``tr``.

    ``period_at`` (a function of time giving the bit period in seconds) replaces the timing
    loop's estimate: the reference decoder of the accuracy benchmark.  ``skipped``, when a
    list, receives a :class:`readchan.measure.status.Skipped` for each segment that gave no read.
    ``clipped``: the capture was clipped, which raises the floors of the timing evidence
    (:data:`readchan.formats.iso7811.evidence.CLIPPED_FLOORS`).  ``formats``: the character
    formats tried, in order, when ``settings.fmt`` is None.

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
        fr = frame(bs.bits, settings.fmt) if settings.fmt is not None else frame_auto(bs.bits, formats)
        if fr is None:
            skip("no-sentinel", seg, bs)
            continue
        if not _clocked(bs.bits, fr, MIN_CLOCKING_ZEROS):
            skip("few-zeros", seg, bs, zeros=leading_zeros(bs.bits, int(fr.bit_index[0, 0]), fr.direction))
            continue
        fmt = settings.fmt or next(f for f in formats if f.name == fr.format)
        card = _checked(fr, fmt, sub, bs, settings, channel=channel, n_channels=n_channels, clipped=clipped)
        reads.append(Read(source, channel, card.frame.format, card, seg, sub, bs))
    return tuple(reads)


def _checked(fr: Frame, fmt: CharFormat, sub: Transitions, bs: BitStream, settings: "CardSettings", *,
             channel: int, n_channels: int, clipped: bool) -> CardRead:
    """A framed segment's card payload: the correction confirmed or the recovery searched, the
    track guessed, the fields parsed and the physical evidence judged (:func:`reads_from`)."""
    recovery = None
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
    return CardRead(fr, fields, track, speed, recovery, rejected=rejected, damaged_chars=damaged)


def decode_card_channel(x: np.ndarray, rate_hz: float, settings: "CardSettings", *, kind: str, channel: int = 0,
                        n_channels: int = 1, source: str = "",
                        formats: tuple[CharFormat, ...] = KNOWN_FORMATS,
                        decisions: FrontEndDecisions | None = None) -> ChannelResult:
    """The card channel over one channel's (repaired) samples ``x`` at ``rate_hz`` (Hz): the
    front end for the signal ``kind`` (``head`` or ``logic``), segmentation, then the card rules
    (:func:`reads_from`, :func:`assign_tracks`, :func:`check_fields`) with the character
    ``formats`` tried when ``settings.fmt`` is None, and the channel's status.  ``decisions``:
    the capture's front-end decisions for a head signal
    (:class:`readchan.frontend.head.FrontEndDecisions`), taken instead of deciding from ``x``."""
    from readchan.measure.status import channel_status

    cond = first = wide = None
    record = FrontEndRecord(kind)
    clip = clipped_fraction(x) if kind == "head" and x.size else 0.0
    if kind == "logic":
        tr = detect_logic(x, rate_hz)
    elif only_white_noise(x, rate_hz):
        # nothing above the noise: conditioned (which checks the settings against the rate),
        # but no detection, which would only time thousands of noise peaks
        check_condition_settings(settings.condition, rate_hz)
        tr = Transitions.empty("head", rate_hz, float(np.std(x)))
        record = FrontEndRecord(kind, silent=True)
    else:
        # the PW50's wide-band signal is the front end's first conditioning when no low-pass or
        # notch is set (the default): made once, for both (the same values)
        if conditioning_settings(settings) == wide_settings(settings):
            first = condition(x, rate_hz, wide_settings(settings), channel=channel)
            wide = first.signal
        cond, tr, record = head_front_end(x, rate_hz, settings, channel, conditioned=first, clip=clip,
                                          decisions=decisions)
    segs = segment(tr)
    skipped: list = []
    clipped = kind == "head" and clip > CLIPPED_FRACTION
    reads = reads_from(tr, segs, settings, channel=channel, n_channels=n_channels, source=source, skipped=skipped,
                       clipped=clipped, formats=formats)
    reads = assign_tracks(reads, x, rate_hz, settings, kind=kind, channel=channel, n_channels=n_channels, wide=wide)
    if settings.field_check:
        reads = check_fields(reads)
    status = channel_status(x, rate_hz, channel, tr, segs, reads, skipped, settings.fmt, clip=clip)
    return ChannelResult(channel, kind, cond, tr, tuple(segs), reads, record.hum_hz, status, family="card",
                         front_end=record)


# -- the card family in the format registry ----------------------------------------------------

CARD_RENDER = "readchan.report.render:card_read_json"
"""The card read's JSON renderer (``module:function``, imported when rendering)."""

CARD_FRONT_END = "pulse peaks of a head signal, or the edges of a logic-level signal"


def decode_card_family(x: np.ndarray, rate_hz: float, settings: "CardSettings", formats: tuple, *, kind: str,
                       channel: int = 0, n_channels: int = 1, source: str = "",
                       decisions: FrontEndDecisions | None = None) -> ChannelResult:
    """The registry's channel decoder for card formats: :func:`decode_card_channel` with the
    signal kind decided (:func:`readchan.frontend.detect.classify_kind` for ``auto``) and the
    registered card ``formats``' character formats tried in order."""
    resolved = classify_kind(x) if kind == "auto" else kind
    return decode_card_channel(x, rate_hz, settings, kind=resolved, channel=channel, n_channels=n_channels,
                               source=source, formats=tuple(f.char_format for f in formats), decisions=decisions)


def card_claims(result: ChannelResult) -> bool:
    """A card channel holds card data when one of its reads is valid: parity, LRC, the clocking
    zeros, the physical evidence and the field layout all agree."""
    return any(r.valid for r in result.reads)


def card_format(char_format: CharFormat, *, summary: str, auto: bool = True) -> Format:
    """The registry entry of a card character format (F2F line code, ISO/IEC 7811 framing)."""
    return Format(char_format.name, "card", "f2f", CARD_FRONT_END, summary, decode_card_family, card_claims,
                  CARD_RENDER, char_format=char_format, auto=auto)


register(card_format(ISO_ALPHA, summary="ISO/IEC 7811 alphanumeric track (track 1): 6 data bits + odd parity, "
                                        "sentinels % and ?, LRC; ISO/IEC 7813 fields"))
register(card_format(ISO_BCD, summary="ISO/IEC 7811 numeric track (tracks 2 and 3): 4 data bits + odd parity, "
                                      "sentinels ; and ?, LRC; ISO/IEC 7813 fields on track 2"))
