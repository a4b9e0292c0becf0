"""Front-end diagnostics: every read of a channel measured in physical units, and a verdict.

Decoding says *what* a card holds; this module says *how well* the front end delivered it:
amplitude, noise and hum, pulse width, swipe speed and its changes, timing margin, the
anomalies the decoder met, and which of these quantities has the least headroom.

Measurement signal
------------------
Detection runs on a signal low-passed to the pulse rate (:func:`readchan.channel.decode_channel`),
which narrows the noise band and widens the pulses.  The quantities below are measured instead
on the *wide-band* signal: the channel conditioned with the baseline high-pass only
(``highpass_hz``, 20 Hz by default, zero-phase), with the mains hum subtracted before it.  Its noise is the noise at the capture's full
bandwidth, which is how the synthesizer states its SNR (:class:`readchan.synth.Impairments`).
Peak values are that signal's samples at the detected peak positions (the detection filters
are zero-phase, so the positions carry over).

Definitions (each is also in the docstring of the field that holds it)
----------------------------------------------------------------------
* median |peak| ``median_peak``: median over the read's transitions of the wide-band signal at
  each transition, sign removed (capture units: full scale for audio, volts for tables).
* asymmetry ``asymmetry_pct``: 100·(P − N)/(P + N), P and N the medians of the positive and the
  negative peaks' magnitudes (the usual read-head asymmetry figure; common practice).
* noise RMS ``noise_rms``: plain RMS of the wide-band signal over the quiet samples (farther
  than 10 ms from every stretch of transitions, :func:`readchan.channel.quiet_mask`) that are
  left once isolated pulses and slow excursions are taken out (:func:`robust_noise`), raised to
  the quantisation noise step/√12 when it measures below it; SNR ``snr_db`` =
  20·log10(median |peak| / noise RMS).
* hum: fitted on the quiet samples and between the pulses (:func:`_fit_hum_wide`): fundamental
  ``hum_hz``, its nominal mains system ``mains_hz`` (50 or 60, the nearer), its peak amplitude
  ``hum_amplitude`` and ``hum_ratio`` = amplitude / median |peak|.
* DC offset ``dc_offset``: the median of the raw samples.  Baseline wander ``wander_pp``:
  peak-to-peak of what the baseline high-pass removes (raw − DC − wide-band signal), i.e. the
  content below ``highpass_hz``.
* clipping ``clipped_fraction``: fraction of the read's samples that sit, in runs of three or
  more, within 10⁻⁴ of the channel's span from its largest or smallest value (flat tops).
* PW50 ``pw50_s``: median full width at half of each pulse's peak, crossings found by linear
  interpolation, over the pulses whose two neighbouring intervals on each side are full cells
  (the clocking zeros, where intersymbol interference is least); ``pw50_cell`` = PW50 over the
  local bit period; ``pw50_m`` = PW50 times the local speed.
* resolution: mean |peak| of pulses with half-cell intervals on both sides over the mean |peak|
  of pulses with full-cell intervals on both sides.
* speed ``speed_cm_s`` = 2.54 / (density_bpi · period_s) for each bit, from the timing loop's
  bit period (:class:`readchan.linecode.f2f.BitStream`); acceleration ``accel_m_s2``: the slope of a
  straight line fitted to speed against time over a sliding window of bits;
  ``mean_accel_m_s2``: the slope of one line through the whole read.
  ``speed_change_per_bit`` = max |acceleration| · T / v: the largest fractional speed change
  from one bit to the next.
* normalised interval r = Δ/T (Δ an interval between transitions, T the local bit period),
  histogram over 0..2 in steps of 0.025 cell; decision margin |r − 0.75| / 0.25 per bit, as in
  :mod:`readchan.linecode.f2f`; its minimum and 1st percentile and where they fall.
* peak shift ``peak_shift_s``: how far intersymbol interference pushes a pulse that has a half
  cell on one side and a full cell on the other away from its near neighbour, estimated from the
  normalised intervals: half cells beside a full cell come out longer, full cells beside a half
  cell shorter, each by one shift (see :func:`_peak_shift`).

Verdict: every quantity with a limit in :data:`LIMITS` gets a headroom, the factor by which it
clears its limit (≥ 1 passes); the read's verdict names the failing quantities, and always the
one with the least headroom.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.interpolate import CubicSpline
from scipy.ndimage import median_filter

from readchan.io.capture import Capture, repair_outliers
from readchan.frontend.condition import ConditionSettings, HumFit, condition, fit_hum
from readchan.channel import ChannelResult, DecodeSettings, Read, between_pulses_mask, decode_channel, quiet_mask
from readchan.frontend.detect import FLAG_EXTRA, FLAG_MISSING, FLAG_WEAK, noise_rms
from readchan.frontend.detect import quantisation_step as grid_step
from readchan.formats.iso7811.framing import missing_end
from readchan.frontend.sampling import MIN_SAMPLES_PER_HALF_CELL, MIN_SAMPLES_PER_PW50
from readchan.linecode.f2f import BOUNDARY, FLAG_LONE_HALF, FLAG_LONG
from readchan.units import METRES_PER_INCH, speed_from_period_cm_s

__all__ = [
    "LIMITS", "Amplitude", "format_check", "noise_source_text", "robust_noise", "quantisation_step", "verdict_text", "Anomaly", "ChannelReport", "Check", "FrontEnd", "Limit", "Noise", "PulseShape",
    "ReadReport", "Timing", "inspect_capture", "inspect_channel",
]

GUARD_S = 0.01
"""Samples this close to a stretch of transitions are not used for noise and hum (seconds)."""

EDGE_S = 0.05
"""The hum is fitted on quiet samples at least this far from the capture's ends (seconds)."""

MIN_QUIET_S = 0.005
"""Least quiet time for a noise measurement; below it the noise comes from 1 ms blocks."""

HIST_EDGES = np.linspace(0.0, 2.0, 81)
"""Bin edges of the normalised-interval histogram, in bit cells."""

CLIP_TOL = 1e-4
CLIP_RUN = 3


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
        excursions were left out (:func:`robust_noise`), seconds; None with ``"blocks"``.
    noise_pulses_excluded : isolated pulses left out of the noise (card edges, strays).
    noise_slow_excluded_s : quiet time left out of the noise as slow content, seconds.
    hum_from : ``"quiet"`` or ``"quiet and between pulses"``: where the hum was fitted.
    quant_step : the converter's step (capture units) when the samples lie on a grid, else None.
    noise_floored : the noise spanned only a level or two of the converter, so its RMS on the
        grid misjudged it: the figure is instead sqrt(σ² + step²/12), σ the noise before the
        converter estimated from how the quiet samples fall on the levels
        (:func:`quantised_sigma`) and step/√12 the quantisation noise every pulse carries
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


