"""The detector stage of a streamed tape channel (:mod:`readchan.stream_tape`): the capture-wide
levels of one channel from one pass over its file, and a piece's transitions at absolute sample
positions with those levels.

Input: the path of an audio capture and a channel index (levels); a piece's samples, its first
sample's index in the capture and the levels (transitions).
Output: :class:`TapeLevels`; transition times in capture seconds, float for float those of the
whole-file detector (:func:`readchan.linecode.biphase.transitions`) away from the piece's edges.

The whole-file decoder takes its levels from strided subsamples of the channel (the
non-physical sample test of :func:`readchan.io.capture.repair_outliers`, 10⁶ samples; the
biphase detector's median, 1–99 % span and signal kind, 4·10⁵; the head detector's 99.9 %
pulse level, 5·10⁵); subsamples at the same absolute positions, gathered a block at a time,
give the same values.  A crossing (or a parabolic peak) is the absolute index of its sample plus
the interpolated fraction, added once as the whole-file detector adds it: a piece-relative
position shifted afterwards would round twice and differ in the last bit now and then.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.ndimage import maximum_filter1d, percentile_filter

from readchan.frontend.crossings import hysteresis_crossings
from readchan.frontend.detect import _alternate, _lobe_peaks
from readchan.io import capture as capture_mod
from readchan.io.blocks import audio_info, iter_blocks
from readchan.linecode.biphase import signal_kind

STAT_BLOCK = 1 << 18
"""Frames read at a time for the levels' pass."""
_TAPE_SUB = 400_000
"""Subsample size of the biphase detector's median and span (:mod:`readchan.linecode.biphase`)."""
_HEAD_SUB = 500_000
"""Subsample size of the head detector's pulse level (:func:`readchan.frontend.detect.detect_head`)."""
HEAD_THRESHOLD = 0.4
"""Fraction of the local envelope a head pulse must exceed (``detect_head``'s default)."""


@dataclass(frozen=True)
class TapeLevels:
    """The capture-wide levels of one channel (module docstring, step 1), in capture units.

    ``centre``, ``limit``: a sample is non-physical when |x − centre| ≥ 1e150 or > ``limit``;
    ``median``: the level the detector removes; ``kind``: ``line`` or ``head`` as decided on the
    whole channel; ``mid``, ``hysteresis``: the line detector's mid level and hysteresis (after the
    median is removed; ``hysteresis`` 0 when the span is empty); ``floor``: the head detector's
    candidate floor (0 when the channel has no pulses)."""

    centre: float
    limit: float
    median: float
    kind: str
    mid: float
    hysteresis: float
    floor: float


def _strided(blk_start: int, samples: np.ndarray, step: int) -> np.ndarray:
    """The samples of a block at absolute positions 0, step, 2·step, ..."""
    return samples[(-blk_start) % step::step]


def _wild(x: np.ndarray, centre: float, limit: float) -> np.ndarray:
    dev = np.abs(x - centre)
    return (dev >= capture_mod._OUTLIER_ABSOLUTE) | (dev > limit)


def _repair(x: np.ndarray, centre: float, limit: float) -> tuple[np.ndarray, np.ndarray]:
    """``x`` with its non-physical samples interpolated from their neighbours in ``x``
    (:func:`readchan.io.capture.repair_outliers`' rule with the channel's levels), and their
    indices in ``x``."""
    wild = _wild(x, centre, limit)
    bad = np.flatnonzero(wild)
    if bad.size == 0:
        return x, bad
    good = np.flatnonzero(~wild)
    y = x.copy()
    y[bad] = np.interp(bad, good, x[good]) if good.size else centre
    return y, bad


