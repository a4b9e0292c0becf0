"""Stages 2–3 for a head signal: the front end's decisions, taken once per channel, and detection.

Input: one channel's samples (any units) and the sample rate (Hz); :class:`HeadSettings`.
Output: the conditioned signal (:class:`readchan.frontend.condition.Conditioned`), the pulse
transitions (:class:`readchan.frontend.detect.Transitions`) and a :class:`FrontEndRecord` of
what was decided (hum, band limits, quantisation step, clipping), which decoding keeps in its
channel result and diagnostics reuse rather than deciding again.

Also here: :func:`only_white_noise` (a channel with nothing above its noise is not detected at
all) and the masks of quiet samples used to fit hum and measure noise.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Protocol

import numpy as np

from readchan.errors import ParameterError
from readchan.frontend.condition import ConditionSettings, Conditioned, condition, fit_hum, refine, signal_band_hz
from readchan.frontend.band import auto_highpass_hz, auto_lowpass_hz, pulse_width_s
from readchan.frontend.detect import Transitions, clipped_fraction, detect_head, quantisation_step
from readchan.frontend.segment import Segment, segment


class HeadSettings(Protocol):
    """What the head front end reads from the decode settings."""

    condition: ConditionSettings
    notch: object               # "auto", "off" or a frequency in Hz
    threshold: float
    auto_band: bool
    quant_step: float | None    # the converter step, capture units, when known for the capture
    band_hz: float | None       # the capture's signal band, Hz (0: none), when found once for it
    hum_hz: float | None        # the capture's mains frequency, Hz (0: no hum), when found once for it


@dataclass(frozen=True)
class FrontEndRecord:
    """The front end's decisions for one channel.

    Attributes
    ----------
    kind : ``head`` (pulse peaks) or ``logic`` (two-level edges).
    dc_offset : the DC removed, in the capture's units.
    hum_hz : the mains frequency fitted and subtracted (or notched), Hz, or None.
    hum_fitted : the hum was fitted on the quiet stretches (``--notch auto``), not a fixed notch.
    band_hz : the signal band found by the first pass (:func:`signal_band_hz`), Hz, or None.
    lowpass_hz, highpass_hz : the corners of the refinement matched to the pulses, Hz, or None.
    quant_step : the converter step found in the samples (0 when none), capture units.
    clipped : more than :data:`CLIPPED_FRACTION` of the samples sit at the extremes.
    silent : the channel is stationary white noise or constant (:func:`only_white_noise`):
        nothing above its noise, so nothing was detected.
    """

    kind: str
    dc_offset: float = 0.0
    hum_hz: float | None = None
    hum_fitted: bool = False
    band_hz: float | None = None
    lowpass_hz: float | None = None
    highpass_hz: float | None = None
    quant_step: float = 0.0
    clipped: bool = False
    silent: bool = False


LOWPASS_PER_WIDTH = 0.5
"""The auto low-pass corner is at least this over the pulses' measured half-amplitude width."""

CLIPPED_FRACTION = 0.005
"""Above this fraction of samples at the extremes a capture counts as clipped, and pulses are
timed by the middle of their crests rather than by their (flattened) peaks."""

def quiet_mask(n: int, rate_hz: float, segments: list[Segment], *, guard_s: float = 0.01) -> np.ndarray:
    """True for samples farther than ``guard_s`` from every segment (where no pulses are)."""
    quiet = np.ones(n, bool)
    for sg in segments:
        a = max(0, int((sg.start_s - guard_s) * rate_hz))
        b = min(n, int((sg.end_s + guard_s) * rate_hz) + 1)
        quiet[a:b] = False
    return quiet


def between_pulses_mask(n: int, rate_hz: float, tr: Transitions, *, guard: float = 0.3) -> np.ndarray:
    """True for samples farther than ``guard`` × the median interval from every transition:
    the baseline between pulses, where hum can be fitted when a capture has no quiet stretch."""
    if len(tr) < 2:
        return np.ones(n, bool)
    w = int(guard * float(np.median(np.diff(tr.times_s))) * rate_hz) + 1
    edges = np.zeros(n + 1, np.int64)
    np.add.at(edges, np.clip(tr.index - w, 0, n), 1)
    np.add.at(edges, np.clip(tr.index + w + 1, 0, n), -1)
    return np.cumsum(edges[:-1]) == 0