@dataclass(frozen=True)
class Amplitude:
    """Pulse amplitudes of one read (capture units).

    Attributes
    ----------
    t_s : time of each transition, seconds.
    peak : |peak| of each transition on the wide-band signal.
    smooth : running median of ``peak`` over 31 transitions (amplitude along the swipe).
    median_peak, min_peak, max_peak : median, smallest and largest |peak|.
    positive_median, negative_median : medians of the positive and negative peaks' magnitudes.
    asymmetry_pct : 100·(P − N)/(P + N).
    clipped_fraction : fraction of the read's samples in flat tops at the channel's extremes.
    """

    t_s: np.ndarray
    peak: np.ndarray
    smooth: np.ndarray
    median_peak: float
    min_peak: float
    max_peak: float
    positive_median: float
    negative_median: float
    asymmetry_pct: float
    clipped_fraction: float


@dataclass(frozen=True)
class Noise:
    """Noise of one read: ``noise_rms`` (capture units, channel-wide), ``snr_db`` =
    20·log10(median |peak| / noise RMS), ``hum_ratio`` = hum amplitude / median |peak|."""

    noise_rms: float
    snr_db: float
    hum_ratio: float | None


@dataclass(frozen=True)
class PulseShape:
    """Pulse width of one read.

    Attributes
    ----------
    pw50_s : median width at half amplitude of the full-cell-spaced pulses, seconds.
    pw50_cell : PW50 over the local bit period (isolated-pulse estimate).
    width_cell : half-amplitude width of the mean clocking-zero pulse as measured, in cells,
        before the correction for its neighbours' tails.
    pw50_m : PW50 times the local speed (median), metres; None without a density.
    n_pulses : pulses measured.
    resolution : mean |peak| of half-cell-spaced pulses over full-cell-spaced ones; None
        when the read has no run of ones.
    """

    pw50_s: float
    pw50_cell: float
    width_cell: float
    pw50_m: float | None
    n_pulses: int
    resolution: float | None


@dataclass(frozen=True)
class Timing:
    """Timing of one read.

    Attributes
    ----------
    density_bpi : the density speeds are computed from; None when the track is unknown.
    bit_t_s : start time of each bit cell, seconds.
    period_s : the timing loop's bit period at each bit, seconds.
    speed_cm_s : 2.54 / (density · period) per bit, cm/s; None without a density.
    speed_fit_cm_s : speed from the sliding straight-line fit, cm/s; None without a density.
    accel_m_s2 : slope of the sliding fit, m/s²; None without a density.
    mean_speed_cm_s, min_speed_cm_s, max_speed_cm_s : mean of ``speed_cm_s``; extremes of
        ``speed_fit_cm_s``.
    mean_accel_m_s2 : slope of one straight line through speed against time, m/s².
    max_abs_accel_m_s2 : largest |accel_m_s2|.
    speed_change_per_bit : max over bits of |accel| · T / v (dimensionless).
    ratio_t_s, ratio : each interval's start time (s) and its normalised length r = Δ/T.
    hist_edges_cell, hist_counts : histogram of r (values clipped into 0..2).
    margin : decision margin per bit (0 on the boundary, 1 ideal).
    margin_min, margin_min_bit, margin_min_t_s : the worst bit's margin, index and time.
    margin_p1, margin_p1_bit, margin_p1_t_s : the 1st-percentile margin, and the bit at that
        rank with its time.
    peak_shift_s, peak_shift_cell : peak-shift estimate in seconds and in cells; None when
        the read lacks the patterns it needs.
    """

    density_bpi: float | None
    bit_t_s: np.ndarray
    period_s: np.ndarray
    speed_cm_s: np.ndarray | None
    speed_fit_cm_s: np.ndarray | None
    accel_m_s2: np.ndarray | None
    mean_speed_cm_s: float | None
    min_speed_cm_s: float | None
    max_speed_cm_s: float | None
    mean_accel_m_s2: float | None
    max_abs_accel_m_s2: float | None
    speed_change_per_bit: float | None
    ratio_t_s: np.ndarray
    ratio: np.ndarray
    hist_edges_cell: np.ndarray
    hist_counts: np.ndarray
    margin: np.ndarray
    margin_min: float
    margin_min_bit: int
    margin_min_t_s: float
    margin_p1: float
    margin_p1_bit: int
    margin_p1_t_s: float
    peak_shift_s: float | None
    peak_shift_cell: float | None


@dataclass(frozen=True)
class Anomaly:
    """Something the decoder met, tagged at its place in the capture.

    Attributes
    ----------
    kind : ``"polarity"`` (two transitions of the same polarity: one missing), ``"extra"``
        (a noise peak dropped), ``"weak"`` (a transition rescued below threshold),
        ``"lone-half"`` (a half cell with no second half), ``"long"`` (an interval over 1.6
        cells), ``"parity"``, ``"lrc"``, ``"no-end"`` (no end sentinel), ``"no-lrc"`` (the text ends in the
        end sentinel, the LRC character after it was not read), ``"corrected"``.
    t_s : time in seconds; sample : nearest sample index.
    bit : bit index (time order) or None; char : character index (the LRC character is
        ``len(text)``) or None.
    """

    kind: str
    t_s: float
    sample: int
    bit: int | None
    char: int | None


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


@dataclass(frozen=True)
class ReadReport:
    """Diagnostics of one read; ``amplitude``, ``noise`` and ``pulse`` are None for logic captures."""

    index: int
    read: Read
    amplitude: Amplitude | None
    noise: Noise | None
    pulse: PulseShape | None
    timing: Timing
    anomalies: tuple[Anomaly, ...]
    checks: tuple[Check, ...]

    @property
    def least(self) -> Check | None:
        """The check with the least headroom."""
        return min(self.checks, key=lambda c: c.headroom) if self.checks else None

    @property
    def failed(self) -> tuple[Check, ...]:
        return tuple(c for c in self.checks if not c.ok)

    @property
    def verdict(self) -> str:
        """One line: the failing quantities with their limits, and the least headroom."""
        return verdict_text(self.checks)

    def bit_char(self) -> np.ndarray:
        """Character index of each bit (time order), −1 outside the framed characters."""
        return _bit_char(self.read)


