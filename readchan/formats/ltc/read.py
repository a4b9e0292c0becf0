"""Linear timecode read: samples to timecode frames, the frame rate and the discontinuities.

Input: samples of one channel (1-D, or samples × channels with ``channel``) and the rate.
Output: :class:`LtcRead` (frozen), and its JSON dict by :func:`ltc_json`.

Pipeline: biphase-mark bits (:mod:`readchan.linecode.biphase`) → frames at sync words, checked
(:mod:`readchan.formats.ltc.frames`) → words decoded (:mod:`readchan.formats.ltc.word`) → frame rate
inferred → events from the sequence of frames.

Frame rate (a biphase stream at unknown play speed does not reveal it by itself).  Starting
from 24, 25, 29.97 and 30 fps, each piece of evidence keeps the rates it allows, in this order,
and is skipped if it would leave none:

1. the drop-frame flag on most frames: 29.97 (drop frame exists only there, SMPTE ST 12-1);
2. a wrap of the frame number to 00 as the seconds advance: the last number + 1 labels per
   second (24 → 24 fps, 25 → 25 fps, 30 → 29.97 or 30 fps);
3. the largest frame number seen: rates with more labels per second;
4. when the caller says the play speed is nominal, the measured bit rate: rates whose
   80 × fps lies within ``bit_rate_tolerance`` of it (1920, 2000, 2397.6, 2400 bit/s).

When more than one rate remains, ``rate_fps`` is None and the candidates are ordered by how
close their nominal bit rate is to the measured one; per-frame ``speed`` is then relative to
the first candidate.  ``speed`` = 80 nominal bit periods / the frame's duration in the capture
= (1 / rate_fps) / duration_s.

Events between consecutive passing frames of one stretch of signal and one direction, with
``k`` = their distance in bits / 80 and ``expected`` = the first frame's count ± k (+ forward,
− reverse, modulo a day, so a 24-hour rollover is continuous):

* distance not a multiple of 80 bits: ``splice`` (the bit clock broke mid-frame), placed at
  the first cell between the two frames with a timing flag or a margin below ½, else at the
  end of the first frame;
* k > 1: ``damaged`` (k − 1 frames failed a check), placed where the first of them begins;
* label = previous label: ``repeated_frame``; ahead of expected by 1..``MAX_MISSING`` frames:
  ``missing_frames``; any other difference from expected: ``jump`` (a frame-accurate edit);
* between stretches of signal: ``gap``; between frames of opposite direction:
  ``direction_change``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from readchan.errors import CaptureError, ParameterError
from readchan.linecode.biphase import TapeBits, decode_biphase
from readchan.formats.ltc.frames import FORWARD, REVERSE, FrameCandidate, find_frames, labels_of
from readchan.formats.ltc.word import (RATES_FPS, WORD_BITS, Label, decode_word, frames_per_day,
                                    is_valid_label, label_to_count, labels_per_second)

MAX_MISSING = 10
"""Label advances of up to this many extra frames are ``missing_frames``; beyond, a ``jump``."""
FORMAT = "ltc"
DAMAGE = ("gap", "damaged", "splice", "invalid_label")
"""Event kinds that may come from reading the signal with the wrong detector."""


@dataclass(frozen=True, slots=True)
class LtcFrame:
    """One frame that passed every check.

    Attributes
    ----------
    timecode : ``"HH:MM:SS:FF"`` (``;`` before the frames for drop frame).
    label : the label's fields.
    position_s : capture time where the frame's 80 cells begin in capture order, seconds.
    duration_s : the frame's duration in the capture, seconds.
    speed : play speed relative to nominal over the frame (module docstring).
    direction : ``"forward"`` or ``"reverse"``.
    user_bits : 8 hex digits, group 1 first.
    drop_frame, color_frame : the flags.
    bgf : binary group flags (BGF0, BGF1, BGF2), at the positions of the read's rate.
    min_margin : smallest cell decision margin in the frame.
    first_bit : index of its first cell in capture order within the read's bits.
    """

    timecode: str
    label: Label
    position_s: float
    duration_s: float
    speed: float
    direction: str
    user_bits: str
    drop_frame: bool
    color_frame: bool
    bgf: tuple[int, int, int]
    min_margin: float
    first_bit: int


@dataclass(frozen=True, slots=True)
class LtcEvent:
    """A discontinuity or a damaged stretch at capture time ``position_s`` (seconds)."""

    kind: str
    position_s: float
    from_timecode: str | None = None
    to_timecode: str | None = None
    frames: int | None = None
    duration_s: float | None = None


@dataclass(frozen=True)
class LtcRead:
    """The timecode read of one channel (see :func:`ltc_json` for the JSON contract)."""

    channel: int
    direction: str
    valid: bool
    start_s: float
    end_s: float
    frames: tuple[LtcFrame, ...]
    rate_fps: float | None
    rate_fps_candidates: tuple[float, ...]
    events: tuple[LtcEvent, ...]
    bits: TapeBits
    signal_kind: str
    measured_bit_rate_hz: float | None


def infer_rate(cands: list[FrameCandidate], *, nominal_speed: bool = False,
               bit_rate_tolerance: float = 4e-4) -> tuple[float | None, tuple[float, ...], float | None]:
    """(rate_fps or None, candidates, measured bit rate in bit/s) from passing frames."""
    if not cands:
        return None, RATES_FPS, None
    words = np.stack([c.word for c in cands])
    labels = labels_of(words)
    dur = np.asarray([c.duration_s for c in cands])
    bit_rate = WORD_BITS * dur.size / float(dur.sum()) if dur.sum() > 0 else None
    rates = set(RATES_FPS)

    def keep(allowed) -> None:
        nonlocal rates
        new = rates & set(allowed)
        if new:
            rates = new

    if np.mean(words[:, 10]) > 0.5:
        keep({29.97})
    wraps = set()
    for a, b, ca, cb in zip(labels[:-1], labels[1:], cands[:-1], cands[1:]):
        if cb.first_bit - ca.first_bit != WORD_BITS or ca.direction != cb.direction:
            continue
        first, second = (a, b) if ca.direction == FORWARD else (b, a)
        if second.frames == 0 and first.frames > 0 and second.seconds == (first.seconds + 1) % 60:
            wraps.add(first.frames + 1)
    if len(wraps) == 1:
        per_second = wraps.pop()
        keep({r for r in RATES_FPS if labels_per_second(r) == per_second})
    top = max(lab.frames for lab in labels)
    keep({r for r in RATES_FPS if labels_per_second(r) > top})
    if nominal_speed and bit_rate:
        keep({r for r in RATES_FPS if abs(WORD_BITS * r / bit_rate - 1) <= bit_rate_tolerance})
    ordered = tuple(sorted(rates, key=lambda r: abs(math.log(WORD_BITS * r / bit_rate)) if bit_rate else r))
    return (ordered[0] if len(ordered) == 1 else None), ordered, bit_rate


def _frame(c: FrameCandidate, rate_fps: float) -> LtcFrame:
    w = decode_word(c.word, rate_fps)
    return LtcFrame(w.label.text(w.drop_frame), w.label, c.position_s, c.duration_s,
                    (1.0 / rate_fps) / c.duration_s, c.direction, w.user_hex, w.drop_frame,
                    w.color_frame, w.bgf, c.min_margin, c.first_bit)


def _events(frames: list[LtcFrame], tb: TapeBits, per_second: int) -> list[LtcEvent]:
    ev: list[LtcEvent] = []
    for k in range(len(tb.runs_s) - 1):
        ev.append(LtcEvent("gap", float(tb.runs_s[k, 1]),
                           duration_s=float(tb.runs_s[k + 1, 0] - tb.runs_s[k, 1])))
    for a, b in zip(frames[:-1], frames[1:]):
        if tb.run[a.first_bit] != tb.run[b.first_bit]:
            continue
        tcs = dict(from_timecode=a.timecode, to_timecode=b.timecode)
        if a.direction != b.direction:
            ev.append(LtcEvent("direction_change", b.position_s, **tcs))
            continue
        dist = b.first_bit - a.first_bit
        after = a.first_bit + WORD_BITS
        if dist % WORD_BITS:
            # the join: the first timing-flagged cell, else the first doubtful one, between them
            between = slice(after, b.first_bit)
            odd = np.flatnonzero((tb.flags[between] != 0) | (tb.margin[between] < 0.5))
            at = after + int(odd[0]) if odd.size else after
            ev.append(LtcEvent("splice", float(tb.start_s[min(at, tb.bits.size - 1)]), **tcs))
            continue
        k = dist // WORD_BITS
        if k > 1:
            ev.append(LtcEvent("damaged", float(tb.start_s[after]), frames=k - 1, **tcs))
        step = 1 if a.direction == FORWARD else -1
        day = frames_per_day(per_second, a.drop_frame)
        ca = label_to_count(a.label, per_second, a.drop_frame)
        cb = label_to_count(b.label, per_second, b.drop_frame)
        ahead = ((cb - ca) * step - k) % day            # extra frames beyond the expected advance
        if ahead == 0 and a.drop_frame == b.drop_frame:
            continue
        if cb == ca:
            ev.append(LtcEvent("repeated_frame", b.position_s, **tcs))
        elif 1 <= ahead <= MAX_MISSING and k == 1:
            ev.append(LtcEvent("missing_frames", b.position_s, frames=int(ahead), **tcs))
        else:
            ev.append(LtcEvent("jump", b.position_s, **tcs))
    ev.sort(key=lambda e: e.position_s)
    return ev


def read_from_bits(tb: TapeBits, *, channel: int = 0, nominal_speed: bool = False,
                   min_margin: float = 0.1, bit_rate_tolerance: float = 4e-4) -> LtcRead:
    """The :class:`LtcRead` of biphase-mark bits ``tb`` (see the module docstring)."""
    passing = [c for c in find_frames(tb, min_margin=min_margin) if c.passed]
    rate, cands, bit_rate = infer_rate(passing, nominal_speed=nominal_speed,
                                       bit_rate_tolerance=bit_rate_tolerance)
    speed_rate = rate if rate is not None else cands[0]
    per_second = max(labels_per_second(r) for r in cands)
    frames: list[LtcFrame] = []
    bad: list[LtcEvent] = []
    for c in passing:
        f = _frame(c, speed_rate)
        if is_valid_label(f.label, per_second, f.drop_frame):
            frames.append(f)
        else:
            bad.append(LtcEvent("invalid_label", f.position_s, to_timecode=f.timecode))
    events = sorted(_events(frames, tb, per_second) + bad, key=lambda e: e.position_s)
    n_rev = sum(f.direction == REVERSE for f in frames)
    direction = REVERSE if n_rev * 2 > len(frames) else FORWARD
    if frames:
        start_s, end_s = frames[0].position_s, frames[-1].position_s + frames[-1].duration_s
    elif tb.runs_s.size:
        start_s, end_s = float(tb.runs_s[0, 0]), float(tb.runs_s[-1, 1])
    else:
        start_s = end_s = 0.0
    return LtcRead(channel, direction, bool(frames), float(start_s), float(end_s), tuple(frames), rate,
                   cands, tuple(events), tb, tb.kind, bit_rate)


def channel_samples(samples: np.ndarray, channel: int) -> np.ndarray:
    """One channel of ``samples`` as float64, or CaptureError / ParameterError for bad input."""
    x = np.asarray(samples, dtype=float)
    if x.ndim == 2:
        if not 0 <= channel < x.shape[1]:
            raise ParameterError(f"channel must be between 0 and {x.shape[1] - 1}, was {channel!r}")
        x = x[:, channel]
    elif x.ndim != 1:
        raise CaptureError(f"samples must be 1-D or samples × channels, had shape {x.shape}")
    if x.size == 0:
        raise CaptureError("the capture holds no samples")
    if not np.isfinite(x).all():
        raise CaptureError("the capture holds NaN or infinite samples")
    return x


def check_rate(rate_hz: float) -> float:
    """``rate_hz`` as a float, or ParameterError when it is not a finite rate from 1 kHz to 100 MHz."""
    try:
        r = float(rate_hz)
    except (TypeError, ValueError):
        raise ParameterError(f"rate_hz must be a number, was {rate_hz!r}") from None
    if not math.isfinite(r) or not 1_000 <= r <= 100e6:
        raise ParameterError(f"rate_hz must be between 1 kHz and 100 MHz, was {rate_hz!r}")
    return r


def decode_ltc(samples: np.ndarray, rate_hz: float, *, channel: int = 0, kind: str = "auto",
               nominal_speed: bool = False, min_margin: float = 0.1) -> LtcRead:
    """Read linear timecode from ``samples`` (1-D, or samples × channels).

    Parameters
    ----------
    samples : the capture, in any units.
    rate_hz : sample rate in Hz.
    channel : channel index for a 2-D capture.
    kind : ``"auto"``, ``"line"`` (a deck's line output) or ``"head"`` (raw head signal).
    nominal_speed : the capture was played at nominal speed, so the bit rate tells the frame rate.
    min_margin : a frame passes only when every cell's decision margin reaches this.

    Raises
    ------
    CaptureError : empty, wrong shape or non-finite samples.
    ParameterError : bad rate, channel or kind.
    """
    rate = check_rate(rate_hz)
    x = channel_samples(samples, channel)
    if not 0 <= min_margin < 1:
        raise ParameterError(f"min_margin must be in [0, 1), was {min_margin!r}")
    tb = decode_biphase(x, rate, kind=kind)
    read = read_from_bits(tb, channel=channel, nominal_speed=nominal_speed, min_margin=min_margin)
    if kind == "auto" and (not read.frames or any(e.kind in DAMAGE for e in read.events)):
        # the signal-kind guess may be wrong (a band-limited square wave tilts and overshoots
        # like pulses): try the other detector and keep the read with more frames, then fewer events
        other = "head" if tb.kind == "line" else "line"
        alt = read_from_bits(decode_biphase(x, rate, kind=other), channel=channel,
                             nominal_speed=nominal_speed, min_margin=min_margin)
        if (len(alt.frames), -len(alt.events)) > (len(read.frames), -len(read.events)):
            return alt
    return read


def ltc_json(read: LtcRead) -> dict:
    """The JSON dict of a timecode read (the contract in the README):

    common keys ``channel``, ``format`` (``"ltc"``), ``direction``, ``valid``, ``start_s``,
    ``end_s``; ``frames`` (``timecode``, ``position_s``, ``speed``, ``direction``, ``user_bits``,
    ``drop_frame``, ``color_frame``), ``rate_fps``, ``rate_fps_candidates``, ``events``
    (``kind``, ``position_s``, and ``from_timecode``/``to_timecode`` where they apply).
    """
    def event(e: LtcEvent) -> dict:
        d = {"kind": e.kind, "position_s": round(e.position_s, 7)}
        for key in ("from_timecode", "to_timecode", "frames", "duration_s"):
            v = getattr(e, key)
            if v is not None:
                d[key] = round(v, 7) if isinstance(v, float) else v
        return d

    return {
        "channel": read.channel,
        "format": FORMAT,
        "direction": read.direction,
        "valid": read.valid,
        "start_s": round(read.start_s, 7),
        "end_s": round(read.end_s, 7),
        "frames": [{"timecode": f.timecode, "position_s": round(f.position_s, 7), "speed": round(f.speed, 5),
                    "direction": f.direction, "user_bits": f.user_bits, "drop_frame": f.drop_frame,
                    "color_frame": f.color_frame} for f in read.frames],
        "rate_fps": read.rate_fps,
        "rate_fps_candidates": list(read.rate_fps_candidates),
        "events": [event(e) for e in read.events],
    }
