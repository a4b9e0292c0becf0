"""The verdict of a read: its measured quantities against the limits of :data:`LIMITS`.

Input: the read's measurements (:class:`readchan.measure.amplitude.Amplitude`,
:class:`readchan.measure.noise.Noise`, :class:`readchan.measure.pulse.PulseShape`,
:class:`readchan.measure.timing.Timing`) and the sample rate in Hz.  Output: one
:class:`Check` per quantity that applies (value, limit, headroom), and the verdict line
(:func:`verdict_text`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from readchan.frontend.sampling import MIN_SAMPLES_PER_HALF_CELL, MIN_SAMPLES_PER_PW50
from readchan.measure.timing import Timing


@dataclass(frozen=True)
class Limit:
    """A verdict threshold.

    Attributes
    ----------
    name : the checked quantity's key.
    label : what a failure is called ("low SNR").
    quantity : what the value is ("SNR"), for display.
    unit : unit of the displayed value and limit (after ``scale``).
    scale : display factor (100 shows a fraction in %).
    limit : the threshold, in the value's own unit (before ``scale``).
    sense : ``"min"`` (the value must be at least the limit) or ``"max"`` (at most).
    source : where the threshold comes from.
    """

    name: str
    label: str
    quantity: str
    unit: str
    scale: float
    limit: float
    sense: str
    source: str


LIMITS = (
    Limit("snr_db", "low SNR", "SNR", "dB", 1.0, 20.0, "min",
          "common practice: at 20 dB a 4σ noise peak reaches 0.4 of a pulse, the detection threshold"),
    Limit("margin_min", "low timing margin", "worst timing margin", "", 1.0, 0.3, "min",
          "common practice: 0.3 leaves 0.075 cell between the worst interval and the 0.75 boundary"),
    Limit("pw50_cell", "wide pulses", "PW50", "cell", 1.0, 0.5, "max",
          "common practice: wider than half a cell, the two pulses of a 1 merge and shift"),
    Limit("speed_min_cm_s", "slow swipe", "slowest speed", "cm/s", 1.0, 7.6, "min",
          "common practice: readers are commonly specified for 7.6-127 cm/s; no ISO requirement"),
    Limit("speed_max_cm_s", "fast swipe", "fastest speed", "cm/s", 1.0, 127.0, "max",
          "common practice: readers are commonly specified for 7.6-127 cm/s; no ISO requirement"),
    Limit("speed_change_per_bit", "jerky swipe", "speed change per bit", "%", 100.0, 0.0125, "max",
          "derived: with loop gain 0.25 the timing loop lags a 1.25 %/bit speed change by 0.05 cell"),
    Limit("asymmetry_abs_pct", "asymmetric peaks", "peak asymmetry", "%", 1.0, 20.0, "max", "common practice"),
    Limit("clipped_fraction", "clipping", "clipped samples", "%", 100.0, 0.001, "max", "common practice"),
    Limit("half_cell_samples", "undersampled", "samples per half cell", "", 1.0, MIN_SAMPLES_PER_HALF_CELL, "min",
          "common practice: below about 3 samples per half cell a transition's time is quantised to a third "
          "of the shortest interval (readchan.frontend.sampling)"),
    Limit("pw50_samples", "undersampled", "samples per PW50", "", 1.0, MIN_SAMPLES_PER_PW50, "min",
          "common practice: below about 2 samples per PW50 a pulse's peak and width are guesses (readchan.frontend.sampling)"),
    Limit("hum_ratio", "mains hum", "hum / median peak", "%", 100.0, 0.2, "max",
          "derived: half of the 0.4 detection threshold (a baseline shifted further hides pulses)"),
)
"""The verdict thresholds (documented in the README's inspect section)."""


@dataclass(frozen=True)
class Check:
    """One verdict check: ``value`` against ``limit.limit``; ``headroom`` ≥ 1 passes.

    Headroom is value/limit for a lower limit and limit/value for an upper limit; for SNR it
    is the amplitude ratio 10^((SNR − limit)/20).
    """

    limit: Limit
    value: float
    headroom: float

    @property
    def ok(self) -> bool:
        return self.headroom >= 1.0


def format_check(c: Check) -> str:
    """``"SNR 32.1 dB (limit ≥ 20 dB, headroom ×4.0)"``."""
    lim = c.limit
    unit = f" {lim.unit}" if lim.unit and lim.unit != "%" else lim.unit
    sign = "≥" if lim.sense == "min" else "≤"
    head = "∞" if math.isinf(c.headroom) else f"{c.headroom:.2g}"
    return (f"{lim.quantity} {_num(c.value * lim.scale)}{unit} "
            f"(limit {sign} {_num(lim.limit * lim.scale)}{unit}, headroom ×{head})")


def verdict_text(checks: tuple[Check, ...]) -> str:
    """The verdict line of a read from its checks (see :class:`ReadReport`)."""
    if not checks:
        return "no checks apply"
    least = min(checks, key=lambda c: c.headroom)
    bad = [c for c in checks if not c.ok]
    if not bad:
        return f"ok; least headroom: {format_check(least)}"
    names = ", ".join(dict.fromkeys(c.limit.label for c in sorted(bad, key=lambda c: c.headroom)))
    return f"{names}; least headroom: {format_check(least)}"


def _num(v: float) -> str:
    if not math.isfinite(v):
        return str(v)
    a = abs(v)
    if a == 0:
        return "0"
    if a >= 100:
        return f"{v:.0f}"
    if a >= 10:
        return f"{v:.1f}"
    if a >= 0.01:
        return f"{v:.2f}"
    return f"{v:.2g}"


def _headroom(lim: Limit, v: float) -> float:
    if lim.name == "snr_db":
        return 10 ** ((v - lim.limit) / 20) if math.isfinite(v) else math.inf
    if lim.sense == "min":
        return v / lim.limit
    return lim.limit / v if v > 0 else math.inf


def read_checks(amp, noise, pulse, timing: Timing, rate_hz: float = math.nan) -> tuple[Check, ...]:
    half = 0.5 * float(np.median(timing.period_s)) * rate_hz if timing.period_s.size else None
    values = {
        "half_cell_samples": half,
        "pw50_samples": None if pulse is None else pulse.pw50_s * rate_hz,
        "snr_db": None if noise is None else noise.snr_db,
        "margin_min": timing.margin_min,
        "pw50_cell": None if pulse is None else pulse.pw50_cell,
        "speed_min_cm_s": timing.min_speed_cm_s,
        "speed_max_cm_s": timing.max_speed_cm_s,
        "speed_change_per_bit": timing.speed_change_per_bit,
        "asymmetry_abs_pct": None if amp is None else abs(amp.asymmetry_pct),
        "clipped_fraction": None if amp is None else amp.clipped_fraction,
        "hum_ratio": None if noise is None else noise.hum_ratio,
    }
    out = []
    for lim in LIMITS:
        v = values[lim.name]
        if v is None or (isinstance(v, float) and math.isnan(v)):
            continue
        out.append(Check(lim, float(v), float(_headroom(lim, float(v)))))
    return tuple(out)
