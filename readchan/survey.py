"""The survey of a long capture: one cheap pass over its file that finds where the signal is and
makes the front end's per-capture decisions once, so that each stretch decoded afterwards
(:mod:`readchan.stream`) uses them instead of guessing them from its own few samples.

Input: the path of an audio capture, the channels to survey, and the decode settings.
Output: per channel, a :class:`ChannelSurvey`: the activity gate (active spans, block
energies), and :meth:`ChannelSurvey.decisions`, the ``DecodeSettings`` fields decided for the
whole capture: ``quant_step`` (the converter step), ``band_hz`` (the signal band) and ``hum_hz``
(the mains frequency, 0 for none).

Each decision is made the way the whole-file front end (:func:`readchan.frontend.head.head_front_end`)
makes it, on the samples it would look at as far as one pass allows:

* the converter step from the very samples :func:`readchan.frontend.detect.quantisation_step`
  takes from the whole capture (every ``n // 200000``-th): the same step;
* the signal band from the most energetic aligned 2¹⁸-sample block (chosen from the gate's block
  variances; the whole-file decode chooses from the conditioned signal's), conditioned alike;
* the hum frequency from 0.5 ms boxcar means on a grid over the whole capture, those in quiet
  20 ms blocks at least 40 ms from an active one (where the whole-file decode uses the quiet
  between its segments), fitted by :func:`readchan.frontend.condition.fit_hum_points`.  A
  capture with too little quiet (:data:`MIN_HUM_POINTS`) keeps the per-stretch search.

Cost: the pass reads integer PCM as integers (:func:`readchan.io.blocks.fast_dtype`) and makes
one float32 sum of x and x² per 20 ms block; the band costs one more read of 2¹⁸ samples.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from readchan.frontend.activity import ACTIVE_RATIO, Activity
from readchan.frontend.detect import quantisation_step
from readchan.io.blocks import fast_dtype, iter_blocks, read_span

GATE_BLOCK = 960 * 256
"""Frames read at a time for the pass (a whole number of 20 ms energy blocks at 48 kHz, so that
no part block is carried from one read to the next)."""
QUANT_SAMPLES = 200_000
"""Samples :func:`readchan.frontend.detect.quantisation_step` looks at (its own stride rule)."""
BAND_BLOCK = 1 << 18
"""Samples of the stretch the capture's signal band is found in (as a whole-file decode does:
:func:`readchan.frontend.condition.signal_band_hz`)."""
HUM_POINTS = 16_000
"""Grid points the hum's boxcar means are taken at over the capture (the fit uses at most 4000
of the quiet ones, as :func:`readchan.frontend.condition.fit_hum` does)."""
QUIET_GUARD = 2
"""Energy blocks (20 ms each) either side of an active block whose samples the hum fit leaves
out, as the whole-file fit leaves out the pulses' surroundings."""
MIN_HUM_POINTS = 500
"""Fewest quiet grid points (a second of quiet at the finest grid) for the hum to be decided
for the whole capture; with fewer, each stretch searches for it itself."""
SETTLE_S = 0.05
"""Capture read on either side of the band's block for the conditioning filters to settle, s."""


