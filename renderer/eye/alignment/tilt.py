"""A molecule at a fixed tilt from the receptor axis, free to rotate about it."""

from __future__ import annotations

from dataclasses import dataclass
from functools import partial

import numpy as np

from ...errors import check_range
from ...response.base import LUT_SIZE
from .averaging import averaged_lut, tilt_factors
from .base import Alignment


@dataclass(frozen=True)
class Tilt(Alignment):
    """Molecular axis at a fixed angle γ (``tilt_deg``) from the receptor axis and free
    to rotate about it, as for a membrane-bound molecule with one rotational degree
    of freedom (Solov'yov, Mouritsen & Schulten 2010, Biophys. J. 99:40).  The
    rotation average scales each Legendre term c_l P_l(cos θ) by P_l(cos γ)
    (spherical-harmonic addition theorem): γ = 90° turns a + b·cos²θ into
    a + (b/2)·sin²θ, and γ = 54.74° (the magic angle) removes the l = 2 term.

    A full response is first averaged over its own in-plane angle (a uniformly
    random spin of the molecule about its own axis).
    """

    tilt_deg: float = 0.0
    kind = "tilt"
    examples = {"tilt": {"tilt_deg": 35.0}}

    def __post_init__(self):
        super().__post_init__()
        object.__setattr__(self, "tilt_deg", check_range("alignment 'tilt': tilt_deg",
                                                         self.tilt_deg, 0.0, 180.0, unit="degrees"))

    def axial_lut(self, response, n: int = LUT_SIZE) -> np.ndarray:
        if self.tilt_deg == 0.0:
            return super().axial_lut(response, n)
        return averaged_lut(response, partial(tilt_factors, np.radians(self.tilt_deg)), n)
