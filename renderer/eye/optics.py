"""Ray geometry of one eye: where a ray through the nodal point meets the retina, the
retina's normal there, the reduced-eye construction and retinal magnification.

All functions work in the eye frame (x along the optic axis, out of the eye) in units
of the retina's equatorial radius b, on a retina that is an ellipsoid of revolution
about the optic axis, x²/a² + (y² + z²)/b² = 1 (a sphere when a = b), centred at the
origin, with the nodal point on the axis at (q, 0, 0), q = d/b.  Because the eye is
rotationally symmetric about its optic axis, every quantity depends on the view
direction only through its angle α from the axis and lies in that direction's
meridian plane; the functions therefore return the two numbers (A, B) with

    receptor normal = A·x̂ + B·u⊥,      u⊥ = u − (u·x̂) x̂,

which is also how the rendering kernels evaluate it (see :mod:`renderer.kernels`;
:func:`ray_parameter` and :func:`normal_coefficients` are defined in
:mod:`renderer.kernels.twins` and re-exported here).
This module is the geometry only; it knows nothing of fields or responses.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import MagretinaError, check_range
# the base geometry is the kernels' reference maths: one definition, below this layer
from ..kernels.twins import normal_coefficients, ray_parameter


def retinal_eccentricity(alpha, q, e2=1.0):
    """Retinal eccentricity β (rad) of the receptor hit from visual angle α (rad).

    β is the angle between the inward normal at the hit point and the optic axis,
    found by ray geometry.  For a sphere it equals the angle at the centre between
    the posterior pole and the hit point, and β = α + arcsin(q·sin α) (law of sines).
    """
    alpha = np.asarray(alpha, dtype=np.float64)
    A, B = normal_coefficients(np.cos(alpha), q, e2)
    return np.arctan2(B * np.abs(np.sin(alpha)), A)


def retinal_point_coords(alpha, q, e2=1.0):
    """(x, ρ) of the hit point in the meridian plane, units of b: x along the optic
    axis, ρ ≥ 0 the distance from it."""
    alpha = np.asarray(alpha, dtype=np.float64)
    ux = np.cos(alpha)
    t = ray_parameter(ux, q, e2)
    return q - t * ux, t * np.abs(np.sin(alpha))


def magnification_mm_per_deg(alpha, q, b_mm, e2=1.0, dalpha=1e-6):
    """Retinal magnification at visual angle α: (radial, tangential) in mm per degree.

    Radial: arc length along the retinal meridian per degree of visual angle.
    Tangential: arc length along the retinal parallel per degree of visual angle
    across meridians, ρ(α)/sin α.  Near the axis both tend to the posterior nodal
    distance (b·(a/b + q) for the ellipsoid, R + d for a sphere) times π/180.

    Parameters
    ----------
    alpha : array_like
        Visual angle from the optic axis, rad, in [0, π).
    q, e2 : float
        As :func:`ray_parameter`.
    b_mm : float
        Equatorial radius of the retina, mm.
    dalpha : float
        Step (rad) of the central difference for the radial arc length.
    """
    alpha = np.asarray(alpha, dtype=np.float64)
    x1, r1 = retinal_point_coords(alpha - dalpha, q, e2)
    x2, r2 = retinal_point_coords(alpha + dalpha, q, e2)
    # across α = 0 the meridian continues on the other side: ρ changes sign there
    r1 = np.where(alpha - dalpha < 0, -r1, r1)
    radial = np.hypot(x2 - x1, r2 - r1) / (2 * dalpha)
    a_over_b = 1.0 / np.sqrt(e2)
    pnd = a_over_b + q
    s = np.sin(alpha)
    _, rho = retinal_point_coords(alpha, q, e2)
    tangential = np.where(np.abs(s) > 1e-9, rho / np.where(np.abs(s) > 1e-9, np.abs(s), 1.0), pnd)
    to_deg = np.pi / 180.0 * b_mm
    return radial * to_deg, tangential * to_deg


def visual_angle_from_eccentricity(beta, q, e2=1.0):
    """Inverse of :func:`retinal_eccentricity`: the view angle α (rad) whose ray
    lands at retinal eccentricity β (rad), by direct geometry (P → nodal point)."""
    beta = np.asarray(beta, dtype=np.float64)
    c, s = np.cos(beta), np.sin(beta)
    # the point on the ellipsoid whose inward normal makes angle β with the axis:
    # normal ∝ (x e2, ρ) → (x, ρ) = −(cos β / e2, sin β)·λ on the surface
    a2 = 1.0 / e2
    lam = 1.0 / np.sqrt(c * c * a2 + s * s)
    x, rho = -c * a2 * lam, s * lam
    return np.arctan2(rho, q - x)


@dataclass(frozen=True)
class ReducedEye:
    """A single refracting surface in air: the reduced eye.

    Parameters
    ----------
    cornea_radius_mm : float
        Radius r of the refracting surface, mm (> 0).
    refractive_index : float
        Index n' behind the surface (> 1).

    Notes
    -----
    With the object in air, the power is F = (n' − 1)/r, the second focal length
    (surface to image focus) f' = n'·r/(n' − 1), and the nodal point lies at the
    centre of curvature, r behind the surface, so the posterior nodal distance is
    f' − r = r/(n' − 1) = 1/F.  (Schwartz, Geometrical and Visual Optics, the
    reduced eye; common practice.)
    """

    cornea_radius_mm: float
    refractive_index: float

    def __post_init__(self):
        check_range("cornea_radius_mm", self.cornea_radius_mm, 0.0, None, lo_open=True, unit="mm")
        n = check_range("refractive_index", self.refractive_index, 1.0, None, lo_open=True)
        if n > 3.0:
            raise MagretinaError(f"refractive_index = {n!r} is out of range; allowed (1, 3] "
                                 f"(ocular media)")

    @property
    def power_D(self) -> float:
        """Refracting power, dioptres."""
        return (self.refractive_index - 1.0) / (self.cornea_radius_mm * 1e-3)

    @property
    def second_focal_length_mm(self) -> float:
        """Surface to the image-side focal point, mm."""
        n = self.refractive_index
        return n * self.cornea_radius_mm / (n - 1.0)

    @property
    def posterior_nodal_distance_mm(self) -> float:
        """Nodal point (centre of curvature) to the focal point on the axis, mm."""
        return self.second_focal_length_mm - self.cornea_radius_mm

    @property
    def paraxial_mm_per_deg(self) -> float:
        """Retinal image size per degree near the axis for a focused eye, mm/deg."""
        return self.posterior_nodal_distance_mm * np.pi / 180.0

    def nodal_offset_mm(self, retina_axial_mm: float) -> float:
        """The nodal point's distance in front of a retina's centre when the retina's
        posterior pole lies at the focus: d = PND − a (a the retina's axial radius)."""
        return self.posterior_nodal_distance_mm - float(retina_axial_mm)


__all__ = ["ray_parameter", "normal_coefficients", "retinal_eccentricity",
           "retinal_point_coords", "magnification_mm_per_deg",
           "visual_angle_from_eccentricity", "ReducedEye"]
