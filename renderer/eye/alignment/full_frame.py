"""A full (non-axial) response read in a per-receptor molecular frame."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ...errors import MagretinaError, check_range
from ...kernels.layout import (MODE_AXIAL, MODE_FULL_FIXED, MODE_FULL_MERIDIAN, P_COS_PSI,
                               P_SIN_PSI)
from .base import Alignment

IN_PLANE = ("meridian", "fixed", "random")


@dataclass(frozen=True)
class FullFrame(Alignment):
    """The response depends on the field direction in the full molecular frame
    (two angles), as a radical pair's yield does when the molecule has a fixed
    orientation about its own axis (Solov'yov, Mouritsen & Schulten 2010, Biophys. J.
    99:40; Lau, Rodgers & Hore 2012).  Molecular z is the receptor's base axis;
    molecular x lies in the membrane plane at ``in_plane_deg`` (ψ) from a reference:

    * ``in_plane = "meridian"``: the local retinal meridian, pointing away from the
      posterior pole (molecular y then along the parallel, z × x);
    * ``in_plane = "fixed"``: the projection of the eye's dorsal direction onto the
      membrane plane (undefined where the axis is vertical in the eye);
    * ``in_plane = "random"``: uniformly random ψ, i.e. the response's average over
      rotations about molecular z, precomputed as an axial table.
    """

    in_plane: str = "meridian"
    in_plane_deg: float = 0.0
    kind = "full-frame"
    examples = {"full-meridian": {"in_plane": "meridian", "in_plane_deg": 15.0},
                "full-fixed": {"in_plane": "fixed", "in_plane_deg": -30.0},
                "full-random": {"in_plane": "random"}}

    def __post_init__(self):
        super().__post_init__()
        if self.in_plane not in IN_PLANE:
            raise MagretinaError(f"alignment 'full-frame': in_plane = {self.in_plane!r}; "
                                 f"allowed {', '.join(IN_PLANE)}")
        object.__setattr__(self, "in_plane_deg", check_range(
            "alignment 'full-frame': in_plane_deg", self.in_plane_deg, -360.0, 360.0,
            unit="degrees"))
        object.__setattr__(self, "mode", {"meridian": MODE_FULL_MERIDIAN, "fixed": MODE_FULL_FIXED,
                                          "random": MODE_AXIAL}[self.in_plane])

    def needs_full_response(self) -> bool:
        return self.in_plane != "random"

    def kernel_slots(self) -> dict:
        p = np.radians(self.in_plane_deg)
        return {P_COS_PSI: np.cos(p), P_SIN_PSI: np.sin(p)}