def channel_levels(path: str, channel: int, kind: str = "auto") -> TapeLevels:
    """The :class:`TapeLevels` of ``channel`` of the file at ``path`` (one pass in blocks, and a
    second only when a non-physical sample falls on a subsample position).  ``kind``: ``auto``,
    ``line`` or ``head``."""
    n = audio_info(path).frames
    s_out = max(1, n // capture_mod.OUTLIER_SUBSAMPLE)
    s_tape, s_head = max(1, n // _TAPE_SUB), max(1, n // _HEAD_SUB)
    parts: dict[int, list[np.ndarray]] = {s_out: [], s_tape: [], s_head: []}
    for blk in iter_blocks(path, STAT_BLOCK):
        col = blk.samples[:, channel]
        for s, acc in parts.items():
            acc.append(_strided(blk.start, col, s).copy())
    sub = {s: np.concatenate(v) for s, v in parts.items()}
    centre = float(np.median(sub[s_out]))
    dev = np.abs(sub[s_out] - centre)
    sane = dev[dev < capture_mod._OUTLIER_ABSOLUTE]
    level = float(np.percentile(sane, capture_mod.OUTLIER_LEVEL_PERCENTILE)) if sane.size else 0.0
    limit = capture_mod.OUTLIER_RATIO * level if level > 0 else np.inf
    if any(_wild(v, centre, limit).any() for v in sub.values()):
        # a repaired sample on a subsample position: take the subsamples of the repaired channel
        parts = {s: [] for s in sub}
        margin = 1 << 12
        for blk in iter_blocks(path, STAT_BLOCK + margin, margin):
            y, _ = _repair(blk.samples[:, channel], centre, limit)
            new_start = blk.start + blk.overlap
            for s, acc in parts.items():
                acc.append(_strided(new_start, y[blk.overlap:], s).copy())
        sub = {s: np.concatenate(v) for s, v in parts.items()}
    med = float(np.median(sub[s_tape]))
    xt = sub[s_tape] - med
    used = signal_kind(xt) if kind == "auto" else kind
    lo, hi = np.percentile(xt, [1.0, 99.0])
    mid, hyst = (0.5 * (lo + hi), 0.2 * (hi - lo)) if hi > lo else (0.0, 0.0)
    big = float(np.percentile(np.abs(sub[s_head] - med), 99.9))
    floor = min(max(0.0, 0.02 * big, 0.0), 0.3 * big) if big > 0 else 0.0
    return TapeLevels(centre, float(limit), med, used, float(mid), float(hyst), float(floor))


def line_crossings(y: np.ndarray, h: float, offset: int) -> np.ndarray:
    """:func:`readchan.frontend.crossings.hysteresis_crossings` of ``y`` whose first sample is
    sample ``offset`` of the capture, in absolute samples: the absolute index of the sample
    before the crossing plus the interpolated fraction, one addition, as the whole-file
    decoder forms it (a piece-relative position shifted afterwards would round twice)."""
    return hysteresis_crossings(y, h, offset)


def head_peaks(x: np.ndarray, floor: float, offset: int) -> np.ndarray:
    """Pulse-peak positions (absolute samples) of a raw head signal ``x`` (median removed) whose
    first sample is sample ``offset``: :func:`readchan.frontend.detect.detect_head` with the
    channel's candidate floor, its parabolic timing formed at the absolute index."""
    if not floor > 0:
        return np.zeros(0)
    idx, sgn = _lobe_peaks(x, 0.5 * floor, floor)
    if idx.size == 0:
        return np.zeros(0)
    amp = np.abs(x[idx])
    env = percentile_filter(maximum_filter1d(amp, size=min(5, idx.size), mode="nearest"), 75,
                            size=min(15, idx.size), mode="nearest")
    idx, _, _ = _alternate(x, idx, sgn, amp, env, amp >= HEAD_THRESHOLD * env, HEAD_THRESHOLD)
    if idx.size == 0:
        return np.zeros(0)
    ic = np.clip(idx, 1, x.size - 2)
    ym, y0, yp = x[ic - 1], x[ic], x[ic + 1]
    den = ym - 2 * y0 + yp
    with np.errstate(divide="ignore", invalid="ignore"):
        d = np.where(np.abs(den) > 1e-300, 0.5 * (ym - yp) / den, 0.0)
    return (ic + offset) + np.clip(d, -0.5, 0.5)


def piece_transitions(x: np.ndarray, offset: int, rate_hz: float, lv: TapeLevels, kind: str) -> np.ndarray:
    """Transition times (s, capture time) of the samples ``x`` starting at sample ``offset``."""
    y = x - lv.median
    if kind == "line":
        pos = line_crossings(y - lv.mid, lv.hysteresis, offset) if lv.hysteresis > 0 else np.zeros(0)
    else:
        pos = head_peaks(y, lv.floor, offset)
    return pos / rate_hz
