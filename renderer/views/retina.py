"""A retina view: one eye's pattern drawn on retinal coordinates.

The image is a disc about the posterior pole in azimuthal-equidistant retinal
coordinates: pixel (i, j) of a size × size image has centre (x, y) =
((j + ½)/size·2 − 1, 1 − (i + ½)/size·2); its radius hypot(x, y)·rim_deg is the
retinal eccentricity β (the angle between the retina's inward normal and the optic
axis; for a spherical retina the angle at its centre from the posterior pole) and
φ = atan2(y, x) the retinal meridian, image right the retina's +y (eye frame) side
and image up its dorsal (−z) side: the retina seen from behind the eye.  Because
the image on the retina is inverted, a view direction above the optic axis lands
below the pole.  Each pixel shows the receptor there, i.e. the signal of the view
direction whose ray reaches it.  Not for visual coordinates (see :mod:`.eyedisc`).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..errors import MagretinaError, check_range
from ..eye import optics
from .base import DEFAULT_FILTER, View, check_sampling


@dataclass(frozen=True)
class RetinaView(View):
    """Per-eye retinal map.

    Parameters
    ----------
    eye : int or str
        Which eye of the layout (index or name).
    size : int
        Image is size × size pixels.
    rim_deg : float or None
        Retinal eccentricity at the disc's rim, degrees; default the eccentricity
        reached by the eye's largest half-width (capped at 179°).
    """

    eye: object = 0
    size: int = 512
    rim_deg: float | None = None
    filter: str = DEFAULT_FILTER
    supersample: int = 1
    frame = "head"
    example = {"eye": "right", "size": 24}

    def __post_init__(self):
        check_sampling(self)
        if not isinstance(self.size, (int, np.integer)) or self.size < 4:
            raise MagretinaError(f"retina view size = {self.size!r}: must be an integer >= 4")
        if self.rim_deg is not None:
            object.__setattr__(self, "rim_deg", check_range("rim_deg", self.rim_deg, 0.0, 180.0,
                                                            lo_open=True, hi_open=True,
                                                            unit="degrees"))

    @property
    def pick(self):
        return self.eye

    @property
    def shape(self):
        return (int(self.size), int(self.size))

    def _eye(self, layout):
        return layout.eyes[layout.eye_index(self.eye)]

    def rim(self, layout) -> float:
        if self.rim_deg is not None:
            return float(self.rim_deg)
        e = self._eye(layout)
        w = max(e.nasal_deg, e.temporal_deg, e.dorsal_deg, e.ventral_deg)
        return float(min(179.0, e.eccentricity_deg(min(w, 179.9))))

    def _polar(self, layout):
        n = int(self.size)
        c = (np.arange(n) + 0.5) / n * 2.0 - 1.0
        x, y = np.meshgrid(c, -c)
        r = np.hypot(x, y)
        return r, np.radians(r * self.rim(layout)), np.arctan2(y, x)

    def retinal_directions(self, layout) -> np.ndarray:
        """(H, W, 3) outward unit normals of the retina at each pixel's receptor (for a
        sphere: from its centre towards the point), eye frame; NaN outside the disc."""
        r, beta, phi = self._polar(layout)
        d = np.stack([-np.cos(beta), np.sin(beta) * np.cos(phi), -np.sin(beta) * np.sin(phi)], -1)
        d[r > 1.0] = np.nan
        return d

    def eye_frame_directions(self, layout) -> np.ndarray:
        """(H, W, 3) view directions (eye frame) whose rays reach each pixel's receptor."""
        e = self._eye(layout)
        r, beta, phi = self._polar(layout)
        alpha = optics.visual_angle_from_eccentricity(beta, e.nodal_ratio, e.shape_e2)
        # the image is inverted: the view direction's meridian is opposite the point's
        d = np.stack([np.cos(alpha), -np.sin(alpha) * np.cos(phi), np.sin(alpha) * np.sin(phi)], -1)
        d[r > 1.0] = np.nan
        return d

    def directions(self, layout) -> np.ndarray:
        return self.eye_frame_directions(layout) @ self._eye(layout).R_head_eye.T

    def solid_angle(self, layout) -> np.ndarray:
        """Visual solid angle (sr) each pixel receives: its area in the (β, φ) plane
        times sin α·(dα/dβ)/β, with dα/dβ by central differences; 0 outside the disc."""
        e = self._eye(layout)
        n = int(self.size)
        r, beta, _ = self._polar(layout)
        B = np.radians(self.rim(layout))
        h = 1e-6
        alpha = optics.visual_angle_from_eccentricity(beta, e.nodal_ratio, e.shape_e2)
        lo = np.maximum(beta - h, 0.0)
        dadb = (optics.visual_angle_from_eccentricity(beta + h, e.nodal_ratio, e.shape_e2)
                - optics.visual_angle_from_eccentricity(lo, e.nodal_ratio, e.shape_e2)) / (beta + h - lo)
        dA = (2.0 / n * B) ** 2  # area in the (β, φ) azimuthal-equidistant plane
        sin_ratio = np.where(beta > 0, np.sin(alpha) / np.where(beta > 0, beta, 1.0), dadb)
        return np.where(r <= 1.0, dA * dadb * sin_ratio, 0.0)

    def scaled(self, n):
        return replace(self, size=int(self.size) * int(n), supersample=1)
