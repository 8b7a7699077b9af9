"""Two neighbouring receptor populations with different axes, read out as a ratio."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ...errors import check_range
from ...kernels.layout import MODE_RATIO, P_RB0, P_RB1, P_RB2
from .base import Alignment


@dataclass(frozen=True)
class Ratio(Alignment):
    """The signal is the ratio s_A/s_B of two neighbouring receptor populations whose
    axes differ; a ratio channel cancels the overall light intensity (Worster,
    Mouritsen & Hore 2017, J. R. Soc. Interface 14:20170405).  Population A lies
    along the base axis; population B's axis is tilted from it by ``delta_deg``
    towards the in-plane direction at ``chi_deg`` from the local meridian (0: along
    the meridian, away from the posterior pole; 90: along the parallel).  Both
    populations share the response (full responses: in-plane average).
    """

    delta_deg: float = 90.0
    chi_deg: float = 0.0
    kind = "ratio"
    examples = {"ratio": {"delta_deg": 60.0, "chi_deg": 20.0}}
    mode = MODE_RATIO

    def __post_init__(self):
        super().__post_init__()
        object.__setattr__(self, "delta_deg", check_range("alignment 'ratio': delta_deg",
                                                          self.delta_deg, 0.0, 180.0,
                                                          lo_open=True, unit="degrees"))
        object.__setattr__(self, "chi_deg", check_range("alignment 'ratio': chi_deg", self.chi_deg,
                                                        -360.0, 360.0, unit="degrees"))

    def kernel_slots(self) -> dict:
        d, c = np.radians(self.delta_deg), np.radians(self.chi_deg)
        return {P_RB0: np.cos(d), P_RB1: np.sin(d) * np.cos(c), P_RB2: np.sin(d) * np.sin(c)}

    def population_b_axes(self, axes, e1, e2) -> np.ndarray:
        """Population B's axes (N, 3) from the base axes and in-plane frame (N, 3) each."""
        s = self.kernel_slots()
        return s[P_RB0] * axes + s[P_RB1] * e1 + s[P_RB2] * e2