@dataclass(frozen=True)
class ChannelReport:
    """One channel's diagnostics: front end, reads, and the signals the plots draw.

    Attributes
    ----------
    source : capture path.
    front_end : channel-wide measurements.
    reads : one report per read.
    result : the decode result the reports are based on.
    wideband : the measurement signal (see the module docstring), or the raw samples for logic.
    """

    source: str
    front_end: FrontEnd
    reads: tuple[ReadReport, ...]
    result: ChannelResult
    wideband: np.ndarray


# ---------------------------------------------------------------------------------------------
# public entry points


def format_check(c: Check) -> str:
    """``"SNR 32.1 dB (limit ≥ 20 dB, headroom ×4.0)"``."""
    lim = c.limit
    unit = f" {lim.unit}" if lim.unit and lim.unit != "%" else lim.unit
    sign = "≥" if lim.sense == "min" else "≤"
    head = "∞" if math.isinf(c.headroom) else f"{c.headroom:.2g}"
    return (f"{lim.quantity} {_num(c.value * lim.scale)}{unit} "
            f"(limit {sign} {_num(lim.limit * lim.scale)}{unit}, headroom ×{head})")


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


def inspect_channel(x: np.ndarray, rate_hz: float, result: ChannelResult, *, highpass_hz: float | None = 20.0,
                    units: str = "FS", source: str = "") -> ChannelReport:
    """Measure the front end and every read of one channel.

    Parameters
    ----------
    x : the channel's raw samples (capture units).
    rate_hz : sample rate in Hz.
    result : the channel's decode result (:func:`readchan.channel.decode_channel` on ``x``).
    highpass_hz : corner of the baseline high-pass of the measurement signal, Hz (None: DC only).
    units : the capture's units, for reports.
    source : the capture's path, for reports.

    Returns
    -------
    ChannelReport
    """
    x = np.asarray(x, dtype=float)
    rate_hz = float(rate_hz)
    # Quiet: away from the reads and from recordings that gave none.  Stretches of transitions
    # that are not F2F-regular (noise detections at a low SNR) stay in: their isolated pulses,
    # if any, are left out by robust_noise.
    segs = [r.segment for r in result.reads]
    if result.status is not None:
        segs += [k.segment for k in result.status.skipped if k.stage != "irregular"]
    else:
        segs += list(result.segments)
    quiet = quiet_mask(x.size, rate_hz, segs, guard_s=GUARD_S)
    if result.kind == "logic":
        fe = FrontEnd(result.channel, "logic", units, rate_hz, x.size / rate_hz, float(np.median(x)), None,
                      None, None, None, None, "none", float(quiet.sum()) / rate_hz, len(result.transitions))
        w = x
    else:
        fe, w = _front_end(x, rate_hz, result, quiet, highpass_hz, units)
    clipped = _clipped(x) if result.kind == "head" else None
    reads = tuple(_read_report(n, r, w, rate_hz, fe, clipped) for n, r in enumerate(result.reads))
    return ChannelReport(source, fe, reads, result, w)


def inspect_capture(cap: Capture, settings: DecodeSettings = DecodeSettings(),
                    channels: list[int] | None = None) -> list[ChannelReport]:
    """Decode the chosen ``channels`` (default all) of ``cap`` and inspect each."""
    chans = range(cap.n_channels) if channels is None else channels
    hp = settings.condition.highpass_hz
    out = []
    for c in chans:
        x = np.ascontiguousarray(cap.channel(c))      # a column of a wide capture is strided
        res = decode_channel(x, cap.rate_hz, settings, channel=c, n_channels=cap.n_channels, source=cap.source)
        if res.outliers.size:           # measure what was decoded: the channel with its faults repaired
            x = repair_outliers(x)[0]
        out.append(inspect_channel(x, cap.rate_hz, res, highpass_hz=hp, units=cap.units, source=cap.source))
    return out


# ---------------------------------------------------------------------------------------------
# channel-wide measurements


def _front_end(x, rate_hz, result, quiet, highpass_hz, units):
    cs = ConditionSettings(highpass_hz=highpass_hz or None)
    cond = condition(x, rate_hz, cs, channel=result.channel)
    tr = result.transitions
    # Hum is fitted wherever the baseline can be seen: the quiet stretches and, inside the
    # swipes, the middle of the gaps between pulses (see _fit_hum_wide).
    between = between_pulses_mask(x.size, rate_hz, tr, guard=0.4) if len(tr) >= 2 else np.ones(x.size, bool)
    hum, hum_from = _fit_hum_wide(x, cond, rate_hz, quiet, between, highpass_hz, result.channel)
    if hum is not None:
        cond = condition(x - hum.waveform(x.size, rate_hz), rate_hz, cs, channel=result.channel)
    w = cond.signal
    wander = float(np.ptp((x - cond.dc_offset) - w)) if highpass_hz else 0.0
    if hum is not None:
        wander = float(np.ptp((x - hum.waveform(x.size, rate_hz) - cond.dc_offset) - w))
    quiet_s = float(quiet.sum()) / rate_hz
    cell_s = float(np.median(np.diff(tr.times_s))) if len(tr) >= 2 else 1e-3
    step = quantisation_step(x)
    est = robust_noise(w, rate_hz, quiet, cell_s=cell_s, step=step) if quiet_s >= MIN_QUIET_S else None
    if est is not None and est.used_s >= MIN_QUIET_S:
        noise, how = est.rms, "quiet"
    else:
        noise, how = noise_rms(w, rate_hz), "blocks"
        est = None
    floored = False
    if step is not None and noise < 0.6 * step and (hum is None or hum.amplitude < step):
        # the noise spans a level or two: its RMS on the grid misjudges it; estimate the noise
        # before the converter from how the samples fall on the levels, and add step/√12
        sigma = None if est is None else quantised_sigma(x, est.mask, step, rate_hz)
        total = math.hypot(sigma, step / math.sqrt(12.0)) if sigma is not None else step / math.sqrt(12.0)
        if total > noise:
            noise, floored = total, True
    mains = None if hum is None else (50.0 if abs(hum.freq_hz - 50.0) < abs(hum.freq_hz - 60.0) else 60.0)
    fe = FrontEnd(result.channel, "head", units, rate_hz, x.size / rate_hz, cond.dc_offset, wander,
                  None if hum is None else hum.freq_hz, mains, None if hum is None else hum.amplitude,
                  noise, how, quiet_s, len(tr),
                  noise_used_s=None if est is None else est.used_s,
                  noise_pulses_excluded=0 if est is None else est.pulses_excluded,
                  noise_slow_excluded_s=0.0 if est is None else est.slow_excluded_s,
                  hum_from=hum_from, quant_step=step, noise_floored=floored)
    return fe, np.ascontiguousarray(w)


QUANT_BLOCK_S = 0.004
"""Stretch of quiet samples over which the baseline is taken as constant between two levels."""


