"""A per-eye disc: the eye's field in azimuthal equidistant projection about its optic axis.

Pixel (i, j) of a size × size disc has centre (x, y) = ((j + ½)/size·2 − 1,
1 − (i + ½)/size·2); radius ρ = hypot(x, y)·radius_deg is the angle from the optic
axis, the image angle φ = atan2(y, x) the meridian, image right being the eye's +y
and image up the eye's −z (dorsal): the field as the animal looks out through that
eye.  Pixels beyond the disc are masked.  Not for retinal coordinates.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..errors import MagretinaError, check_range
from .base import DEFAULT_FILTER, View, check_sampling


@dataclass(frozen=True)
class EyeDisc(View):
    """Per-eye azimuthal-equidistant disc.

    Parameters
    ----------
    eye : int or str
        Which eye of the layout (index or name).
    size : int
        Image is size × size pixels.
    radius_deg : float or None
        Angle from the optic axis at the disc's rim; default the eye's largest
        half-width.
    """

    eye: object = 0
    size: int = 512
    radius_deg: float | None = None
    filter: str = DEFAULT_FILTER
    supersample: int = 1
    frame = "head"
    example = {"eye": "left", "size": 24}

    def __post_init__(self):
        check_sampling(self)
        if int(self.size) != self.size or self.size < 4:
            raise MagretinaError(f"eye disc size = {self.size!r}: must be an integer >= 4")
        if self.radius_deg is not None:
            object.__setattr__(self, "radius_deg", check_range("radius_deg", self.radius_deg, 0.0,
                                                               180.0, lo_open=True, unit="degrees"))

    @property
    def pick(self):
        return self.eye

    @property
    def shape(self):
        return (int(self.size), int(self.size))

    def rim_deg(self, layout) -> float:
        if self.radius_deg is not None:
            return float(self.radius_deg)
        e = layout.eyes[layout.eye_index(self.eye)]
        return max(e.nasal_deg, e.temporal_deg, e.dorsal_deg, e.ventral_deg)

    def eye_frame_directions(self, layout) -> np.ndarray:
        """(H, W, 3) unit directions in the eye frame, NaN outside the disc."""
        n = int(self.size)
        c = (np.arange(n) + 0.5) / n * 2.0 - 1.0
        x, y = np.meshgrid(c, -c)
        r = np.hypot(x, y)
        rho = np.radians(r * self.rim_deg(layout))
        phi = np.arctan2(y, x)
        d = np.stack([np.cos(rho), np.sin(rho) * np.cos(phi), -np.sin(rho) * np.sin(phi)], axis=-1)
        d[r > 1.0] = np.nan
        return d

    def directions(self, layout) -> np.ndarray:
        e = layout.eyes[layout.eye_index(self.eye)]
        return self.eye_frame_directions(layout) @ e.R_head_eye.T

    def solid_angle(self, layout) -> np.ndarray:
        n = int(self.size)
        c = (np.arange(n) + 0.5) / n * 2.0 - 1.0
        x, y = np.meshgrid(c, -c)
        r = np.hypot(x, y)
        R = np.radians(self.rim_deg(layout))
        rho = r * R
        dA = (2.0 / n * R) ** 2
        w = np.where(rho > 0, np.sin(rho) / np.where(rho > 0, rho, 1.0), 1.0) * dA
        return np.where(r <= 1.0, w, 0.0)

    def scaled(self, n):
        return replace(self, size=int(self.size) * int(n), supersample=1)
