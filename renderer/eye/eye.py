"""One eye in the head: placement, retinal optics, receptor alignment and field of view.

Eye frame: x along the optic axis, out of the eye; y to the eye's right, z down
(the head frame rotated by azimuth, elevation and torsion of the optic axis, the
same Z-Y-X convention as the head pose).  The retina is a sphere of radius R (or an
ellipsoid of revolution about the optic axis, equatorial radius R and axial radius
``retina_axial_mm``) centred at the eye-frame origin; the nodal point lies a signed
distance d in front of that centre, at (d, 0, 0).  A ray from view direction u
passes through the nodal point and meets the retina at P = N − t·u (ray geometry in
:mod:`.optics`); the receptor there has its base axis along the inward normal or the
chief ray, and its molecule sits according to the eye's alignment hypothesis
(:mod:`.alignment`).  With d = 0 on a sphere the normal equals u.  This module is the
geometry of a single eye; layouts of several eyes are in :mod:`.layout`.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from scipy.spatial.transform import Rotation

from ..errors import MagretinaError, check_range
from ..frames import angle_between_deg
from ..kernels.twins import visible_numpy
from . import optics
from .alignment import parse_alignment

SIDES = ("", "left", "right")


@dataclass(frozen=True)
class Eye:
    """An eye: optics, placement in the head, receptor alignment and angular extent.

    Parameters
    ----------
    retina_radius_mm : float
        Radius R of the spherical retina (equatorial radius of an ellipsoidal one), mm (> 0).
    nodal_offset_mm : float or None
        Signed distance d of the nodal point in front of the retina's centre, mm,
        |d| < R (|d| < axial radius for an ellipsoid).  None: 0, or derived from the
        reduced eye when ``cornea_radius_mm`` and ``refractive_index`` are given.
    azimuth_deg, elevation_deg, torsion_deg : float
        Direction of the optic axis in the head frame (azimuth positive right,
        elevation positive up) and torsion about it, degrees.
    nasal_deg, temporal_deg, dorsal_deg, ventral_deg : float
        Half-widths of the visual field about the optic axis, degrees in (0, 180].
        Between these four meridians the boundary is interpolated elliptically.
    name : str
        Label ("left", "right", ...).
    side : str
        "left", "right" or "" (midline or unspecified; default: the name if it is
        "left" or "right").  A left eye's optic axis must not point to the right of
        the head's midline nor a right eye's to the left (into the head).
    retina_axial_mm : float or None
        Axial radius a of an ellipsoidal retina (a < R oblate, a > R prolate), mm;
        None: a sphere.
    cornea_radius_mm, refractive_index : float or None
        Reduced eye (single refracting surface): the nodal point is its centre of
        curvature and the posterior nodal distance r/(n' − 1) puts the retina's
        posterior pole at the focus; gives ``nodal_offset_mm`` = PND − a.
    alignment : Alignment, str or dict
        Receptor alignment hypothesis (default: normal to the retina); a mode name
        or a table as in layout files (see :mod:`renderer.eye.alignment`).
    """

    retina_radius_mm: float = 5.0
    nodal_offset_mm: float | None = None
    azimuth_deg: float = 0.0
    elevation_deg: float = 0.0
    torsion_deg: float = 0.0
    nasal_deg: float = 90.0
    temporal_deg: float = 90.0
    dorsal_deg: float = 90.0
    ventral_deg: float = 90.0
    name: str = "eye"
    side: str | None = None
    retina_axial_mm: float | None = None
    cornea_radius_mm: float | None = None
    refractive_index: float | None = None
    alignment: object = None

    def __post_init__(self):
        where = f"eye {self.name!r}: "
        setf = object.__setattr__
        r = check_range(where + "retina_radius_mm", self.retina_radius_mm, 0.0, None,
                        lo_open=True, unit="mm")
        setf(self, "retina_radius_mm", r)
        a = r
        if self.retina_axial_mm is not None:
            a = check_range(where + "retina_axial_mm", self.retina_axial_mm, 0.0, None,
                            lo_open=True, unit="mm")
            setf(self, "retina_axial_mm", a)
        reduced = (self.cornea_radius_mm, self.refractive_index)
        if (reduced[0] is None) != (reduced[1] is None):
            raise MagretinaError(f"{where}a reduced eye needs both cornea_radius_mm and "
                                 f"refractive_index; got {reduced[0]!r} and {reduced[1]!r}")
        d = None if self.nodal_offset_mm is None else check_range(
            where + "nodal_offset_mm", self.nodal_offset_mm, unit="mm")
        if reduced[0] is not None:
            try:
                red = optics.ReducedEye(*reduced)
            except MagretinaError as exc:
                raise MagretinaError(where + str(exc)) from None
            setf(self, "cornea_radius_mm", float(reduced[0]))
            setf(self, "refractive_index", float(reduced[1]))
            d_red = red.nodal_offset_mm(a)
            if d is not None and abs(d - d_red) > 1e-9 * max(1.0, abs(d_red)):
                raise MagretinaError(f"{where}nodal_offset_mm = {d:g} contradicts the reduced "
                                     f"eye (cornea_radius_mm, refractive_index), which gives "
                                     f"{d_red:g} mm; give one or the other")
            d = d_red
        d = 0.0 if d is None else d
        if abs(d) >= a:
            what = "retina_radius_mm" if self.retina_axial_mm is None else "retina_axial_mm"
            src = " (from the reduced eye)" if reduced[0] is not None else ""
            raise MagretinaError(f"{where}nodal_offset_mm = {d:g}{src} must satisfy |d| < "
                                 f"{what} = {a:g} (nodal point inside the eye)")
        setf(self, "nodal_offset_mm", d)
        for key, lo, hi in (("azimuth_deg", -180.0, 180.0), ("elevation_deg", -90.0, 90.0),
                            ("torsion_deg", -180.0, 180.0)):
            setf(self, key, check_range(where + key, getattr(self, key), lo, hi, unit="degrees"))
        for key in ("nasal_deg", "temporal_deg", "dorsal_deg", "ventral_deg"):
            setf(self, key, check_range(where + key, getattr(self, key), 0.0, 180.0,
                                        lo_open=True, unit="degrees"))
        side = self.side
        if side is None:
            side = self.name if self.name in ("left", "right") else ""
        if side not in SIDES:
            raise MagretinaError(f"{where}side = {side!r}: allowed 'left', 'right' or '' (midline)")
        setf(self, "side", side)
        if side == "left" and self.azimuth_deg > 0.0 or side == "right" and self.azimuth_deg < 0.0:
            allowed = "[-180, 0]" if side == "left" else "[0, 180]"
            raise MagretinaError(f"{where}azimuth_deg = {self.azimuth_deg:g} points the {side} "
                                 f"eye's optic axis into the head (across the midline); allowed "
                                 f"{allowed} degrees for a {side} eye")
        try:
            setf(self, "alignment", parse_alignment(self.alignment, where + "alignment"))
        except MagretinaError as exc:
            msg = str(exc)
            raise type(exc)(msg if msg.startswith(where) else where + msg) from None

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

        For an eye on the midline (azimuth 0, no side) "nasal" means the head's right.
        """
        if self.side:
            return -1.0 if self.side == "right" else 1.0
        return -1.0 if self.azimuth_deg > 0 else 1.0

    def moved(self, d_azimuth_deg=0.0, d_elevation_deg=0.0, d_torsion_deg=0.0) -> "Eye":
        """This eye after an eye movement: the offsets add to its placement angles
        (its field of view moves with it).  Azimuth wraps to [-180, 180]."""
        az = (self.azimuth_deg + float(d_azimuth_deg) + 180.0) % 360.0 - 180.0
        if self.azimuth_deg + float(d_azimuth_deg) == 180.0:
            az = 180.0
        tor = (self.torsion_deg + float(d_torsion_deg) + 180.0) % 360.0 - 180.0
        el = self.elevation_deg + float(d_elevation_deg)
        return replace(self, azimuth_deg=az, elevation_deg=el, torsion_deg=tor)

    def with_alignment(self, alignment) -> "Eye":
        return replace(self, alignment=parse_alignment(alignment, f"eye {self.name!r}: alignment"))

    # -- optics ----------------------------------------------------------------
    @property
    def nodal_ratio(self) -> float:
        """q = d / R (R the equatorial radius)."""
        return self.nodal_offset_mm / self.retina_radius_mm

    @property
    def shape_e2(self) -> float:
        """(R / a)²: 1 for a sphere."""
        if self.retina_axial_mm is None:
            return 1.0
        return (self.retina_radius_mm / self.retina_axial_mm) ** 2

    @property
    def axis_geometry(self) -> tuple:
        """(q, e2) whose normal coefficients give the base receptor axis: the eye's own
        for the normal, (0, 1) for the chief ray (axis = viewing direction)."""
        if self.alignment.axis == "chief-ray":
            return 0.0, 1.0
        return self.nodal_ratio, self.shape_e2

    @property
    def posterior_nodal_distance_mm(self) -> float:
        """Nodal point to the posterior pole, mm: a + d."""
        a = self.retina_radius_mm if self.retina_axial_mm is None else self.retina_axial_mm
        return a + self.nodal_offset_mm

    @property
    def reduced_eye(self):
        """The :class:`~renderer.eye.optics.ReducedEye` if one was given, else None."""
        if self.cornea_radius_mm is None:
            return None
        return optics.ReducedEye(self.cornea_radius_mm, self.refractive_index)

    @property
    def half_widths_rad(self) -> np.ndarray:
        """(nasal, temporal, dorsal, ventral) in radians, shape (4,)."""
        return np.radians([self.nasal_deg, self.temporal_deg, self.dorsal_deg, self.ventral_deg])

    def retinal_points(self, dirs_eye) -> np.ndarray:
        """Points (in units of R) where rays from ``dirs_eye`` meet the retina.

        Parameters
        ----------
        dirs_eye : array_like, shape (N, 3)
            Unit view directions (towards the object) in the eye frame.

        Returns
        -------
        ndarray, shape (N, 3)
            P / R in the eye frame (on the unit sphere for a spherical retina).
        """
        u = np.asarray(dirs_eye, dtype=np.float64)
        q = self.nodal_ratio
        t = optics.ray_parameter(u[..., 0], q, self.shape_e2)
        p = -t[..., None] * u
        p[..., 0] += q
        return p

    def retinal_normals(self, dirs_eye) -> np.ndarray:
        """Inward unit normals of the retina where rays from ``dirs_eye`` land, (N, 3)."""
        return _axis_from_coefficients(np.asarray(dirs_eye, dtype=np.float64),
                                       self.nodal_ratio, self.shape_e2)

    def receptor_axes(self, dirs_eye) -> np.ndarray:
        """Base receptor axes for view directions in the eye frame.

        Parameters
        ----------
        dirs_eye : array_like, shape (N, 3)
            Unit view directions in the eye frame (x = optic axis).

        Returns
        -------
        ndarray, shape (N, 3)
            Unit receptor axes in the eye frame: the inward retinal normals (the
            default), or ``dirs_eye`` itself for the chief-ray axis.  With
            ``nodal_offset_mm = 0`` on a sphere both equal ``dirs_eye``.
        """
        u = np.asarray(dirs_eye, dtype=np.float64)
        return _axis_from_coefficients(u, *self.axis_geometry)

    def receptor_frames(self, dirs_eye, in_plane="meridian", in_plane_deg=0.0) -> np.ndarray:
        """Molecular frames (columns x, y, z) of the receptors, shape (N, 3, 3), eye frame.

        z is the base receptor axis; x lies in the membrane plane at ``in_plane_deg``
        from the local meridian (pointing away from the posterior pole;
        ``in_plane="meridian"``) or from the projection of the eye's dorsal direction
        (−z, ``in_plane="fixed"``); y = z × x.  On the optic axis the meridian is
        taken as the eye's +y.
        """
        u = np.asarray(dirs_eye, dtype=np.float64)
        z = self.receptor_axes(u)
        if in_plane == "meridian":
            perp = u.copy()
            perp[..., 0] = 0.0
            s = np.linalg.norm(perp, axis=-1, keepdims=True)
            m = np.where(s > 0, perp / np.where(s > 0, s, 1.0), np.array([0.0, 1.0, 0.0]))
            ex = np.zeros_like(u)
            ex[..., 0] = 1.0
            # d z / d β within the meridian plane: −sin β x̂ + cos β m̂
            x = -np.sum(z * m, axis=-1, keepdims=True) * ex + z[..., :1] * m
        elif in_plane == "fixed":
            g = np.array([0.0, 0.0, -1.0])
            x = g - np.sum(z * g, axis=-1, keepdims=True) * z
            x /= np.linalg.norm(x, axis=-1, keepdims=True)
        else:
            raise MagretinaError(f"in_plane = {in_plane!r}: allowed 'meridian' or 'fixed'")
        y = np.cross(z, x)
        c, s_ = np.cos(np.radians(in_plane_deg)), np.sin(np.radians(in_plane_deg))
        x, y = c * x + s_ * y, -s_ * x + c * y
        return np.stack([x, y, z], axis=-1)

    def eccentricity_deg(self, alpha_deg) -> np.ndarray:
        """Retinal eccentricity β (deg) reached from visual angle α (deg), ray geometry."""
        return np.degrees(optics.retinal_eccentricity(np.radians(alpha_deg), self.nodal_ratio,
                                                      self.shape_e2))

    def magnification_mm_per_deg(self, alpha_deg) -> tuple:
        """(radial, tangential) retinal magnification at visual angle α (deg), mm/deg.

        Compare a preset with a measured magnification factor (e.g. about 0.12 mm/deg
        in the pigeon's posterior pole, Hayes, Hodos, Holden & Low 1987)."""
        return optics.magnification_mm_per_deg(np.radians(alpha_deg), self.nodal_ratio,
                                               self.retina_radius_mm, self.shape_e2)

    def visible(self, dirs_eye) -> np.ndarray:
        """Boolean mask, shape (N,): which eye-frame directions lie in the field of view."""
        u = np.asarray(dirs_eye, dtype=np.float64)
        return visible_numpy(u, self.half_widths_rad, self.nasal_sign)

    def describe(self) -> dict:
        d = {k: getattr(self, k) for k in self.__dataclass_fields__}
        d["alignment"] = self.alignment.describe()
        return d


def _axis_from_coefficients(u, q, e2):
    A, B = optics.normal_coefficients(u[..., 0], q, e2)
    a = B[..., None] * u
    a[..., 0] = A
    return a


def field_angles_deg(eye: Eye, dirs_eye, b_eye) -> np.ndarray:
    """Angle θ (degrees) between each receptor axis and the field, for checks."""
    a = eye.receptor_axes(dirs_eye)
    b = np.asarray(b_eye, float) / max(np.linalg.norm(b_eye), 1e-300)
    return angle_between_deg(a, b)


__all__ = ["Eye", "field_angles_deg"]
