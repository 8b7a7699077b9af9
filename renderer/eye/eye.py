"""One eye in the head: placement, spherical-retina optics and its field of view.

Eye frame: x along the optic axis, out of the eye; y to the eye's right, z down
(the head frame rotated by azimuth, elevation and torsion of the optic axis, the
same Z-Y-X convention as the head pose).  The retina is a sphere of radius R centred
at the eye-frame origin; the nodal point lies a signed distance d in front of that
centre, at (d, 0, 0).  A ray from view direction u passes through the nodal point
and meets the retina at P = N − t·u; the receptor there is normal to the retina,
its axis the inward normal −P/R.  With d = 0 the axis equals u.  This module is the
geometry of a single eye; layouts of several eyes are in :mod:`.layout`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.spatial.transform import Rotation

from ..errors import MagretinaError, check_range


@dataclass(frozen=True)
class Eye:
    """An eye: optics, placement in the head and angular extent.

    Parameters
    ----------
    retina_radius_mm : float
        Radius R of the spherical retina, mm (> 0).
    nodal_offset_mm : float
        Signed distance d of the nodal point in front of the retina's centre of
        curvature, mm, |d| < R.
    azimuth_deg, elevation_deg, torsion_deg : float
        Direction of the optic axis in the head frame (azimuth positive right,
        elevation positive up) and torsion about it, degrees.
    nasal_deg, temporal_deg, dorsal_deg, ventral_deg : float
        Half-widths of the visual field about the optic axis, degrees in (0, 180].
        Between these four meridians the boundary is interpolated elliptically.
    name : str
        Label ("left", "right", ...).
    """

    retina_radius_mm: float = 5.0
    nodal_offset_mm: float = 0.0
    azimuth_deg: float = 0.0
    elevation_deg: float = 0.0
    torsion_deg: float = 0.0
    nasal_deg: float = 90.0
    temporal_deg: float = 90.0
    dorsal_deg: float = 90.0
    ventral_deg: float = 90.0
    name: str = "eye"

    def __post_init__(self):
        where = f"eye {self.name!r}: "
        r = check_range(where + "retina_radius_mm", self.retina_radius_mm, 0.0, None,
                        lo_open=True, unit="mm")
        d = check_range(where + "nodal_offset_mm", self.nodal_offset_mm, unit="mm")
        if abs(d) >= r:
            raise MagretinaError(f"{where}nodal_offset_mm = {d:g} must satisfy |d| < "
                                 f"retina_radius_mm = {r:g} (nodal point inside the eye)")
        object.__setattr__(self, "retina_radius_mm", r)
        object.__setattr__(self, "nodal_offset_mm", d)
        for key, lo, hi in (("azimuth_deg", -180.0, 180.0), ("elevation_deg", -90.0, 90.0),
                            ("torsion_deg", -180.0, 180.0)):
            object.__setattr__(self, key, check_range(where + key, getattr(self, key), lo, hi,
                                                      unit="degrees"))
        for key in ("nasal_deg", "temporal_deg", "dorsal_deg", "ventral_deg"):
            object.__setattr__(self, key, check_range(where + key, getattr(self, key), 0.0, 180.0,
                                                      lo_open=True, unit="degrees"))

    # -- placement -------------------------------------------------------------
    @property
    def R_head_eye(self) -> np.ndarray:
        """3x3: v_head = R_head_eye @ v_eye."""
        return Rotation.from_euler("ZYX", [self.azimuth_deg, self.elevation_deg,
                                           self.torsion_deg], degrees=True).as_matrix()

    @property
    def optic_axis_head(self) -> np.ndarray:
        """Unit optic axis in the head frame, shape (3,)."""
        return self.R_head_eye[:, 0].copy()

    @property
    def nasal_sign(self) -> float:
        """+1 if the nose lies towards the eye's +y (left or midline eye), −1 if towards −y.

        For an eye on the midline (azimuth 0) "nasal" therefore means the head's right.
        """
        return -1.0 if self.azimuth_deg > 0 else 1.0

    @property
    def nodal_ratio(self) -> float:
        """d / R."""
        return self.nodal_offset_mm / self.retina_radius_mm

    @property
    def half_widths_rad(self) -> np.ndarray:
        """(nasal, temporal, dorsal, ventral) in radians, shape (4,)."""
        return np.radians([self.nasal_deg, self.temporal_deg, self.dorsal_deg, self.ventral_deg])

    # -- optics ----------------------------------------------------------------
    def retinal_points(self, dirs_eye) -> np.ndarray:
        """Points (in units of R) where rays from ``dirs_eye`` meet the retina.

        Parameters
        ----------
        dirs_eye : array_like, shape (N, 3)
            Unit view directions (towards the object) in the eye frame.

        Returns
        -------
        ndarray, shape (N, 3)
            P / R, on the unit sphere, eye frame.
        """
        u = np.asarray(dirs_eye, dtype=np.float64)
        q = self.nodal_ratio
        ux = u[..., 0]
        # |N - t u| = R with N = (q, 0, 0) R  ->  t = q ux + sqrt(1 - q^2 (1 - ux^2))
        t = q * ux + np.sqrt(1.0 - q * q * (1.0 - ux * ux))
        p = -t[..., None] * u
        p[..., 0] += q
        return p

    def receptor_axes(self, dirs_eye) -> np.ndarray:
        """Receptor axes (inward retinal normals) for view directions in the eye frame.

        Parameters
        ----------
        dirs_eye : array_like, shape (N, 3)
            Unit view directions in the eye frame (x = optic axis).

        Returns
        -------
        ndarray, shape (N, 3)
            Unit receptor axes in the eye frame.  With ``nodal_offset_mm = 0`` they
            equal ``dirs_eye``.
        """
        return -self.retinal_points(dirs_eye)

    def visible(self, dirs_eye) -> np.ndarray:
        """Boolean mask, shape (N,): which eye-frame directions lie in the field of view."""
        u = np.asarray(dirs_eye, dtype=np.float64)
        return _visible_numpy(u, self.half_widths_rad, self.nasal_sign)

    def describe(self) -> dict:
        return {k: getattr(self, k) for k in self.__dataclass_fields__}


def _visible_numpy(u, half_widths, nasal_sign):
    """NumPy twin of the kernels' field-of-view test (see :mod:`renderer.kernels`).

    A direction at angle α from the optic axis, in the meridian whose unit transverse
    components towards nose and top are (cos φ, sin φ), is visible if
    α ≤ w(φ) with w(φ)⁻² = cos²φ/w_h² + sin²φ/w_v², w_h the nasal or temporal and
    w_v the dorsal or ventral half-width of that quadrant.
    """
    nas, tem, dor, ven = (float(x) for x in half_widths)
    ux = np.clip(u[..., 0], -1.0, 1.0)
    h = nasal_sign * u[..., 1]
    v = -u[..., 2]
    s2 = h * h + v * v
    alpha = np.arctan2(np.sqrt(s2), ux)
    wh = np.where(h >= 0, nas, tem)
    wv = np.where(v >= 0, dor, ven)
    lim = (h * h / (wh * wh) + v * v / (wv * wv)) * alpha * alpha
    on_axis = s2 == 0.0
    full = min(nas, tem, dor, ven) >= np.pi - 1e-12
    return np.where(on_axis, (ux > 0) | full, lim <= s2)


def field_angles_deg(eye: Eye, dirs_eye, b_eye) -> np.ndarray:
    """Angle θ (degrees) between each receptor axis and the field, for checks."""
    a = eye.receptor_axes(dirs_eye)
    b = np.asarray(b_eye, float) / max(np.linalg.norm(b_eye), 1e-300)
    return np.degrees(np.arccos(np.clip(a @ b, -1.0, 1.0)))


__all__ = ["Eye", "field_angles_deg"]
