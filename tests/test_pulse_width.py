"""The half-amplitude pulse width (:func:`readchan.frontend.band.pulse_width_s`): the PW50 of
Lorentzian pulses, the standard isolated-pulse model of inductive read-back (PW50 is the full
width at half maximum of L(t) = 1 / (1 + (2t/PW50)²), by its definition; Mee & Daniel, *Magnetic
Recording Technology*, 2nd ed., ch. 1, from memory), found whatever the search window."""

from __future__ import annotations

import numpy as np
import pytest

from readchan.frontend import band
from readchan.frontend.detect import Transitions

RATE_HZ = 48_000.0


def _pulses(pw50_s: float, n: int = 40, cell_s: float = 4e-3) -> tuple[np.ndarray, Transitions]:
    """Alternating Lorentzian pulses ``cell_s`` apart (isolated: the cell is many PW50 long)."""
    t = np.arange(int((n + 2) * cell_s * RATE_HZ)) / RATE_HZ
    centres = cell_s * (1 + np.arange(n)) + 0.3 / RATE_HZ        # off the sample grid
    x = np.zeros_like(t)
    for k, c in enumerate(centres):
        x += (-1) ** k / (1 + (2 * (t - c) / pw50_s) ** 2)
    index = np.rint(centres * RATE_HZ).astype(np.int64)
    amp = x[index]
    tr = Transitions(times_s=centres, index=index, amplitude=amp, envelope=np.abs(amp),
                     flags=np.zeros(n, np.uint8), rate_hz=RATE_HZ, kind="head", noise_rms=0.0)
    return x, tr


@pytest.mark.parametrize("pw50_s", [100e-6, 150e-6, 400e-6])
def test_the_width_of_lorentzian_pulses_is_their_pw50(pw50_s):
    x, tr = _pulses(pw50_s)
    # linear interpolation between samples on a curved flank: within 3 % from 5 samples a width (at 3 samples it reads 8 % wide)
    assert band.pulse_width_s(x, tr) == pytest.approx(pw50_s, rel=0.03)


@pytest.mark.parametrize("pw50_s", [60e-6, 1.5e-3, 3e-3])
def test_the_near_search_and_the_wide_search_give_the_same_width(monkeypatch, pw50_s):
    # pulses wider than the near window (1.5 and 3 ms: 72 and 144 samples) fall back to the
    # sample-by-sample search; shrinking the window to one sample sends every pulse there
    x, tr = _pulses(pw50_s, cell_s=max(4e-3, 12 * pw50_s))
    near = band.pulse_width_s(x, tr)
    monkeypatch.setattr(band, "NEAR", 1)
    assert band.pulse_width_s(x, tr) == near