@dataclass
class ChannelSurvey:
    """One channel's survey, filled block by block by :func:`survey`."""

    gate: Activity
    n: int
    rate_hz: float
    channel: int
    picks: list = field(default_factory=list)       # every n // 200000-th sample, full scale
    hum_t: list = field(default_factory=list)       # grid positions (samples)
    hum_v: list = field(default_factory=list)       # 0.5 ms boxcar means there, full scale

    @property
    def quant_step(self) -> float:
        """The converter step (full scale units), or 0 when the samples are not on a grid."""
        return quantisation_step(np.concatenate(self.picks)) if self.picks else 0.0

    def hum_hz(self) -> float | None:
        """The capture's mains frequency (Hz), 0 when no hum passes the fit's tests, None when
        the capture has too little quiet to tell (one active span)."""
        from readchan.frontend.condition import fit_hum_points

        spans = self.gate.spans()
        if not spans or spans == [(0, self.n)] or not self.hum_t:
            return None
        t, v = np.concatenate(self.hum_t), np.concatenate(self.hum_v)
        e, block = self.gate.energies(), self.gate.block
        floor = self.gate.floor()
        active = e > ACTIVE_RATIO * floor if floor > 0 else np.ones(e.size, bool)
        near = np.convolve(active.astype(np.int32), np.ones(2 * QUIET_GUARD + 1, np.int32), mode="same") > 0
        quiet = ~near[np.minimum(t // block, e.size - 1)]
        t, v = t[quiet], v[quiet]
        if t.size < MIN_HUM_POINTS:
            return None
        step = max(1, t.size // 4000)
        picks = np.concatenate(self.picks)
        peak = float(np.percentile(np.abs(picks - np.median(picks)), 99.9))
        fit = fit_hum_points(t[::step] / self.rate_hz, v[::step], peak)
        return fit.freq_hz if fit is not None else 0.0

    def band_hz(self, path: str, settings) -> float | None:
        """The capture's signal band (Hz; 0 for none), or None where the front end would not
        look for one (a low-pass set, no auto band, a capture of one band block or less)."""
        from readchan.frontend.condition import ConditionSettings, condition, signal_band_hz

        cs = settings.condition
        if not settings.auto_band or cs.lowpass_hz is not None or self.n <= BAND_BLOCK:
            return None
        if not isinstance(settings.notch, str):
            cs = ConditionSettings(cs.highpass_hz, cs.lowpass_hz, (float(settings.notch),), cs.notch_q)
        e = self.gate.energies()
        which = (np.arange(e.size) * self.gate.block + self.gate.block // 2) // BAND_BLOCK
        nb = self.n // BAND_BLOCK
        keep = which < nb
        k = int(np.argmax(np.bincount(which[keep], weights=e[keep], minlength=nb)))
        settle = int(SETTLE_S * self.rate_hz)
        lo, hi = max(0, k * BAND_BLOCK - settle), min(self.n, (k + 1) * BAND_BLOCK + settle)
        x = np.ascontiguousarray(read_span(path, lo, hi)[:, self.channel])
        y = condition(x, self.rate_hz, cs, channel=self.channel).signal[k * BAND_BLOCK - lo:][:BAND_BLOCK]
        return signal_band_hz(y, self.rate_hz) or 0.0

    def decisions(self, path: str, settings) -> dict:
        """The ``DecodeSettings`` fields decided once for this channel (those the settings do
        not fix already); empty for a channel with no active span."""
        if not self.gate.spans():
            return {}
        out: dict = {}
        if settings.quant_step is None:
            out["quant_step"] = self.quant_step
        if settings.band_hz is None:
            band = self.band_hz(path, settings)
            if band is not None:
                out["band_hz"] = band
        if settings.hum_hz is None and str(getattr(settings.notch, "value", settings.notch)) == "auto":
            hum = self.hum_hz()
            if hum is not None:
                out["hum_hz"] = hum
        return out

    def _feed(self, start: int, x: np.ndarray, scale: float) -> None:
        """The next samples ``x`` (1-D, raw: integers or floats) starting at frame ``start``."""
        self.gate.feed(x, scale)
        stride = max(1, self.n // QUANT_SAMPLES)
        self.picks.append(x[(-start) % stride::stride] * scale)
        w = max(1, int(self.rate_hz // 2000))
        grid = max(w, self.n // HUM_POINTS)
        idx = np.arange((-start) % grid, x.size, grid)
        idx = idx[(idx - w // 2 >= 0) & (idx - w // 2 + w <= x.size)]
        if idx.size:
            box = x[(idx - w // 2)[:, None] + np.arange(w)].astype(np.float64).mean(axis=1) * scale
            self.hum_t.append(start + idx)
            self.hum_v.append(box)


def survey(path: str, chans: list[int], rate_hz: float, n: int, subtype: str = "",
           progress: Callable[[float], None] = lambda f: None, share: float = 1.0) -> list[ChannelSurvey]:
    """One pass over the file at ``path`` (``n`` frames at ``rate_hz`` Hz, header ``subtype``)
    surveying each channel of ``chans``; ``progress`` is told the fraction done × ``share``."""
    out = [ChannelSurvey(Activity(rate_hz), n, rate_hz, c) for c in chans]
    dtype, scale = fast_dtype(subtype)
    done = 0
    for blk in iter_blocks(path, GATE_BLOCK, dtype=dtype):
        fresh = blk.samples[blk.overlap:]
        for sv in out:
            sv._feed(blk.start + blk.overlap, fresh[:, sv.channel], scale)
        done += fresh.shape[0]
        progress(share * min(1.0, done / max(1, n)))
    return out
