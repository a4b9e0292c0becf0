"""What a channel holds, and, when it gave no read, why.

Input: a channel's samples, transitions, segments, reads and the segments that gave no read.
Output: :class:`ChannelStatus` (state, reason, recording, clipping, sampling).

Every channel is accounted for: it gave reads; or it shows no activity above the noise; or it
has transitions whose intervals are not F2F-regular (noise, a damaged stripe); or it holds a
regular F2F recording in which no start sentinel was found in either direction; or the
sentinel was found without the clocking zeros every ISO track leads with (ISO/IEC 7811-2).
Clipping and undersampling, which explain many of these, are added to the reason.

A channel that holds a regular F2F recording (the last two cases) but yields no read is a
failed read: the decoder's exit code counts it as such (1), while a channel without activity
does not change the exit code.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from readchan.formats.iso7811.card import MIN_CLOCKING_ZEROS, MIN_REGULARITY
from readchan.frontend.head import CLIPPED_FRACTION as CLIPPED
from readchan.frontend.band import pulse_intervals
from readchan.frontend.detect import Transitions, clipped_fraction
from readchan.frontend.sampling import Sampling, channel_sampling

__all__ = ["ChannelStatus", "Skipped", "channel_status", "STATES"]

STATES = ("read", "no-activity", "irregular", "no-sentinel", "few-zeros")
"""Channel states, from a read through the stages a segment can stop at."""

_RANK = {"irregular": 1, "no-sentinel": 2, "few-zeros": 3}

ACTIVE_SIGMA = 6.0
"""A detected pulse is activity when it stands above this many noise RMS (Gaussian noise
reaches 6σ in 2·10⁻⁹ of samples): the detector also returns noise peaks."""

MIN_ACTIVE = 24
"""Pulses above the noise a channel needs to count as active (the segmenter's least read)."""


@dataclass(frozen=True)
class Skipped:
    """A segment of transitions that gave no read, and the stage it stopped at.

    Attributes
    ----------
    stage : ``"irregular"``, ``"no-sentinel"`` or ``"few-zeros"``.
    segment : the segment (:class:`readchan.frontend.segment.Segment`).
    n_bits : bits recovered from it.
    regularity : fraction of its intervals near a half or a full cell.
    zeros : zeros before the start sentinel (``"few-zeros"`` only).
    """

    stage: str
    segment: object
    n_bits: int
    regularity: float
    zeros: int | None = None


@dataclass(frozen=True)
class ChannelStatus:
    """One channel's state.

    Attributes
    ----------
    channel : channel index.
    state : one of :data:`STATES`.
    reason : one line saying why there is no read ("" with reads).
    recording : the channel holds a regular F2F recording (read or not).
    n_transitions : transitions detected.
    clipped_fraction : fraction of samples at the extremes (:func:`readchan.frontend.detect.clipped_fraction`).
    sampling : samples per half cell and per PW50 (:mod:`readchan.frontend.sampling`).
    skipped : the segments that gave no read, each with the stage it stopped at.
    """

    channel: int
    state: str
    reason: str
    recording: bool
    n_transitions: int
    clipped_fraction: float
    sampling: Sampling
    skipped: tuple[Skipped, ...] = ()

    @property
    def unread_recording(self) -> bool:
        """A regular F2F recording that yielded no read (a failed read for the exit code)."""
        return self.recording and self.state != "read"

    @property
    def clipped(self) -> bool:
        return self.clipped_fraction > CLIPPED


def channel_status(x: np.ndarray, rate_hz: float, channel: int, tr: Transitions, segs, reads, skipped,
                   fmt=None, *, clip: float | None = None) -> ChannelStatus:
    """The state of a decoded channel from its transitions, segments, reads and the segments
    that gave none (``skipped``, from :func:`readchan.channel.reads_from`); ``clip``: the
    channel's :func:`readchan.frontend.detect.clipped_fraction`, when the caller has it."""
    amp = np.abs(tr.amplitude)
    strong = int(np.count_nonzero(amp > ACTIVE_SIGMA * tr.noise_rms)) if tr.kind == "head" else len(tr)
    active = strong >= MIN_ACTIVE
    periods = [float(np.median(r.bits.period_s)) for r in reads if len(r.bits)]
    pw50 = [float(r.track_evidence.pw50_cell * np.median(r.bits.period_s)) for r in reads
            if r.track_evidence is not None and r.track_evidence.pw50_cell is not None and len(r.bits)]
    sampling = channel_sampling(rate_hz, period_s=periods, pw50_s=pw50,
                                intervals_s=None if periods or not active else pulse_intervals(tr))
    if clip is None or tr.kind != "head":
        clip = clipped_fraction(np.asarray(x, float)) if tr.kind == "head" and x.size else 0.0
    n = len(tr)
    recording = bool(reads) or any(s.stage in ("no-sentinel", "few-zeros") for s in skipped)
    if reads:
        return ChannelStatus(channel, "read", "", True, n, clip, sampling, tuple(skipped))
    if not skipped or (not active and not recording):
        state = "no-activity"
        if tr.kind == "head":
            reason = (f"no activity above noise ({n} transition{'s' if n != 1 else ''} detected, {strong} of them "
                      f"above {ACTIVE_SIGMA:g}× the noise RMS; a swipe has at least {MIN_ACTIVE})")
        else:
            reason = f"no activity ({n} edge{'s' if n != 1 else ''}; a swipe has at least {MIN_ACTIVE})"
    else:
        best = max(skipped, key=lambda s: (_RANK[s.stage], s.regularity, s.n_bits))
        state = best.stage
        if state == "irregular":
            reason = (f"transitions, but intervals not F2F-regular (best stretch {100 * best.regularity:.0f} % "
                      f"within ±0.15 of a half cell or ±0.2 of a full cell; a recording has {100 * MIN_REGULARITY:.0f} %)")
        elif state == "no-sentinel":
            which = "of " + fmt.name if fmt is not None else "of any known format"
            reason = (f"regular F2F ({best.n_bits} bits, {100 * best.regularity:.0f} % regular intervals), but no start "
                      f"sentinel {which} in either direction")
        else:
            reason = (f"start sentinel found, but only {best.zeros} clocking zero{'s' if best.zeros != 1 else ''} "
                      f"before it (an ISO track leads with many; at least {MIN_CLOCKING_ZEROS} are needed)")
    extra = []
    if clip > CLIPPED:
        extra.append(f"clipped ({100 * clip:.2f} % of samples at the extremes)")
    if sampling.undersampled:
        extra.append(sampling.text())
    if extra:                       # the causes first: they explain what follows
        reason = "; ".join(extra) + "; " + reason
    return ChannelStatus(channel, state, reason, recording, n, clip, sampling, tuple(skipped))
