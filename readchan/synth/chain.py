"""The reader's analog front end and converter, run forward: AC coupling, preamp, anti-alias, quantiser.

Every real capture has passed through such a chain before it was stored:

1. **AC coupling**: a first-order high-pass at ``ac_coupling_hz``,
   ``|H(f)| = f / sqrt(f² + fc²)`` (a series capacitor into the preamp's input resistance;
   common practice, corner typically 5–50 Hz).
2. **Preamp low-pass**: a *causal* filter of order 1–4 at ``preamp_lowpass_hz``, Butterworth
   (maximally flat magnitude, ``|H|² = 1/(1 + (f/fc)^(2n))``) or Bessel (maximally flat group
   delay), both normalised to −3 dB at the corner (Zverev, *Handbook of Filter Synthesis*,
   1967).  Being causal, it delays each pulse and makes it asymmetric, with a small lobe of the
   opposite sign after it (the Butterworth step response overshoots ≈ 4 % at order 2).
3. **Anti-alias and sampling**: the chain is rendered at ``oversample`` × the output rate (so
   the analog filters are modelled well past the output's Nyquist frequency), then decimated
   to the output rate.  With ``antialias`` the decimation goes through a linear-phase FIR
   low-pass at the output Nyquist frequency (``scipy.signal.resample_poly``: the digital
   decimation filter of a sound-card converter); without it every ``oversample``-th sample is
   taken as it is (an oscilloscope, whose only band limit is its front end).
4. **Quantisation**: ``quantize_bits`` bits over full scale ±1 (an audio converter: step
   2/2^N, saturating at −1 and 1 − step), or an 8-bit oscilloscope: 256 levels over
   ``scope_divisions`` (8 or 10) vertical divisions of ``scope_volts_per_div`` around
   ``scope_offset_v``, so the step is V/div × divisions / 256, saturating at the screen edges.
   Rounding to the nearest level leaves an error uniform in ± step/2, whose RMS is step/√12
   (Widrow & Kollár, *Quantization Noise*, 2008).

The filters are digital images of the analog ones by the bilinear transform with the corner
pre-warped (``scipy.signal.butter`` / ``bessel`` with ``fs``), exact at the corner and close
to the analog response everywhere below the output's Nyquist frequency at 8× oversampling.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import signal as sps

from readchan.errors import ParameterError

FAMILIES = ("butterworth", "bessel")


LEAST = {"ac_coupling_hz": 0.01, "preamp_lowpass_hz": 1.0, "scope_volts_per_div": 1e-9}
"""Smallest accepted value of each front-end setting: an AC-coupling corner below 0.01 Hz is DC
coupling over any capture the synthesizer can write, and smaller values only underflow the
filter design (our choice; the corners' upper bounds come from the output rate)."""


@dataclass(frozen=True)
class FrontEnd:
    """A reader's analog front end and converter; every stage off by default.

    Parameters
    ----------
    ac_coupling_hz : corner of the first-order AC-coupling high-pass in Hz; None for DC coupling.
    preamp_lowpass_hz : corner (−3 dB) of the causal preamp low-pass in Hz; None for none.
    preamp_order : order of the preamp low-pass, 1 to 4.
    preamp_family : ``"butterworth"`` or ``"bessel"``.
    antialias : decimate through a linear-phase anti-alias low-pass (sound card) rather than by
        taking every ``oversample``-th sample (oscilloscope).  Only matters when oversampled.
    quantize_bits : quantise to this many bits over full scale ±1 (2 to 32); None for none.
    scope_volts_per_div : quantise as an 8-bit oscilloscope at this many volts per division.
    scope_offset_v : the voltage at the centre of the oscilloscope screen.
    scope_divisions : vertical divisions the oscilloscope's 256 levels span (8 or 10).
    oversample : internal rate over the output rate while the chain has a preamp low-pass (1–64).
    """

    ac_coupling_hz: float | None = None
    preamp_lowpass_hz: float | None = None
    preamp_order: int = 2
    preamp_family: str = "butterworth"
    antialias: bool = True
    quantize_bits: int | None = None
    scope_volts_per_div: float | None = None
    scope_offset_v: float = 0.0
    scope_divisions: int = 8
    oversample: int = 8

    def __post_init__(self) -> None:
        for name, least in LEAST.items():
            v = getattr(self, name)
            if v is not None and not (math.isfinite(v) and v >= least):
                raise ParameterError(f"{name} must be at least {least:g}, was {v!r}")
        if self.preamp_order not in (1, 2, 3, 4):
            raise ParameterError(f"preamp_order must be 1, 2, 3 or 4, was {self.preamp_order!r}")
        if self.preamp_family not in FAMILIES:
            raise ParameterError(f"preamp_family must be one of {', '.join(FAMILIES)}, was {self.preamp_family!r}")
        if self.quantize_bits is not None and not 2 <= self.quantize_bits <= 32:
            raise ParameterError(f"quantize_bits must be between 2 and 32, was {self.quantize_bits!r}")
        if self.quantize_bits is not None and self.scope_volts_per_div is not None:
            raise ParameterError("give quantize_bits (audio converter) or scope_volts_per_div (oscilloscope), not both")
        if self.scope_divisions not in (8, 10):
            raise ParameterError(f"scope_divisions must be 8 or 10, was {self.scope_divisions!r}")
        if not math.isfinite(self.scope_offset_v) or abs(self.scope_offset_v) > 1e6:
            raise ParameterError(f"scope_offset_v must be finite, was {self.scope_offset_v!r}")
        if not 1 <= self.oversample <= 64:
            raise ParameterError(f"oversample must be between 1 and 64, was {self.oversample!r}")

    @property
    def internal_factor(self) -> int:
        """Internal rate over the output rate: ``oversample`` with a preamp low-pass, else 1."""
        return self.oversample if self.preamp_lowpass_hz is not None else 1

    @property
    def step(self) -> float:
        """Quantisation step in output units (0 when there is no quantiser)."""
        if self.quantize_bits is not None:
            return 2.0 / 2.0 ** self.quantize_bits
        if self.scope_volts_per_div is not None:
            return self.scope_volts_per_div * self.scope_divisions / 256.0
        return 0.0

    @property
    def quantisation_noise_rms(self) -> float:
        """RMS of the rounding error, step/√12 (uniform-error model; Widrow & Kollár 2008)."""
        return self.step / math.sqrt(12.0)

    def check_rate(self, rate_hz: float) -> None:
        """Refuse corners the output rate cannot hold (one-line :class:`ParameterError`)."""
        nyq = rate_hz / 2.0
        if self.ac_coupling_hz is not None and not self.ac_coupling_hz < nyq:
            raise ParameterError(f"ac_coupling_hz must be between 0 and {nyq:g} Hz (Nyquist of the output rate), "
                                 f"was {self.ac_coupling_hz!r}")
        if self.preamp_lowpass_hz is not None:
            top = 0.4 * rate_hz * self.internal_factor
            if not self.preamp_lowpass_hz < top:
                raise ParameterError(f"preamp_lowpass_hz must be between 0 and {top:g} Hz "
                                     f"(0.4 × the internal rate, oversample × rate), was {self.preamp_lowpass_hz!r}")

    def preamp_sos(self, rate_hz: float) -> np.ndarray | None:
        """Second-order sections of the preamp low-pass at sample rate ``rate_hz``, or None."""
        if self.preamp_lowpass_hz is None:
            return None
        if self.preamp_family == "bessel":
            return sps.bessel(self.preamp_order, self.preamp_lowpass_hz, "low", norm="mag", fs=rate_hz, output="sos")
        return sps.butter(self.preamp_order, self.preamp_lowpass_hz, "low", fs=rate_hz, output="sos")

    def ac_sos(self, rate_hz: float) -> np.ndarray | None:
        """Second-order section of the first-order AC-coupling high-pass at ``rate_hz``, or None."""
        if self.ac_coupling_hz is None:
            return None
        return sps.butter(1, self.ac_coupling_hz, "high", fs=rate_hz, output="sos")

    def delay_s(self) -> float:
        """Low-frequency group delay of the preamp low-pass in seconds (0 without one): how much
        later than the head produced them the pulses leave the chain."""
        if self.preamp_lowpass_hz is None:
            return 0.0
        fs = 64.0 * self.preamp_lowpass_hz
        b, a = sps.sos2tf(self.preamp_sos(fs))
        _, gd = sps.group_delay((b, a), w=[0.01 * self.preamp_lowpass_hz], fs=fs)
        return float(gd[0]) / fs


def filter_chain(x: np.ndarray, internal_rate_hz: float, fe: FrontEnd) -> np.ndarray:
    """The linear part of the chain at the internal rate, then decimated: AC coupling, preamp
    low-pass, anti-alias decimation by ``fe.internal_factor``.  ``x`` is (n_internal, channels)."""
    y = np.asarray(x, dtype=float)
    for sos in (fe.ac_sos(internal_rate_hz), fe.preamp_sos(internal_rate_hz)):
        if sos is not None:
            y = sps.sosfilt(sos, y, axis=0)
    k = fe.internal_factor
    if k > 1:
        y = sps.resample_poly(y, 1, k, axis=0) if fe.antialias else y[::k]
    return y


def quantise(x: np.ndarray, fe: FrontEnd) -> np.ndarray:
    """Round ``x`` to the converter's levels, saturating at its range (no-op without a quantiser)."""
    if fe.quantize_bits is not None:
        step = fe.step
        return np.clip(np.round(x / step), -(2 ** (fe.quantize_bits - 1)), 2 ** (fe.quantize_bits - 1) - 1) * step
    if fe.scope_volts_per_div is not None:
        step = fe.step
        codes = np.clip(np.round((x - fe.scope_offset_v) / step), -128, 127)
        return fe.scope_offset_v + codes * step
    return x


__all__ = ["FAMILIES", "FrontEnd", "filter_chain", "quantise"]