def conditioning_settings(settings: "HeadSettings") -> ConditionSettings:
    """The conditioning :func:`head_front_end` applies first: ``settings.condition``, with a fixed
    ``settings.notch`` (Hz) added to its notches."""
    cs = settings.condition
    if settings.notch not in ("auto", "off"):
        cs = ConditionSettings(cs.highpass_hz, cs.lowpass_hz, (float(settings.notch),), cs.notch_q)
    return cs


@dataclass(frozen=True)
class FrontEndDecisions:
    """The front end's decisions for a whole capture, taken once (:func:`front_end_decisions`)
    and given to the decode of each of its stretches (``head_front_end(..., decisions=...)``,
    ``readchan.channel.decode_channel(..., decisions=...)``), which then does not estimate them
    again.

    Attributes
    ----------
    rate_hz : the sample rate they were taken at, Hz (a stretch at another rate is refused).
    quant_step : the converter step (capture units; 0 when none), :func:`quantisation_step`.
    band_hz : the first pass's signal band, Hz, or None (:func:`signal_band_hz`).
    lowpass_hz, highpass_hz : the refinement's corners, Hz, or None (none applied).
    hum_hz : the mains frequency fitted on the capture, Hz, or None (no significant hum, or
        ``notch`` not ``auto``).  A stretch fits only the hum's amplitude and phase at this
        frequency on its own quiet samples (one least-squares solve instead of the grid search):
        a phase carried over from the capture would drift, as a frequency known to 0.02 Hz
        slips a whole cycle in under a minute.
    noise_rms : the detector's noise RMS on the refined signal (capture units): the floor of
        every stretch's detection (:func:`readchan.frontend.detect.detect_head`), instead of the
        stretch's own quietest 1 ms blocks, which a stretch that is mostly swipe lacks.
    """

    rate_hz: float
    quant_step: float = 0.0
    band_hz: float | None = None
    lowpass_hz: float | None = None
    highpass_hz: float | None = None
    hum_hz: float | None = None
    noise_rms: float | None = None


def front_end_decisions(x: np.ndarray, rate_hz: float, settings: "HeadSettings", channel: int = 0
                        ) -> FrontEndDecisions:
    """The :class:`FrontEndDecisions` of a capture from its samples ``x`` (one channel, capture
    units) at ``rate_hz`` (Hz): :func:`head_front_end` run on them, its record kept.  ``x`` may
    be the whole capture or a representative part of it (its first active spans, with some
    quiet between them for the noise and the hum)."""
    _, tr, rec = head_front_end(x, rate_hz, settings, channel)
    return FrontEndDecisions(float(rate_hz), rec.quant_step, rec.band_hz, rec.lowpass_hz, rec.highpass_hz,
                             rec.hum_hz if rec.hum_fitted else None, float(tr.noise_rms))


def _decided_front_end(x: np.ndarray, rate_hz: float, settings: "HeadSettings", d: FrontEndDecisions,
                       cond: Conditioned, clip: float) -> tuple[Conditioned, Transitions, FrontEndRecord]:
    """:func:`head_front_end` with the capture's decisions ``d``: the hum refitted at ``d.hum_hz``
    on this stretch's quiet samples (found by a first detection, only then), the refinement at
    ``d``'s corners, one detection at ``d``'s noise floor."""
    if abs(d.rate_hz - rate_hz) > 1e-9 * rate_hz:
        raise ParameterError(f"front-end decisions taken at {d.rate_hz:g} Hz cannot decode samples at {rate_hz:g} Hz")
    q, band = d.quant_step, d.band_hz
    hum = None if settings.notch in ("auto", "off") else float(settings.notch)
    if settings.notch == "auto" and d.hum_hz is not None:
        first = refine(cond, lowpass_hz=1.5 * band) if band is not None else cond
        tr = detect_head(first.signal, rate_hz, threshold=settings.threshold, quant_step=q)
        quiet, level = _hum_quiet(x.size, rate_hz, tr)
        fit = fit_hum(cond.signal, rate_hz, quiet, min_level=level, freq_hz=d.hum_hz)
        if fit is not None:
            hum = fit.freq_hz
            cond = Conditioned(cond.signal - fit.waveform(x.size, rate_hz), rate_hz, cond.dc_offset, cond.channel)
    f_lp, f_hp = (d.lowpass_hz, d.highpass_hz) if settings.auto_band else (None, None)
    if f_lp is None and f_hp is None and band is not None:
        f_lp = 1.5 * band                  # the first pass's band limit is then the only one
    cond = refine(cond, lowpass_hz=f_lp, highpass_hz=f_hp)
    clipped = clip > CLIPPED_FRACTION
    tr = detect_head(cond.signal, rate_hz, threshold=settings.threshold, quant_step=q, noise=d.noise_rms,
                     timing="midpoint" if clipped else "peak")
    record = FrontEndRecord("head", float(cond.dc_offset), hum, settings.notch == "auto" and hum is not None,
                            band, f_lp, f_hp, float(q), bool(clipped))
    return cond, tr, record


