"""Swipe speed profiles: speed as a function of position along the card, in cm/s.

Input: a mean speed (cm/s), a profile name and its variation.
Output: :class:`SpeedProfile` (speed at each fraction of the card, cm/s).

A profile maps the fraction ``u = x / length`` of the card that has passed the head
(0 at the leading edge, 1 at the trailing edge) to speed.  Position-to-time then follows
from ``t(x) = ∫ dx / v(x)``, integrated numerically on a fine grid.

Profiles (``variation`` = r, a fraction of the mean speed v0):

* ``constant``: v = v0.
* ``ramp``: v = v0·(1 + r·(2u − 1)); from v0(1−r) to v0(1+r), accelerating for r > 0.
* ``swipe``: v = v0·(1 − r·cos 2πu); a hand swipe that speeds up, then slows down.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from readchan.errors import ParameterError

PROFILES = ("constant", "ramp", "swipe")


@dataclass(frozen=True)
class SpeedProfile:
    """A swipe speed profile.

    Parameters
    ----------
    mean_cm_s : mean speed v0 in cm/s.
    kind : one of ``PROFILES``.
    variation : fraction r of v0 by which speed changes along the card (|r| < 1).
    """

    mean_cm_s: float = 30.0
    kind: str = "constant"
    variation: float = 0.0

    def __post_init__(self) -> None:
        if not math.isfinite(self.mean_cm_s) or not 0.1 <= self.mean_cm_s <= 10_000:
            raise ParameterError(f"speed must be between 0.1 and 10000 cm/s, was {self.mean_cm_s!r}")
        if self.kind not in PROFILES:
            raise ParameterError(f"unknown speed profile {self.kind!r}; choose one of {', '.join(PROFILES)}")
        if not math.isfinite(self.variation) or abs(self.variation) >= 0.95:
            raise ParameterError(f"speed variation must be a fraction below 0.95, was {self.variation!r}")

    def speed_cm_s(self, u: np.ndarray) -> np.ndarray:
        """Speed in cm/s at card fraction ``u`` (0..1)."""
        u = np.clip(np.asarray(u, dtype=float), 0.0, 1.0)
        r = self.variation
        if self.kind == "ramp":
            return self.mean_cm_s * (1.0 + r * (2.0 * u - 1.0))
        if self.kind == "swipe":
            return self.mean_cm_s * (1.0 - r * np.cos(2.0 * np.pi * u))
        return np.full_like(u, self.mean_cm_s)

    def time_of_position(self, x_m: np.ndarray, length_m: float, *, grid: int = 20001) -> np.ndarray:
        """Time in seconds at which the head reaches positions ``x_m`` (metres from the leading edge)."""
        xg = np.linspace(0.0, length_m, grid)
        inv_v = 1.0 / (self.speed_cm_s(xg / length_m) * 0.01)
        tg = np.concatenate(([0.0], np.cumsum(0.5 * (inv_v[1:] + inv_v[:-1]) * np.diff(xg))))
        return np.interp(x_m, xg, tg)
