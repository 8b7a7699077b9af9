"""A field given directly by total intensity, inclination and declination.

For laboratory conditions (coil systems) and analysis; no site or date involved.
"""

from __future__ import annotations

import math

from ..errors import check_range
from .base import FieldVector


def fixed(total_uT, inclination_deg, declination_deg=0.0) -> FieldVector:
    """A field vector from F (µT), I and D (degrees), local NED.

    X = F cos I cos D, Y = F cos I sin D, Z = F sin I.
    """
    f = check_range("total intensity (total_uT)", total_uT, 0.0, 1e6, unit="µT") * 1e-6
    inc = math.radians(check_range("inclination (inclination_deg)", inclination_deg, -90.0, 90.0,
                                   unit="degrees"))
    dec = math.radians(check_range("declination (declination_deg)", declination_deg, -360.0, 360.0,
                                   unit="degrees"))
    ned = (f * math.cos(inc) * math.cos(dec), f * math.cos(inc) * math.sin(dec), f * math.sin(inc))
    return FieldVector(ned, model="fixed", source="given F, I, D")
