"""Channel-wide front-end measurements: DC offset, baseline wander, hum, noise, converter step.

Input: a channel's raw samples (numpy array, capture units), its sample rate in Hz, its
:class:`readchan.channel.ChannelResult` and the boolean mask of its quiet samples.  Output: a
:class:`FrontEnd` and the wide-band measurement signal (numpy array, capture units; see
:mod:`readchan.measure.diagnose`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from readchan.frontend.head import between_pulses_mask
from readchan.frontend.condition import ConditionSettings, condition
from readchan.frontend.detect import noise_rms
from readchan.measure.hum import fit_hum_wide
from readchan.measure.noise import quantisation_step, quantised_sigma, robust_noise


GUARD_S = 0.01
"""Samples this close to a stretch of transitions are not used for noise and hum (seconds)."""

MIN_QUIET_S = 0.005
"""Least quiet time for a noise measurement; below it the noise comes from 1 ms blocks."""

BETWEEN_GUARD_INTERVALS = 0.4
"""Samples nearer a transition than this many median intervals are not "between pulses" for
the hum fit (our choice: alternate-sign neighbours' tails largely cancel mid-gap; further in,
a pulse's own flank would read as hum)."""

FLOOR_BELOW_STEPS = 0.6
"""A noise RMS under this many converter steps (with less hum than a step) spans only a level
or two and is estimated from the levels' counts instead (uniform-error model, Widrow & Kollár,
*Quantization Noise*, 2008: step/√12 ≈ 0.29 step is the floor; our choice of 0.6 leaves room
for a level or two of Gaussian noise)."""

MAINS_HZ = (50.0, 60.0)
"""The two mains systems (IEC 60038); a fitted hum is assigned the nearer."""

DEFAULT_CELL_S = 1e-3
"""Typical interval (s) the noise estimate assumes when a channel has fewer than two
transitions (our choice: a card swiped at about 30 cm/s at 75 bpi has a 1.1 ms cell)."""


@dataclass(frozen=True)
class FrontEnd:
    """Channel-wide front-end measurements (shared by the channel's reads).

    Attributes
    ----------
    channel : channel index.
    kind : ``"head"`` or ``"logic"``.
    units : the capture's units (``"FS"`` for audio).
    rate_hz : sample rate in Hz.
    duration_s : channel length in seconds.
    dc_offset : median of the raw samples (capture units).
    wander_pp : peak-to-peak of the content below the baseline high-pass (capture units).
    hum_hz : fitted hum fundamental in Hz, or None when no hum is significant.
    mains_hz : 50.0 or 60.0, the mains system nearest ``hum_hz``; None with no hum.
    hum_amplitude : hum fundamental's peak amplitude (capture units), or None.
    noise_rms : wide-band noise RMS on the quiet samples (capture units); None for logic.
    noise_from : ``"quiet"`` (samples away from all transitions) or ``"blocks"`` (too little
        quiet time: the 10th percentile of 1 ms block RMS values, which reads low).
    quiet_s : quiet time (farther than 10 ms from every stretch of transitions), seconds.
    n_transitions : transitions detected on the channel.
    noise_used_s : quiet time the noise RMS was taken over after isolated pulses and slow
        excursions were left out (:func:`readchan.measure.noise.robust_noise`), seconds; None with ``"blocks"``.
    noise_pulses_excluded : isolated pulses left out of the noise (card edges, strays).
    noise_slow_excluded_s : quiet time left out of the noise as slow content, seconds.
    hum_from : ``"quiet"`` or ``"quiet and between pulses"``: where the hum was fitted.
    quant_step : the converter's step (capture units) when the samples lie on a grid, else None.
    noise_floored : the noise spanned only a level or two of the converter, so its RMS on the
        grid misjudged it: the figure is instead sqrt(σ² + step²/12), σ the noise before the
        converter estimated from how the quiet samples fall on the levels
        (:func:`readchan.measure.noise.quantised_sigma`) and step/√12 the quantisation noise every pulse carries
        (uniform-error model, Widrow & Kollár, *Quantization Noise*, 2008).
    """

    channel: int
    kind: str
    units: str
    rate_hz: float
    duration_s: float
    dc_offset: float
    wander_pp: float | None
    hum_hz: float | None
    mains_hz: float | None
    hum_amplitude: float | None
    noise_rms: float | None
    noise_from: str
    quiet_s: float
    n_transitions: int
    noise_used_s: float | None = None
    noise_pulses_excluded: int = 0
    noise_slow_excluded_s: float = 0.0
    hum_from: str | None = None
    quant_step: float | None = None
    noise_floored: bool = False


def noise_source_text(fe: FrontEnd) -> str:
    """Where the noise figure came from, in words (the report's noise line)."""
    if fe.noise_from == "blocks":
        text = (f"{fe.quiet_s * 1e3:.0f} ms of quiet time is too little: 10th percentile of 1 ms block RMS "
                "values, which reads low")
    else:
        text = f"quiet samples, {(fe.noise_used_s or 0.0) * 1e3:.0f} of {fe.quiet_s * 1e3:.0f} ms"
        left = []
        if fe.noise_pulses_excluded:
            n = fe.noise_pulses_excluded
            left.append(f"{n} isolated pulse{'s' if n != 1 else ''}")
        if fe.noise_slow_excluded_s > 0:
            left.append(f"{fe.noise_slow_excluded_s * 1e3:.0f} ms of slow baseline or transients")
        if left:
            text += "; left out: " + ", ".join(left)
    if fe.noise_floored:
        text += (f"; on a {fe.quant_step:.3g} {fe.units} converter step the noise spans a level or two: "
                 "noise before the converter from the levels' counts, plus step/√12")
    return text


def measure_front_end(x, rate_hz, result, quiet, highpass_hz, units):
    cs = ConditionSettings(highpass_hz=highpass_hz or None)
    cond = condition(x, rate_hz, cs, channel=result.channel)
    tr = result.transitions
    # Hum is fitted wherever the baseline can be seen: the quiet stretches and, inside the
    # swipes, the middle of the gaps between pulses (see fit_hum_wide).
    between = between_pulses_mask(x.size, rate_hz, tr, guard=BETWEEN_GUARD_INTERVALS) if len(tr) >= 2 else np.ones(x.size, bool)
    hum, hum_from = fit_hum_wide(x, cond, rate_hz, quiet, between, highpass_hz, result.channel)
    if hum is not None:
        cond = condition(x - hum.waveform(x.size, rate_hz), rate_hz, cs, channel=result.channel)
    w = cond.signal
    wander = float(np.ptp((x - cond.dc_offset) - w)) if highpass_hz else 0.0
    if hum is not None:
        wander = float(np.ptp((x - hum.waveform(x.size, rate_hz) - cond.dc_offset) - w))
    quiet_s = float(quiet.sum()) / rate_hz
    cell_s = float(np.median(np.diff(tr.times_s))) if len(tr) >= 2 else DEFAULT_CELL_S
    rec = result.front_end
    # the converter step is a front-end decision: taken from the decode's record when its head
    # front end ran (the same grid test), measured here otherwise (logic, silent channels)
    if rec is not None and rec.kind == "head" and not rec.silent:
        step = rec.quant_step or None
    else:
        step = quantisation_step(x)
    est = robust_noise(w, rate_hz, quiet, cell_s=cell_s, step=step) if quiet_s >= MIN_QUIET_S else None
    if est is not None and est.used_s >= MIN_QUIET_S:
        noise, how = est.rms, "quiet"
    else:
        noise, how = noise_rms(w, rate_hz), "blocks"
        est = None
    floored = False
    if step is not None and noise < FLOOR_BELOW_STEPS * step and (hum is None or hum.amplitude < step):
        # the noise spans a level or two: its RMS on the grid misjudges it; estimate the noise
        # before the converter from how the samples fall on the levels, and add step/√12
        sigma = None if est is None else quantised_sigma(x, est.mask, step, rate_hz)
        total = math.hypot(sigma, step / math.sqrt(12.0)) if sigma is not None else step / math.sqrt(12.0)
        if total > noise:
            noise, floored = total, True
    low, high = MAINS_HZ
    mains = None if hum is None else (low if abs(hum.freq_hz - low) < abs(hum.freq_hz - high) else high)
    fe = FrontEnd(result.channel, "head", units, rate_hz, x.size / rate_hz, cond.dc_offset, wander,
                  None if hum is None else hum.freq_hz, mains, None if hum is None else hum.amplitude,
                  noise, how, quiet_s, len(tr),
                  noise_used_s=None if est is None else est.used_s,
                  noise_pulses_excluded=0 if est is None else est.pulses_excluded,
                  noise_slow_excluded_s=0.0 if est is None else est.slow_excluded_s,
                  hum_from=hum_from, quant_step=step, noise_floored=floored)
    return fe, np.ascontiguousarray(w)