def quantised_sigma(x: np.ndarray, use: np.ndarray, step: float, rate_hz: float) -> float | None:
    """Standard deviation of the noise before a converter of step ``step``, from the raw quiet
    samples ``x[use]`` that sit on its levels: maximum likelihood of Gaussian noise of σ about a
    baseline μ (constant within each ``QUANT_BLOCK_S`` block, anywhere between two levels),
    rounded to the nearest level, P(level k) = Φ((k + ½ − μ)/σ) − Φ((k − ½ − μ)/σ) (the
    quantised-Gaussian model, Widrow & Kollár, *Quantization Noise*, 2008, ch. 4).  σ is searched
    on a grid of 0.02–2 steps, μ per block on 1/200-step spacing.  None with too few samples."""
    from scipy.special import ndtr

    idx = np.flatnonzero(use)
    if idx.size < 256:
        return None
    block = max(16, int(QUANT_BLOCK_S * rate_hz))
    # blocks of consecutive used samples
    brk = np.flatnonzero(np.diff(idx) > 1) + 1
    runs = np.split(idx, brk)
    counts = []
    origin = float(np.median(x[idx]))          # a level: the grid need not pass through zero
    for run in runs:
        for a in range(0, run.size - block + 1, block):
            lv = np.round((x[run[a:a + block]] - origin) / step).astype(np.int64)
            d = np.clip(lv - int(np.median(lv)), -4, 4)
            counts.append(np.bincount(d + 4, minlength=9))
    if len(counts) < 4:
        return None
    n = np.asarray(counts, float)                                   # (blocks, 9 levels)
    k = np.arange(-4, 5, dtype=float)
    s_grid = np.geomspace(0.02, 2.0, 100)
    mu = np.linspace(-0.5, 0.5, 201)
    z_hi = (k[None, None, :] + 0.5 - mu[None, :, None]) / s_grid[:, None, None]
    z_lo = (k[None, None, :] - 0.5 - mu[None, :, None]) / s_grid[:, None, None]
    p = np.clip(ndtr(z_hi) - ndtr(z_lo), 1e-12, 1.0)               # (σ, μ, level)
    ll = np.einsum("bk,smk->sbm", n, np.log(p))                    # (σ, block, μ)
    total = ll.max(axis=2).sum(axis=1)
    return float(s_grid[int(np.argmax(total))] * step)


def quantisation_step(x: np.ndarray) -> float | None:
    """The converter's step when the samples lie on a uniform grid (a 16-bit WAV, an 8-bit
    scope export), else None; the test is :func:`readchan.frontend.detect.quantisation_step`'s."""
    return grid_step(x) or None


@dataclass(frozen=True)
class NoiseEstimate:
    """What :func:`robust_noise` measured.

    Attributes
    ----------
    rms : noise RMS (capture units).
    used_s : time the RMS was taken over, seconds.
    pulses_excluded : isolated pulses (card edges, stray detections) left out.
    slow_excluded_s : time left out for slow excursions (AC-coupling recovery, residual
        wander) and unsteady blocks (transients), seconds.
    mask : the samples the RMS was taken over.
    """

    rms: float
    used_s: float
    pulses_excluded: int
    slow_excluded_s: float
    mask: np.ndarray | None = None


PULSE_SIGMA = 5.0
"""A quiet sample beyond this many robust σ is part of a pulse, not noise (Gaussian noise
exceeds 5σ in 6·10⁻⁷ of samples)."""

SLOW_SIGMA = 4.0
"""A smoothed quiet sample beyond this many robust σ of the smoothed noise is slow content."""

PULSE_REACH_CELLS = 4.0
"""Samples within this many typical intervals of an isolated pulse are left out of the noise."""


def robust_noise(w: np.ndarray, rate_hz: float, quiet: np.ndarray, *, cell_s: float = 1e-3,
                 step: float | None = None) -> NoiseEstimate | None:
    """Noise RMS on the quiet samples of ``w`` that isolated pulses and slow content cannot move.

    1. A robust scale σ₀ = 1.4826·MAD of the quiet samples (the normal-consistent median
       absolute deviation; Rousseeuw & Croux, JASA 88, 1993): a few pulses do not move it.
       On a converter grid of ``step`` it is at least step/2 (quantised noise a level or two
       wide has a MAD of 0 or one step).
    2. Samples within ``PULSE_REACH_CELLS`` typical intervals (``cell_s``) of a quiet sample
       beyond ``PULSE_SIGMA``·σ₀ are left out (card-edge pulses, stray detections).
    3. The rest is smoothed by a moving average over max(1 ms, 4 intervals) of the samples
       kept; where the smoothed signal leaves ±``SLOW_SIGMA`` robust σ of itself (the σ widened
       by 1/√(fraction kept) next to a stretch left out) (an AC-coupling recovery after a
       pulse, wander the baseline high-pass did not take), samples are left out too.
    4. What is left is cut into blocks of max(2 ms, 8 intervals), each with a quadratic taken
       out (slow content within a block), and blocks whose RMS exceeds 1.5× the median
       block's are left out (:func:`_detrended_rms`: transients, filter end effects).
    5. The noise is the plain RMS of the residuals (degrees of freedom counted), so every kind
       of noise counts at its full power (quantisation noise included: it is not Gaussian,
       and a MAD would misjudge it).

    Returns None when fewer than 64 samples are left.
    """
    from scipy.ndimage import binary_dilation, uniform_filter1d

    q = np.asarray(quiet, bool)
    if q.sum() < 64:
        return None
    vals = w[q]
    s0 = 1.4826 * float(np.median(np.abs(vals - np.median(vals))))
    if step:
        s0 = max(s0, 0.5 * step)
    if not s0 > 0:
        s0 = float(np.std(vals))
    if not s0 > 0:
        return NoiseEstimate(0.0, float(q.sum()) / rate_hz, 0, 0.0)
    reach = max(1, int(PULSE_REACH_CELLS * cell_s * rate_hz))
    hot = q & (np.abs(w) > PULSE_SIGMA * s0)
    n_pulses = 0
    if hot.any():
        # one pulse per cluster of hot samples closer than the reach
        hi = np.flatnonzero(hot)
        n_pulses = int(1 + np.count_nonzero(np.diff(hi) > reach))
        hot = binary_dilation(hot, np.ones(2 * reach + 1, bool))
    keep = q & ~hot
    m = max(8, int(max(1e-3, 4 * cell_s) * rate_hz))
    smooth = uniform_filter1d(np.where(keep, w, 0.0), m, mode="constant")
    cnt = uniform_filter1d(keep.astype(float), m, mode="constant")
    full = keep & (cnt > 0.999)
    slow = np.zeros_like(keep)
    if full.sum() >= 64:
        sm = smooth[full]
        s1 = 1.4826 * float(np.median(np.abs(sm - np.median(sm))))
        if step:
            s1 = max(s1, step / math.sqrt(12.0 * m))
        if s1 > 0:
            # next to a left-out stretch the window is partly empty: test the mean of what is
            # kept, against a scale widened by 1/√(fraction kept)
            part = keep & (cnt >= 0.5)
            with np.errstate(divide="ignore", invalid="ignore"):
                dev = np.abs(smooth / np.maximum(cnt, 1e-9) - np.median(sm)) * np.sqrt(np.maximum(cnt, 1e-9))
            slow = part & (dev > SLOW_SIGMA * s1)
            if slow.any():
                slow = binary_dilation(slow, np.ones(2 * m + 1, bool)) & keep
    use = keep & ~slow
    if use.sum() < 64:
        return None
    rms, use, unsteady = _detrended_rms(w, use, max(int(0.002 * rate_hz), int(8 * cell_s * rate_hz), 32))
    return NoiseEstimate(rms, float(use.sum()) / rate_hz, n_pulses, float((slow.sum() + unsteady) / rate_hz), use)


