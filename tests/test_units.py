"""readchan.units: the inch, the bit cell and the speed from the bit period, in one place."""

from __future__ import annotations

import numpy as np
import pytest

from readchan.units import CM_PER_INCH, METRES_PER_INCH, bit_cell_m, speed_from_period_cm_s


def test_the_inch_is_25_4_mm_exactly():
    # NIST SP 811, appendix B.8: 1 in = 2.54 cm exactly
    assert METRES_PER_INCH == 0.0254 and CM_PER_INCH == 2.54


@pytest.mark.parametrize("density_bpi, cell_um", [(210.0, 121.0), (75.0, 338.7)])
def test_bit_cell_at_the_iso_densities(density_bpi, cell_um):
    # ISO/IEC 7811-2: 210 bpi (tracks 1 and 3), 75 bpi (track 2); cells as in REFERENCE.md (derived)
    assert bit_cell_m(density_bpi) * 1e6 == pytest.approx(cell_um, abs=0.05)


def test_speed_is_one_cell_per_period():
    # v = L / T (definition of speed), L = 2.54/ρ cm: 30 cm/s at 75 bpi is one 338.67 µm cell every 1.129 ms
    period_s = bit_cell_m(75.0) * 100 / 30.0
    assert speed_from_period_cm_s(period_s, 75.0) == pytest.approx(30.0, rel=1e-12)


def test_speed_takes_an_array_of_periods():
    periods_s = np.array([1e-4, 2e-4, 4e-4])
    assert np.allclose(speed_from_period_cm_s(periods_s, 210.0), 2.54 / (210.0 * periods_s))
    assert np.allclose(speed_from_period_cm_s(periods_s, 210.0) * periods_s, bit_cell_m(210.0) * 100)
