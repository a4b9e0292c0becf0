"""Readback pulse models of an inductive head, in space (metres along the medium).

Input: positions along the medium (m) and head geometry (gap, spacing, transition length in m).
Output: pulse shapes (per unit flux change) and their PW50 (m).

An inductive head sees the time derivative of the flux it links.  By reciprocity the
voltage for one isolated transition passing at speed ``v`` is ``V(t) = v · p(x)`` with
``x = v·t`` the head's displacement from the transition and ``p`` the spatial pulse
(Bertram, *Theory of Magnetic Recording*, 1994, ch. 5).  This module gives ``p``
normalised to a peak of 1; :mod:`readchan.synth` applies the velocity factor.

Two pulse models:

* ``KarlqvistPulse``: a Karlqvist head (gap ``g``) over a thin medium holding an arctan
  transition ``M(x) = (2 Mr/π)·atan(x/a)`` at head-to-medium spacing ``d``::

      p(x) ∝ atan((x + g/2)/(d + a)) − atan((x − g/2)/(d + a))

  whose half-amplitude width is exactly ``PW50 = sqrt(g² + 4(d + a)²)``
  (Karlqvist 1954; Bertram 1994 ch. 3 and 5).
* ``LorentzianPulse``: ``p(x) = 1 / (1 + (2x/PW50)²)``, the standard approximation
  (the Karlqvist pulse in the limit ``g → 0``).

The wavelength response of the same model, for the diagnostics and tests, is
:func:`spacing_loss_db` (Wallace, BSTJ 30(4), 1951: ``exp(−2πd/λ)``, i.e.
``−54.6·d/λ`` dB) and :func:`gap_loss` (``sin(πg/λ)/(πg/λ)``, Mee & Daniel,
*Magnetic Recording Technology*).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from readchan.errors import ParameterError


MAX_DIMENSION_M = 1e-2
"""Largest head gap, spacing, transition parameter or PW50 accepted (10 mm): a magnetic-stripe
head's gap is about 10–25 µm (common practice) and a 75 bpi bit cell 339 µm (ISO/IEC 7811-2);
the limit leaves room for PW50s of several cells at low densities."""


def _positive(name: str, value: float, *, allow_zero: bool = False) -> float:
    value = float(value)
    if not math.isfinite(value) or value < 0 or (value == 0 and not allow_zero) or value > MAX_DIMENSION_M:
        low = "from 0" if allow_zero else "above 0"
        raise ParameterError(f"{name} must be {low} to {MAX_DIMENSION_M:g} m ({MAX_DIMENSION_M * 1e6:g} µm), "
                             f"was {value!r}")
    return value + 0.0


@dataclass(frozen=True)
class KarlqvistPulse:
    """Isolated pulse of a Karlqvist head over an arctan transition.

    Parameters
    ----------
    gap_m : head gap length g in metres.
    spacing_m : head-to-medium spacing d in metres.
    transition_m : arctan transition parameter a in metres.
    """

    gap_m: float = 12e-6
    spacing_m: float = 5e-6
    transition_m: float = 15e-6

    def __post_init__(self) -> None:
        _positive("gap_m", self.gap_m, allow_zero=True)
        _positive("spacing_m", self.spacing_m, allow_zero=True)
        _positive("transition_m", self.transition_m, allow_zero=True)
        if self.spacing_m + self.transition_m <= 0:
            raise ParameterError("spacing_m + transition_m must be > 0, was 0")

    @property
    def pw50_m(self) -> float:
        """Half-amplitude pulse width in metres: sqrt(g² + 4(d+a)²) (Bertram 1994, ch. 5)."""
        da = self.spacing_m + self.transition_m
        return math.hypot(self.gap_m, 2.0 * da)

    def shape(self, x_m: np.ndarray) -> np.ndarray:
        """Pulse value at displacement ``x_m`` (metres), peak 1 at x = 0."""
        da = self.spacing_m + self.transition_m
        half = 0.5 * self.gap_m
        x = np.asarray(x_m, dtype=float)
        if half == 0:
            return 1.0 / (1.0 + (x / da) ** 2)
        peak = 2.0 * math.atan(half / da)
        return (np.arctan((x + half) / da) - np.arctan((x - half) / da)) / peak


@dataclass(frozen=True)
class LorentzianPulse:
    """Lorentzian isolated pulse ``1/(1 + (2x/PW50)²)`` with ``pw50_m`` in metres."""

    pw50_m: float = 42e-6

    def __post_init__(self) -> None:
        _positive("pw50_m", self.pw50_m)

    def shape(self, x_m: np.ndarray) -> np.ndarray:
        """Pulse value at displacement ``x_m`` (metres), peak 1 at x = 0."""
        x = np.asarray(x_m, dtype=float)
        return 1.0 / (1.0 + (2.0 * x / self.pw50_m) ** 2)


PulseModel = KarlqvistPulse | LorentzianPulse


def spacing_loss_db(spacing_m: float, wavelength_m: np.ndarray) -> np.ndarray:
    """Spacing loss in dB, 20·log10(exp(−2πd/λ)) = −54.6·d/λ (Wallace 1951)."""
    lam = np.asarray(wavelength_m, dtype=float)
    return 20.0 * np.log10(np.exp(-2.0 * np.pi * spacing_m / lam))


def gap_loss(gap_m: float, wavelength_m: np.ndarray) -> np.ndarray:
    """Gap loss factor sin(πg/λ)/(πg/λ) (Mee & Daniel); first null at λ = g."""
    lam = np.asarray(wavelength_m, dtype=float)
    return np.sinc(gap_m / lam)