def _hum_quiet(n: int, rate_hz: float, tr: Transitions) -> tuple[np.ndarray, float]:
    """The samples to fit hum on (away from the segments of ``tr``, or mid-gap between its
    pulses when there is no quiet stretch) and the least hum level that counts there."""
    quiet = quiet_mask(n, rate_hz, segment(tr))
    if np.count_nonzero(quiet) >= 3 * rate_hz / 50.0:
        return quiet, 0.02
    # No quiet stretch: fit between pulses, mid-gap only.  Pulse tails leak the data's own
    # pattern in there (a run of BCD zeros repeats at bit rate / 5, which can sit near 50 or
    # 60 Hz), so only hum strong enough to matter (10 % of the peak) counts.
    return between_pulses_mask(n, rate_hz, tr, guard=0.4), 0.1


# Over 60 lines: one decision after another, each handing the next what it found (see the docstring).
def head_front_end(x: np.ndarray, rate_hz: float, settings: "HeadSettings", channel: int = 0, *,
                   conditioned: Conditioned | None = None, clip: float | None = None,
                   decisions: FrontEndDecisions | None = None) -> tuple[Conditioned, Transitions, FrontEndRecord]:
    """Head-signal front end: condition and detect; then refine with the hum fitted on the quiet
    stretches (or a fixed notch) taken out and a low-pass matched to the pulse rate, and detect
    again on the refined signal.

    ``conditioned``: ``x`` already through :func:`condition` with :func:`conditioning_settings`
    (a caller that needs that signal too makes it once; it is not changed here); ``clip``:
    ``clipped_fraction(x)``, when the caller has it; ``decisions``: the capture's
    (:class:`FrontEndDecisions`), used instead of deciding from ``x``.
    Returns the conditioned signal, the transitions and the record of every decision taken.
    One function, kept whole (over 60 lines): its steps hand each other the first detection's
    pulse rate and widths, and the order of the refinements is the decision."""
    cs = conditioning_settings(settings)
    hum = None if settings.notch in ("auto", "off") else float(settings.notch)
    cond = conditioned if conditioned is not None else condition(x, rate_hz, cs, channel=channel)
    if decisions is not None:
        return _decided_front_end(x, rate_hz, settings, decisions, cond,
                                  clipped_fraction(x) if clip is None else clip)
    band = None
    if settings.auto_band and cs.lowpass_hz is None:
        given = getattr(settings, "band_hz", None)
        band = signal_band_hz(cond.signal, rate_hz) if given is None else (float(given) or None)
    first = refine(cond, lowpass_hz=1.5 * band) if band is not None else cond
    q = quantisation_step(x) if getattr(settings, "quant_step", None) is None else float(settings.quant_step)
    tr = detect_head(first.signal, rate_hz, threshold=settings.threshold, quant_step=q)
    refined = False
    hum_hint = getattr(settings, "hum_hz", None)
    if settings.notch == "auto" and hum_hint != 0.0:
        quiet, level = _hum_quiet(x.size, rate_hz, tr)
        fit = fit_hum(cond.signal, rate_hz, quiet, min_level=level, freq_hz=hum_hint)
        if fit is not None:
            hum = fit.freq_hz
            cond = Conditioned(cond.signal - fit.waveform(x.size, rate_hz), rate_hz, cond.dc_offset, channel)
            refined = True
    f_lp = f_hp = None
    if settings.auto_band:
        f_lp = auto_lowpass_hz(tr, rate_hz) if cs.lowpass_hz is None else None
        if f_lp is None and band is not None:
            f_lp = 1.5 * band
        width = pulse_width_s(first.signal, tr) if f_lp is not None else None
        if width is not None:
            # never narrower than the pulses themselves: narrow pulses on a long cell (track 2
            # at a slow swipe) reach well above 1 / half cell, and a corner below them rings
            f_lp = max(f_lp, LOWPASS_PER_WIDTH / width)
        if f_lp is not None and f_lp >= 0.4 * rate_hz:
            f_lp = None             # pulses as narrow as the sampling: nothing to take away
        f_hp = auto_highpass_hz(tr)
        if f_hp is not None and (f_hp <= (cs.highpass_hz or 0.0) or f_hp >= 0.25 * rate_hz):
            f_hp = None
        if f_lp is not None or f_hp is not None:
            cond = refine(cond, lowpass_hz=f_lp, highpass_hz=f_hp)
            refined = True
    clipped = (clipped_fraction(x) if clip is None else clip) > CLIPPED_FRACTION
    if refined or clipped:
        tr = detect_head(cond.signal, rate_hz, threshold=settings.threshold, quant_step=q,
                         timing="midpoint" if clipped else "peak")
    record = FrontEndRecord("head", float(cond.dc_offset), hum, settings.notch == "auto" and hum is not None,
                            band, f_lp, f_hp, float(q), bool(clipped))
    return cond, tr, record


