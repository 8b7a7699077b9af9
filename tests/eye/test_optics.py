"""Ray geometry, reduced eye and retinal magnification of one eye (renderer.eye.optics)."""

import numpy as np
import pytest
import sympy as sp

from renderer.eye import Eye, ReducedEye
from renderer.eye import optics


@pytest.mark.parametrize("q", [-0.7, -0.2, 0.0, 0.35, 0.9])
def test_eccentricity_follows_law_of_sines(q):
    """Ray through the nodal point at d = qR in front of the centre of a spherical retina:
    β = α + arcsin((d/R) sin α) (law of sines in the triangle centre-nodal point-retinal
    point; common practice, also checked by ray tracing in the project notes).  The
    implementation intersects the ray with the sphere, so agreement to round-off is a
    real check of two different computations."""
    alpha = np.radians(np.linspace(0.0, 175.0, 351))
    beta = optics.retinal_eccentricity(alpha, q)
    np.testing.assert_allclose(beta, alpha + np.arcsin(q * np.sin(alpha)), atol=1e-12)


def test_pinhole_on_the_sphere_doubles_the_angle():
    """Nodal point on the sphere (d = R): β = 2α (inscribed-angle theorem, common practice)."""
    alpha = np.radians(np.linspace(0.0, 89.0, 90))
    np.testing.assert_allclose(optics.retinal_eccentricity(alpha, 1.0), 2 * alpha, atol=1e-12)


def test_nodal_point_at_centre_makes_receptor_axes_the_view_directions():
    """d = 0 on a sphere: the inward normal at the hit point is the view direction
    (project design note: keep as a test)."""
    rng = np.random.default_rng(1)
    u = rng.normal(size=(500, 3))
    u /= np.linalg.norm(u, axis=1, keepdims=True)
    eye = Eye(retina_radius_mm=6.0, nodal_offset_mm=0.0)
    np.testing.assert_allclose(eye.receptor_axes(u), u, atol=1e-14)


@pytest.mark.parametrize("a_over_b,q", [(0.8, 0.3), (1.25, -0.4), (1.0, 0.5)])
def test_ellipsoid_normal_is_the_surface_gradient(a_over_b, q):
    """Ellipsoidal retina x²/a² + ρ²/b² = 1: the hit point lies on the nodal-point ray
    and on the surface, and the receptor normal is −∇F/|∇F| with the gradient
    differentiated symbolically by sympy (independent of the closed-form code)."""
    x, y, z, A = sp.symbols("x y z A", real=True)
    F = x**2 / A**2 + y**2 + z**2
    grad = sp.lambdify((x, y, z, A), [sp.diff(F, v) for v in (x, y, z)])
    eye = Eye(retina_radius_mm=5.0, retina_axial_mm=5.0 * a_over_b, nodal_offset_mm=5.0 * q)
    rng = np.random.default_rng(2)
    u = rng.normal(size=(300, 3))
    u /= np.linalg.norm(u, axis=1, keepdims=True)
    p = eye.retinal_points(u)
    np.testing.assert_allclose(p[:, 0] ** 2 / a_over_b**2 + p[:, 1] ** 2 + p[:, 2] ** 2, 1.0,
                               atol=1e-12)
    # collinear with the nodal point, behind it (P = N - t u, t > 0)
    rel = p - np.array([q, 0.0, 0.0])
    np.testing.assert_allclose(np.cross(rel, u), 0.0, atol=1e-12)
    assert np.all(np.sum(rel * u, axis=1) < 0)
    g = -np.array(grad(p[:, 0], p[:, 1], p[:, 2], a_over_b)).T
    g /= np.linalg.norm(g, axis=1, keepdims=True)
    np.testing.assert_allclose(eye.retinal_normals(u), g, atol=1e-12)


def test_reduced_eye_matches_the_handbook():
    """Emsley-type reduced eye, r = 5.55 mm, n' = 4/3 (Schwartz, Geometrical and Visual
    Optics): power about 60 D, second focal length about 22.2 mm, about 0.29 mm of
    retina per degree near the axis.  Tolerances are the handbook's rounding."""
    red = ReducedEye(5.55, 4.0 / 3.0)
    assert red.power_D == pytest.approx(60.0, abs=0.1)
    assert red.second_focal_length_mm == pytest.approx(22.2, abs=0.005)
    assert red.paraxial_mm_per_deg == pytest.approx(0.29, abs=0.005)