UNSTEADY_RATIO = 1.5
"""A block whose RMS exceeds this × the median block RMS is not steady noise."""


DETREND_ORDER = 2
"""Degree of the polynomial taken out of each noise block (slow content within a block)."""


def _detrended_rms(w: np.ndarray, use: np.ndarray, block: int) -> tuple[float, np.ndarray, int]:
    """Noise RMS over blocks of ``block`` consecutive used samples, each with its own
    least-squares polynomial of degree ``DETREND_ORDER`` taken out (what is slow within a few
    bit cells — an AC-coupling recovery, a hum residue — is not noise), the residual sum of
    squares divided by N − (degree + 1) per block (least squares; common practice).  Blocks
    whose residual RMS exceeds ``UNSTEADY_RATIO`` × the median block's are left out (a
    transient, a filter's end effect): with blocks of at least 8 bit cells, steady noise's
    block RMS varies by about a tenth.  Returns (RMS, mask of the samples used, samples left
    out)."""
    idx = np.flatnonzero(use)
    runs = np.split(idx, np.flatnonzero(np.diff(idx) > 1) + 1)
    blocks = [r[a:a + block] for r in runs for a in range(0, r.size, block)]
    p = DETREND_ORDER + 1
    blocks = [b for b in blocks if b.size >= max(block // 2, 4 * p)]
    if not blocks:
        u = w[idx]
        return float(np.sqrt(np.mean((u - u.mean()) ** 2))), use, 0
    rss = np.empty(len(blocks))
    dof = np.empty(len(blocks))
    for i, b in enumerate(blocks):
        x = np.linspace(-1.0, 1.0, b.size)
        A = np.vander(x, p)
        y = w[b]
        coef, *_ = np.linalg.lstsq(A, y, rcond=None)
        r = y - A @ coef
        rss[i], dof[i] = float(r @ r), b.size - p
    ms = rss / dof
    good = np.ones(len(blocks), bool)
    if len(blocks) >= 3:
        good = ms <= UNSTEADY_RATIO ** 2 * np.median(ms)
    out = np.zeros_like(use)
    for i in np.flatnonzero(good):
        out[blocks[i]] = True
    return float(np.sqrt(rss[good].sum() / dof[good].sum())), out, int(use.sum() - out.sum())


def _hp_gain(f_hz: np.ndarray, corner_hz: float | None) -> np.ndarray:
    """Gain of the zero-phase baseline high-pass (2nd-order Butterworth run both ways):
    1 − 1/(1 + (f/fc)⁴) = 1/(1 + (fc/f)⁴) (Butterworth magnitude |H|² = 1/(1 + (f/fc)^2n))."""
    f = np.asarray(f_hz, float)
    return np.ones_like(f) if not corner_hz else 1.0 / (1.0 + (corner_hz / f) ** 4)


def _fit_hum_wide(x, cond, rate_hz, quiet, between, highpass_hz, channel):
    """Mains hum fitted on every sample where the baseline shows: the quiet stretches, and the
    middle of the gaps between pulses (adjacent pulses alternate in sign, so their tails
    largely cancel there).  Returns (HumFit or None, where it was fitted).

    Two passes: the first on the high-passed signal away from the capture's ends (the
    zero-phase high-pass rings there while hum is in the signal), its coefficients divided by
    the high-pass gain at each harmonic (:func:`_hp_gain`); the second, a correction fitted on
    the signal high-passed after the first hum was taken out (no ringing left, so every sample
    counts), with the frequency refined between grid points by a parabola through the
    residuals (the 0.02 Hz grid alone leaves a phase drift that reads as noise).
    """
    n = x.size
    edge = int(min(EDGE_S, 0.25 * n / rate_hz) * rate_hz)
    where = quiet | between
    n_quiet = int(quiet.sum())
    inner = where.copy()
    inner[:edge] = False
    inner[n - edge:] = False
    level = 0.02 if n_quiet >= 3 * rate_hz / 50.0 else 0.05
    first = fit_hum(cond.signal, rate_hz, inner if inner.sum() >= 0.5 * where.sum() else where, min_level=level)
    if first is None:
        return None, None
    hum_from = "quiet" if int((where & ~quiet).sum()) < 0.1 * int(where.sum()) else "quiet and between pulses"
    hum = _with_gain(first, 1.0 / _hp_gain(_harmonic_hz(first.freq_hz), highpass_hz))
    cs = ConditionSettings(highpass_hz=highpass_hz or None)
    idx = np.flatnonzero(where)
    idx = idx[:: max(1, idx.size // 20000)]
    for _ in range(HUM_PASSES):
        # high-pass with the hum taken out (no ringing), then the hum put back as the
        # high-pass passes a steady sinusoid: the high-passed capture without the end ringing
        y = condition(x - hum.waveform(n, rate_hz), rate_hz, cs, channel=channel).signal
        g = _hp_gain(_harmonic_hz(hum.freq_hz), highpass_hz)
        target = y[idx] + _with_gain(hum, g).waveform(n, rate_hz)[idx]
        hum = _refine_hum(idx / rate_hz, target - target.mean(), hum.freq_hz, highpass_hz)
    return hum, hum_from


HUM_PASSES = 2
"""Passes of the hum refinement (the second changes the frequency by well under 0.01 Hz)."""


def _harmonic_hz(f_hz: float) -> np.ndarray:
    """Frequencies of the hum basis columns (cos, sin for harmonics 1..3)."""
    return f_hz * np.repeat([1.0, 2.0, 3.0], 2)


def _with_gain(h: HumFit, gain: np.ndarray) -> HumFit:
    c = h.coef * gain
    return HumFit(h.freq_hz, float(math.hypot(c[0], c[1])), c, h.residual_rms)


def _refine_hum(t: np.ndarray, target: np.ndarray, f0: float, highpass_hz) -> HumFit:
    """Least-squares hum (fundamental and harmonics 2, 3) on the high-passed samples
    ``target`` at times ``t``, the frequency searched on a 0.01 Hz grid within ±0.1 Hz of
    ``f0`` and then refined to the vertex of the parabola through the three best residuals;
    the coefficients are divided by the high-pass gain (:func:`_hp_gain`)."""
    from readchan.frontend.condition import _hum_basis

    def rss(f):
        A = _hum_basis(t, f)
        coef, *_ = np.linalg.lstsq(A, target, rcond=None)
        return float(np.sum((target - A @ coef) ** 2)), coef

    df = 0.01
    grid = f0 + df * np.arange(-10, 11)
    res = np.array([rss(f)[0] for f in grid])
    k = int(np.clip(np.argmin(res), 1, grid.size - 2))
    rm, r0, rp = res[k - 1:k + 2]
    den = rm - 2 * r0 + rp
    f = float(grid[k] + (0.5 * df * (rm - rp) / den if den > 0 else 0.0))
    r, coef = rss(f)
    if r > r0:
        f, (r, coef) = float(grid[k]), rss(float(grid[k]))
    sigma = math.sqrt(r / max(t.size - 6, 1))
    return _with_gain(HumFit(f, 0.0, coef, sigma), 1.0 / _hp_gain(_harmonic_hz(f), highpass_hz))


def _clipped(x: np.ndarray) -> np.ndarray:
    """Per sample: True inside a run of ≥ CLIP_RUN samples within CLIP_TOL·span of an extreme."""
    hi, lo = float(x.max()), float(x.min())
    tol = CLIP_TOL * (hi - lo)
    if not tol > 0:
        return np.zeros(x.size, bool)
    out = np.zeros(x.size, bool)
    for at in (np.abs(x - hi) <= tol, np.abs(x - lo) <= tol):
        d = np.diff(np.concatenate(([0], at.view(np.int8), [0])))
        starts, stops = np.flatnonzero(d == 1), np.flatnonzero(d == -1)
        for a, b in zip(starts, stops):
            if b - a >= CLIP_RUN:
                out[a:b] = True
    return out


# ---------------------------------------------------------------------------------------------
# per read


def _read_report(n: int, r: Read, w: np.ndarray, rate_hz: float, fe: FrontEnd, clipped) -> ReadReport:
    tr, bs = r.transitions, r.bits
    timing = _timing(r)
    amp = noise = pulse = None
    if fe.kind == "head" and len(tr):
        amp = _amplitude(tr, w, rate_hz, r, clipped)
        snr = 20 * math.log10(amp.median_peak / fe.noise_rms) if fe.noise_rms and amp.median_peak > 0 else math.inf
        hum_ratio = None if fe.hum_amplitude is None or not amp.median_peak > 0 else fe.hum_amplitude / amp.median_peak
        noise = Noise(float(fe.noise_rms), float(snr), hum_ratio)
        pulse = _pulse_shape(tr, bs, w, rate_hz, timing, r)
    anomalies = _anomalies(r, rate_hz)
    checks = _checks(amp, noise, pulse, timing, rate_hz)
    return ReadReport(n, r, amp, noise, pulse, timing, anomalies, checks)


def _amplitude(tr, w, rate_hz, r: Read, clipped) -> Amplitude:
    idx = np.clip(tr.index, 0, w.size - 1)
    sgn = np.sign(tr.amplitude)
    peak = np.abs(w[idx])
    smooth = median_filter(peak, size=min(31, peak.size), mode="nearest") if peak.size else peak
    pos = np.abs(w[idx[sgn > 0]])
    neg = np.abs(w[idx[sgn < 0]])
    p = float(np.median(pos)) if pos.size else 0.0
    q = float(np.median(neg)) if neg.size else 0.0
    asym = 100.0 * (p - q) / (p + q) if p + q > 0 else 0.0
    a = max(0, int(r.start_s * rate_hz))
    b = min(w.size, int(r.end_s * rate_hz) + 1)
    clip = float(np.mean(clipped[a:b])) if clipped is not None and b > a else 0.0
    return Amplitude(tr.times_s.copy(), peak, smooth, float(np.median(peak)), float(peak.min()), float(peak.max()),
                     p, q, float(asym), clip)


def _full_cell_pulses(ratio: np.ndarray) -> np.ndarray:
    """Transition indices whose two intervals on each side are full cells (r ≥ 0.75)."""
    full = ratio >= BOUNDARY
    n_tr = ratio.size + 1
    j = np.arange(2, n_tr - 2)
    ok = full[j - 2] & full[j - 1] & full[j] & full[j + 1]
    return j[ok]


def _half_cell_pulses(ratio: np.ndarray) -> np.ndarray:
    """Transition indices with half-cell intervals on both sides."""
    half = ratio < BOUNDARY
    j = np.arange(1, ratio.size)
    return j[half[j - 1] & half[j]]


PULSE_GRID = np.linspace(-0.5, 0.5, 201)
"""Where pulses are resampled for PW50, in bit cells from the peak."""


def _half_width(x: np.ndarray, y: np.ndarray) -> float:
    """Full width at half of the peak of ``y(x)`` (peak near the middle), by linear
    interpolation between the grid points that straddle half the peak; NaN when unclear."""
    k0 = int(np.argmax(y))
    top = y[k0]
    if not top > 0:
        return math.nan
    half = 0.5 * top
    left = np.flatnonzero(y[:k0] < half)
    right = np.flatnonzero(y[k0 + 1:] < half)
    if left.size == 0 or right.size == 0:
        return math.nan
    i = left[-1]                                   # y[i] < half <= y[i+1]
    xl = x[i] + (half - y[i]) / (y[i + 1] - y[i]) * (x[i + 1] - x[i])
    k = k0 + 1 + right[0]                          # y[k] < half <= y[k-1]
    xr = x[k - 1] + (y[k - 1] - half) / (y[k - 1] - y[k]) * (x[k] - x[k - 1])
    return float(xr - xl)


def _lorentzian_train_width(pw50_cell: np.ndarray) -> np.ndarray:
    """Half-amplitude width (cells) of the middle pulse of an endless train of Lorentzian
    pulses of alternating sign one cell apart (the clocking zeros), for isolated-pulse widths
    ``pw50_cell``: the neighbours' tails narrow it (by 4 % at 0.3 cell, 12 % at 0.5 cell)."""
    x = np.linspace(-0.5, 0.5, 2001)
    k = np.arange(-40, 41)
    out = np.empty(pw50_cell.size)
    for i, p in enumerate(pw50_cell):
        y = np.sum(((-1.0) ** k)[:, None] / (1.0 + (2.0 * (x[None, :] - k[:, None]) / p) ** 2), axis=0)
        out[i] = _half_width(x, y)
    return out


_TRAIN_PW50 = np.linspace(0.02, 1.0, 50)
_TRAIN_WIDTH = _lorentzian_train_width(_TRAIN_PW50)


def isolated_pw50_cell(width_cell: float) -> float:
    """Isolated-pulse PW50 (cells) whose Lorentzian clocking-zero train has half-amplitude width
    ``width_cell`` (the inverse of :func:`_lorentzian_train_width`; Lorentzian pulse: the
    standard approximation).  Widths beyond the table's reach (1 cell) are returned as they are."""
    if not width_cell <= _TRAIN_WIDTH[-1]:
        return float(width_cell)
    return float(np.interp(width_cell, _TRAIN_WIDTH, _TRAIN_PW50))


MIN_CLOCKING_PULSES = 64
"""PW50 uses only the clocking zeros' pulses when there are at least this many (tracks 1 and 3);
else every pulse with full cells on both sides (track 2 has about 35 clocking zeros)."""

MAX_PW50_PULSES = 400
"""At most this many pulses (evenly spread) go into the mean pulse."""


def _mean_pulse(spline, t_pk: np.ndarray, per: np.ndarray, sign: np.ndarray, rate_hz: float,
                iterations: int = 3) -> np.ndarray:
    """Mean of the pulses resampled on ``PULSE_GRID`` (cells) around their peaks, each first
    re-aligned to the mean by least squares (a Gauss–Newton step per iteration on the model
    pulse_i ≈ a_i·m(x − δ_i), over the middle ±0.35 cell), so that the detector's timing jitter
    does not widen the mean."""
    shift = np.zeros(t_pk.size)
    core = np.abs(PULSE_GRID) <= 0.35
    dx = PULSE_GRID[1] - PULSE_GRID[0]
    for it in range(iterations + 1):
        tt = (t_pk + shift * per)[:, None] + PULSE_GRID[None, :] * per[:, None]
        pulses = spline(tt * rate_hz) * sign[:, None]
        m = pulses.mean(axis=0)
        if it == iterations:
            return m
        dm = np.gradient(m, dx)
        mc, dmc, pc = m[core], dm[core], pulses[:, core]
        a = pc @ mc / (mc @ mc)
        ok = a > 0.2
        d = np.zeros(t_pk.size)
        d[ok] = -(pc[ok] @ dmc) / (a[ok] * (dmc @ dmc))     # P ≈ a·m − a·δ·m'
        shift = np.clip(shift + d, -0.15, 0.15)
    return m


def _pulse_shape(tr, bs, w, rate_hz, timing: Timing, r: Read) -> PulseShape | None:
    """PW50 from the mean of the full-cell-spaced pulses (see :func:`_mean_pulse`), each
    resampled from a cubic spline of the wide-band signal on a grid in cells around its peak
    and sign-corrected: the mean keeps the shape and averages the noise down, so noise does not
    narrow the width.  The width of that mean is then corrected for its neighbours' tails
    (:func:`isolated_pw50_cell`)."""
    ratio = bs.ratio
    if ratio.size < 8:
        return None
    cand = _full_cell_pulses(ratio)
    # prefer the clocking zeros (outside the framed characters) when there are enough
    bi = r.frame.bit_index
    lo, hi = int(bi.min()), int(bi.max())
    bit_of = np.searchsorted(bs.first_transition, cand, side="right") - 1
    outside = (bit_of < lo) | (bit_of > hi)
    if outside.sum() >= MIN_CLOCKING_PULSES:
        cand, bit_of = cand[outside], bit_of[outside]
    if cand.size > MAX_PW50_PULSES:
        pick = np.linspace(0, cand.size - 1, MAX_PW50_PULSES).round().astype(int)
        cand, bit_of = cand[pick], bit_of[pick]
    per = bs.period_s[np.clip(bit_of, 0, bs.period_s.size - 1)]
    t_pk = tr.times_s[cand]
    inside = ((t_pk - 0.7 * per) * rate_hz > 1) & ((t_pk + 0.7 * per) * rate_hz < w.size - 2)
    if not inside.any():
        return None
    cand, per, t_pk = cand[inside], per[inside], t_pk[inside]
    a = max(0, int((t_pk.min() - per.max()) * rate_hz) - 4)
    b = min(w.size, int((t_pk.max() + per.max()) * rate_hz) + 5)
    spline = CubicSpline(np.arange(a, b), w[a:b])
    mean = _mean_pulse(spline, t_pk, per, np.sign(tr.amplitude[cand]), rate_hz)
    measured = _half_width(PULSE_GRID, mean)
    if not math.isfinite(measured):
        return None
    pw50_cell = isolated_pw50_cell(measured)
    t_cell = float(np.median(per))
    pw50_m = None if timing.density_bpi is None else pw50_cell * METRES_PER_INCH / timing.density_bpi
    # resolution: half-cell-spaced over full-cell-spaced pulse amplitude
    halfs = _half_cell_pulses(ratio)
    fulls = _full_cell_pulses(ratio)
    res = None
    if halfs.size and fulls.size:
        amp = np.abs(w[np.clip(tr.index, 0, w.size - 1)])
        res = float(np.mean(amp[halfs]) / np.mean(amp[fulls]))
    return PulseShape(pw50_cell * t_cell, pw50_cell, measured, pw50_m, int(cand.size), res)


def _sliding_slope(t: np.ndarray, v: np.ndarray, half: int) -> tuple[np.ndarray, np.ndarray]:
    """Least-squares line through (t, v) over the window of ±``half`` points around each point:
    (fitted value, slope) per point; windows shrink at the ends.  Cumulative sums, no loop."""
    n = t.size
    t0 = t - t.mean()
    c = [np.concatenate(([0.0], np.cumsum(a))) for a in (np.ones(n), t0, v, t0 * t0, t0 * v)]
    i = np.arange(n)
    a = np.clip(i - half, 0, n)
    b = np.clip(i + half + 1, 0, n)
    s0, st, sv, stt, stv = (cc[b] - cc[a] for cc in c)
    den = s0 * stt - st * st
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = np.where(den > 0, (s0 * stv - st * sv) / den, 0.0)
    fit = sv / s0 + slope * (t0 - st / s0)
    return fit, slope


def _timing(r: Read) -> Timing:
    bs = r.bits
    t = bs.start_s
    per = bs.period_s
    n = t.size
    density = r.track.density_bpi if r.track is not None else None
    speed = fit = accel = None
    mean_v = vmin = vmax = mean_a = max_a = change = None
    if density is not None and n >= 2:
        speed = speed_from_period_cm_s(per, density)
        half = int(max(8, min(n // 16, 200)))
        fit, slope = _sliding_slope(t, speed, half)
        accel = slope / 100.0
        mean_v = float(np.mean(speed))
        vmin, vmax = float(fit.min()), float(fit.max())
        mean_a = float(np.polyfit(t - t.mean(), speed, 1)[0] / 100.0)
        max_a = float(np.max(np.abs(accel)))
        change = float(np.max(np.abs(accel) * 100.0 * per / fit))
    tr_t = r.transitions.times_s
    ratio = bs.ratio
    ratio_t = tr_t[:ratio.size]
    counts, _ = np.histogram(np.clip(ratio, HIST_EDGES[0], HIST_EDGES[-1] - 1e-9), HIST_EDGES)
    m = bs.margin
    k_min = int(np.argmin(m)) if n else 0
    order = np.argsort(m, kind="stable")
    k_p1 = int(order[int(0.01 * (n - 1))]) if n else 0
    shift = _peak_shift(ratio)
    t_period = float(np.median(per)) if n else math.nan
    return Timing(density, t.copy(), per.copy(), speed, fit, accel, mean_v, vmin, vmax, mean_a, max_a, change,
                  ratio_t.copy(), ratio.copy(), HIST_EDGES.copy(), counts,
                  m.copy(), float(m[k_min]) if n else math.nan, k_min, float(t[k_min]) if n else math.nan,
                  float(np.percentile(m, 1)) if n else math.nan, k_p1, float(t[k_p1]) if n else math.nan,
                  None if shift is None else shift * t_period, shift)


def _peak_shift(ratio: np.ndarray, min_count: int = 4) -> float | None:
    """Peak shift in cells from the normalised intervals.

    A transition with a half cell on one side and a full cell on the other is pushed away from
    its near neighbour by the shift δ (intersymbol interference of pulses of alternating
    polarity).  So a half cell with a full cell on one side and a half cell on the other is
    ½ + δ long, against ½ for a half cell between half cells; and a full cell with a half cell on
    one side and a full cell on the other is 1 − δ long, against 1 between full cells.  δ is the
    mean of the two differences that the read's patterns allow (None when neither does).
    """
    if ratio.size < 3:
        return None
    half = ratio < BOUNDARY
    mid = np.arange(1, ratio.size - 1)
    nb_half = half[mid - 1].astype(int) + half[mid + 1].astype(int)
    r = ratio[mid]
    est = []
    h1 = half[mid] & (nb_half == 1)
    h2 = half[mid] & (nb_half == 2)
    if h1.sum() >= min_count and h2.sum() >= min_count:
        est.append(float(np.median(r[h1]) - np.median(r[h2])))
    f1 = ~half[mid] & (nb_half == 1)
    f0 = ~half[mid] & (nb_half == 0)
    if f1.sum() >= min_count and f0.sum() >= min_count:
        est.append(float(np.median(r[f0]) - np.median(r[f1])))
    return float(np.mean(est)) if est else None


def _bit_char(r: Read) -> np.ndarray:
    out = np.full(len(r.bits), -1, np.int64)
    for c, row in enumerate(r.frame.bit_index):
        row = row[(row >= 0) & (row < out.size)]
        out[row] = c
    return out


def _anomalies(r: Read, rate_hz: float) -> tuple[Anomaly, ...]:
    tr, bs, fr = r.transitions, r.bits, r.frame
    bit_char = _bit_char(r)
    out: list[Anomaly] = []

    def tag(kind, t, bit):
        ch = int(bit_char[bit]) if bit is not None and 0 <= bit < bit_char.size and bit_char[bit] >= 0 else None
        out.append(Anomaly(kind, float(t), int(round(t * rate_hz)), bit, ch))

    for flag, kind in ((FLAG_MISSING, "polarity"), (FLAG_EXTRA, "extra"), (FLAG_WEAK, "weak")):
        for j in np.flatnonzero(tr.flags & flag):
            bit = int(np.searchsorted(bs.first_transition, j, side="right") - 1) if len(bs) else None
            tag(kind, tr.times_s[j], bit if bit is not None and bit >= 0 else None)
    for flag, kind in ((FLAG_LONE_HALF, "lone-half"), (FLAG_LONG, "long")):
        for k in np.flatnonzero(bs.flags & flag):
            tag(kind, bs.start_s[k], int(k))

    def char_at(c):
        """The character's first bit in time order."""
        return int(fr.bit_index[c].min())

    for c in np.flatnonzero(~np.asarray(fr.parity_ok, bool)):
        k = char_at(int(c))
        out.append(Anomaly("parity", float(bs.start_s[k]), int(round(bs.start_s[k] * rate_hz)), k, int(c)))
    for c in fr.corrected:
        if c < fr.bit_index.shape[0]:
            k = char_at(int(c))
            out.append(Anomaly("corrected", float(bs.start_s[k]), int(round(bs.start_s[k] * rate_hz)), k, int(c)))
    if fr.complete and not fr.lrc_ok and fr.bit_index.shape[0] > len(fr.text):
        c = len(fr.text)
        k = char_at(c)
        out.append(Anomaly("lrc", float(bs.start_s[k]), int(round(bs.start_s[k] * rate_hz)), k, c))
    if not fr.complete:
        kind = "no-lrc" if missing_end(fr) == "no LRC" else "no-end"
        out.append(Anomaly(kind, float(r.end_s), int(round(r.end_s * rate_hz)), None, None))
    out.sort(key=lambda a: a.t_s)
    return tuple(out)


def _headroom(lim: Limit, v: float) -> float:
    if lim.name == "snr_db":
        return 10 ** ((v - lim.limit) / 20) if math.isfinite(v) else math.inf
    if lim.sense == "min":
        return v / lim.limit
    return lim.limit / v if v > 0 else math.inf


def _checks(amp, noise, pulse, timing: Timing, rate_hz: float = math.nan) -> tuple[Check, ...]:
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
