"""Is the capture sampled finely enough to resolve its pulses and their timing?

Input: the sample rate (Hz) and the bit periods (s) and PW50s (s) of a channel's reads, or a
synthesis spec's cell (m), PW50 (m) and fastest speed (cm/s).
Output: :class:`Sampling` (samples per half cell and per PW50, undersampled or not).

A peak is placed between samples by a parabola through the three around it, and a pulse's
width by the half-amplitude crossings either side of it; both need the pulse to span a few
samples.  Below about 3 samples per half cell the timing of a transition is quantised to a
third of the shortest interval, and below about 2 samples per PW50 a pulse is one or two
samples tall, so its peak and its width are guesses (common practice; the figures are the
issue's: an 8 kHz sound card or a scope at a slow timebase).  Such a capture still decodes at
times, but its speed, PW50 and margins are artefacts of the sampling, and the report says so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["MIN_SAMPLES_PER_HALF_CELL", "MIN_SAMPLES_PER_PW50", "Sampling", "synth_sampling"]

MIN_SAMPLES_PER_HALF_CELL = 3.0
"""Fewer samples per half bit cell than this is undersampled."""

MIN_SAMPLES_PER_PW50 = 2.0
"""Fewer samples per pulse width at half amplitude than this is undersampled."""


@dataclass(frozen=True)
class Sampling:
    """Samples per half cell and per PW50 of a channel (or of a planned synthesis).

    Attributes
    ----------
    rate_hz : sample rate in Hz.
    half_cell_samples : shortest half cell in samples (the fastest read, or the shortest
        intervals between strong pulses when nothing was read); None when unknown.
    pw50_samples : narrowest PW50 in samples; None when unknown.
    """

    rate_hz: float
    half_cell_samples: float | None
    pw50_samples: float | None

    @property
    def undersampled(self) -> bool:
        h, p = self.half_cell_samples, self.pw50_samples
        return bool((h is not None and h < MIN_SAMPLES_PER_HALF_CELL) or (p is not None and p < MIN_SAMPLES_PER_PW50))

    def text(self) -> str:
        """``"undersampled at 8000 Hz: 1.6 samples per half cell (needs about 3), ..."``."""
        parts = []
        if self.half_cell_samples is not None:
            parts.append(f"{self.half_cell_samples:.1f} samples per half cell (needs about {MIN_SAMPLES_PER_HALF_CELL:g})")
        if self.pw50_samples is not None:
            parts.append(f"{self.pw50_samples:.1f} per PW50 (needs about {MIN_SAMPLES_PER_PW50:g})")
        state = "undersampled" if self.undersampled else "sampled well enough"
        return f"{state} at {self.rate_hz:g} Hz: " + ", ".join(parts) if parts else f"{state} at {self.rate_hz:g} Hz"


def channel_sampling(rate_hz: float, *, period_s: list[float] | None = None, pw50_s: list[float] | None = None,
                     intervals_s: np.ndarray | None = None) -> Sampling:
    """Sampling of a channel from its reads' median bit periods ``period_s`` and PW50s
    ``pw50_s`` (seconds), or, with no read, from the intervals between its strong pulses:
    the half cell is then the smaller of their 10th percentile (half cells, when the data has
    ones) and half their 90th percentile (full cells)."""
    half = None
    if period_s:
        half = 0.5 * min(period_s) * rate_hz
    elif intervals_s is not None and intervals_s.size >= 16:
        half = min(float(np.percentile(intervals_s, 10)), 0.5 * float(np.percentile(intervals_s, 90))) * rate_hz
    pw = min(pw50_s) * rate_hz if pw50_s else None
    return Sampling(float(rate_hz), half, pw)


def synth_sampling(rate_hz: float, cell_m: float, pw50_m: float, max_speed_cm_s: float, *,
                   pulses: bool = True) -> Sampling:
    """Sampling a synthesis would have: the half cell ``cell_m``/2 and the head's ``pw50_m``
    passing at ``max_speed_cm_s`` (the profile's fastest), at ``rate_hz``; a square-wave
    (flux) output has no pulse width (``pulses=False``)."""
    v = max_speed_cm_s / 100.0
    half = 0.5 * cell_m / v * rate_hz
    pw = pw50_m / v * rate_hz if pulses and math.isfinite(pw50_m) else None
    return Sampling(float(rate_hz), half, pw)