NOISE_BLOCK = 256
"""Samples per block of the stationarity test of :func:`only_white_noise`."""


def only_white_noise(x: np.ndarray, rate_hz: float) -> bool:
    """True when a channel is stationary white Gaussian noise (or constant), so holds nothing
    above its noise.  Three tests, each at about five standard deviations of what Gaussian
    white noise itself scatters by (sampling statistics; common practice):

    * stationary: no block of :data:`NOISE_BLOCK` samples has an RMS above the median block's
      by more than (√(2 ln N) + 3)·s, with N blocks and s = 1/√(2·256) ≈ 4.4 % the scatter of
      one block's RMS (√(2 ln N)·s is the expected largest excursion);
    * Gaussian: the kurtosis within 2.5–3.6 (3; it scatters by √(24/n) over n samples);
    * white: the Welch spectrum (K Hann-windowed 256-sample segments, K ≤ 4096) within
      1 ± 5/√K of its median at every frequency but DC (each bin scatters by 1/√K).

    A swipe raises the RMS where it is (by 1.5× for a track 2 swipe at 8 dB SNR, where decoding
    already fails; README, *Benchmarks*), a capture that is all swipe has a band edge and a
    peaky or flat-topped distribution, and hum is a spectral line; failing any test only means
    the channel is decoded in full.  Channels under 12,800 samples (50 segments) are never
    called noise."""
    n = x.size
    nb = n // NOISE_BLOCK
    if nb < 50:
        return False
    centre = float(np.median(x[:: max(1, n // 100_000)]))
    if float(x.min()) == centre == float(x.max()):
        return True                       # constant: an idle channel
    # block RMS a few thousand blocks at a time: a channel with a swipe fails here, before any
    # full-length array is made (the same values as from the whole y = x − centre)
    r = np.empty(nb)
    rows = 4096
    for a in range(0, nb, rows):
        b = min(nb, a + rows)
        blk = x[a * NOISE_BLOCK:b * NOISE_BLOCK] - centre
        r[a:b] = np.sqrt(np.mean(blk.reshape(b - a, NOISE_BLOCK) ** 2, axis=1))
    med = float(np.median(r))
    spread = (math.sqrt(2.0 * math.log(nb)) + 3.0) / math.sqrt(2.0 * NOISE_BLOCK)
    if not med > 0 or float(r.max()) > (1.0 + spread) * med:
        return False
    y = x - centre
    m2 = float(np.mean(y * y))
    kurtosis = float(np.mean(y ** 4)) / (m2 * m2)
    if not 2.5 <= kurtosis <= 3.6:
        return False
    seg = 256                             # Welch: Hann-windowed segments, no overlap, one FFT call
    k = min(n // seg, 4096)
    starts = np.linspace(0, n - seg, k).astype(np.int64)
    frames = y[starts[:, None] + np.arange(seg)] * np.hanning(seg)
    p = np.mean(np.abs(np.fft.rfft(frames, axis=1)) ** 2, axis=0)[1:-1]
    ref = float(np.median(p))
    tol = 5.0 / math.sqrt(k)
    return bool(ref > 0 and p.min() > (1.0 - tol) * ref and p.max() < (1.0 + tol) * ref)
