"""Front-end diagnostics: every read of a channel measured in physical units, and a verdict.

Input: a :class:`readchan.io.capture.Capture` (:func:`inspect_capture`), or one channel's raw
samples (numpy array, capture units) with its :class:`readchan.channel.ChannelResult`
(:func:`inspect_channel`).  Output: one :class:`ChannelReport` per channel, holding a
:class:`ReadReport` per read.

Decoding says *what* a card holds; these modules say *how well* the front end delivered it:
amplitude (:mod:`.amplitude`), noise (:mod:`.noise`) and hum (:mod:`.hum`) over the channel
(:mod:`.front_end`), pulse width (:mod:`.pulse`), swipe speed and its changes and the timing
margin (:mod:`.timing`), the anomalies the decoder met (:mod:`.anomalies`), and which of these
quantities has the least headroom (:mod:`.verdict`).  This module assembles them.

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
  left once isolated pulses and slow excursions are taken out (:func:`readchan.measure.noise.robust_noise`), raised to
  the quantisation noise step/√12 when it measures below it; SNR ``snr_db`` =
  20·log10(median |peak| / noise RMS).
* hum: fitted on the quiet samples and between the pulses (:func:`readchan.measure.hum.fit_hum_wide`): fundamental
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
  cell shorter, each by one shift (see :func:`readchan.measure.timing._peak_shift`).

Verdict: every quantity with a limit in :data:`readchan.measure.verdict.LIMITS` gets a headroom, the factor by which it
clears its limit (≥ 1 passes); the read's verdict names the failing quantities, and always the
one with the least headroom.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from readchan.channel import ChannelResult, DecodeSettings, Read, decode_channel
from readchan.frontend.head import quiet_mask
from readchan.io.capture import Capture, repair_outliers
from readchan.measure.amplitude import Amplitude, clipped_samples, measure_amplitude
from readchan.measure.anomalies import Anomaly, bit_char, find_anomalies
from readchan.measure.front_end import GUARD_S, FrontEnd, measure_front_end, noise_source_text
from readchan.measure.noise import Noise, quantisation_step, robust_noise
from readchan.measure.pulse import PulseShape, isolated_pw50_cell, measure_pulse_shape
from readchan.measure.timing import Timing, measure_timing
from readchan.measure.verdict import LIMITS, Check, Limit, format_check, read_checks, verdict_text

__all__ = [
    "LIMITS", "Amplitude", "format_check", "noise_source_text", "robust_noise", "quantisation_step", "verdict_text",
    "Anomaly", "ChannelReport", "Check", "FrontEnd", "Limit", "Noise", "PulseShape", "ReadReport", "Timing",
    "inspect_capture", "inspect_channel", "isolated_pw50_cell",
]


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
        return bit_char(self.read)


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
        fe, w = measure_front_end(x, rate_hz, result, quiet, highpass_hz, units)
    clipped = clipped_samples(x) if result.kind == "head" else None
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


def _read_report(n: int, r: Read, w: np.ndarray, rate_hz: float, fe: FrontEnd, clipped) -> ReadReport:
    tr, bs = r.transitions, r.bits
    timing = measure_timing(r)
    amp = noise = pulse = None
    if fe.kind == "head" and len(tr):
        amp = measure_amplitude(tr, w, rate_hz, r, clipped)
        snr = 20 * math.log10(amp.median_peak / fe.noise_rms) if fe.noise_rms and amp.median_peak > 0 else math.inf
        hum_ratio = None if fe.hum_amplitude is None or not amp.median_peak > 0 else fe.hum_amplitude / amp.median_peak
        noise = Noise(float(fe.noise_rms), float(snr), hum_ratio)
        pulse = measure_pulse_shape(tr, bs, w, rate_hz, timing, r)
    anomalies = find_anomalies(r, rate_hz)
    checks = read_checks(amp, noise, pulse, timing, rate_hz)
    return ReadReport(n, r, amp, noise, pulse, timing, anomalies, checks)
