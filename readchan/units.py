"""The physics of a recorded stripe that several stages share, in one place: the inch, the bit
cell from the recording density, and the speed from the bit period.

A density ρ in bits per inch gives a bit cell of length L = 0.0254 m / ρ; a head that sees one
cell every T seconds moves at v = L / T, in cm/s v = 2.54 / (ρ·T).  The inch is 25.4 mm exactly
(the international yard and pound agreement, 1959; NIST SP 811, appendix B).  Functions take
floats or numpy arrays.
"""

from __future__ import annotations

METRES_PER_INCH = 0.0254
"""Metres in one inch, exact by definition (NIST SP 811, B.8)."""

CM_PER_INCH = 2.54
"""Centimetres in one inch, exact by definition (NIST SP 811, B.8)."""


def bit_cell_m(density_bpi):
    """Length of one bit cell in metres at ``density_bpi`` bits per inch: L = 0.0254 / ρ."""
    return METRES_PER_INCH / density_bpi


def speed_from_period_cm_s(period_s, density_bpi):
    """Head-to-medium speed in cm/s from the bit period ``period_s`` (seconds) at
    ``density_bpi`` bits per inch: v = 2.54 / (ρ·T) (one cell L = 2.54/ρ cm every T seconds)."""
    return CM_PER_INCH / (density_bpi * period_s)