def test_reduced_eye_sets_the_nodal_point_and_magnification():
    """A retina of radius R with its posterior pole at the reduced eye's focus: d = PND − R,
    and the eye's paraxial magnification equals the reduced eye's (R + d)·π/180
    (posterior nodal distance times angle; project notes, checked by ray tracing)."""
    eye = Eye(retina_radius_mm=11.0, cornea_radius_mm=5.55, refractive_index=4.0 / 3.0)
    assert eye.nodal_offset_mm == pytest.approx(5.55 * 3 - 11.0, abs=1e-12)
    rad, tan = eye.magnification_mm_per_deg(np.array([0.0, 0.01]))
    np.testing.assert_allclose(rad, eye.reduced_eye.paraxial_mm_per_deg, rtol=1e-6)
    np.testing.assert_allclose(tan, eye.reduced_eye.paraxial_mm_per_deg, rtol=1e-6)


@pytest.mark.parametrize("q", [-0.5, 0.0, 0.4, 0.8])
def test_magnification_radial_and_tangential_closed_form(q):
    """Sphere: radial magnification R·dβ/dα = R(1 + q cos α/√(1 − q² sin²α)) (derivative of
    the law-of-sines eccentricity) and tangential R·sin β/sin α (circumference ratio),
    in mm/deg; near the axis both are (R + d)·π/180.  Central differences (step 1e-6 rad)
    limit agreement to about 1e-8 relative."""
    R = 6.0
    alpha = np.radians(np.linspace(0.5, 150.0, 60))
    eye = Eye(retina_radius_mm=R, nodal_offset_mm=q * R)
    rad, tan = eye.magnification_mm_per_deg(np.degrees(alpha))
    k = np.pi / 180 * R
    beta = alpha + np.arcsin(q * np.sin(alpha))
    np.testing.assert_allclose(rad, k * (1 + q * np.cos(alpha) / np.sqrt(1 - (q * np.sin(alpha)) ** 2)),
                               rtol=1e-7)
    np.testing.assert_allclose(tan, k * np.sin(beta) / np.sin(alpha), rtol=1e-9)
    r0, t0 = eye.magnification_mm_per_deg(0.0)
    assert r0 == pytest.approx(k * (1 + q), rel=1e-7) and t0 == pytest.approx(k * (1 + q), rel=1e-9)


def test_ellipsoid_paraxial_magnification_is_the_posterior_nodal_distance():
    """Near the axis the image lies at the posterior nodal distance a + d whatever the
    retina's curvature (paraxial optics, common practice): both magnifications tend to
    (a + d)·π/180, while off axis an oblate and a prolate retina differ."""
    ob = Eye(retina_radius_mm=6.0, retina_axial_mm=5.0, nodal_offset_mm=1.0)
    pr = Eye(retina_radius_mm=6.0, retina_axial_mm=7.0, nodal_offset_mm=1.0)
    for e in (ob, pr):
        r, t = e.magnification_mm_per_deg(1e-3)
        assert r == pytest.approx(e.posterior_nodal_distance_mm * np.pi / 180, rel=1e-5)
        assert t == pytest.approx(e.posterior_nodal_distance_mm * np.pi / 180, rel=1e-5)
    assert ob.magnification_mm_per_deg(60.0)[0] != pytest.approx(pr.magnification_mm_per_deg(60.0)[0],
                                                                 rel=1e-2)


@pytest.mark.parametrize("e2,q", [(1.0, 0.4), (1.44, -0.3), (0.7, 0.6)])
def test_eccentricity_inverse(e2, q):
    """visual_angle_from_eccentricity inverts the ray geometry (round trip)."""
    alpha = np.radians(np.linspace(0.0, 150.0, 151))
    beta = optics.retinal_eccentricity(alpha, q, e2)
    np.testing.assert_allclose(optics.visual_angle_from_eccentricity(beta, q, e2), alpha, atol=1e-10)
