"""Receptor mosaics: counts against areas, the ray geometry, profiles, seeds and errors."""

import math

import numpy as np
import pytest

from renderer.errors import MagretinaError
from renderer.eye import Eye, load_layout
from renderer.eye.layout import Layout
from renderer.mosaic import (SPHERE_DEG2, MosaicSpec, build_mosaic, retinal_area_per_sr,
                             sphere_jittered, sphere_poisson_disc)

from .conftest import sphere_eye


def test_jittered_lattice_is_uniform_in_area():
    """Each point lies in its own equal-area band (Archimedes' hat-box theorem: a sphere's
    zone area is 2πR·height), so the count in any zone is within ±1 of n·area/4π, and the
    first moments of the set vanish to O(1/n)."""
    n = 20000
    p = sphere_jittered(n, np.random.default_rng(3))
    assert np.allclose(np.linalg.norm(p, axis=1), 1.0, atol=1e-12)
    for lo, hi in ((-1, -0.3), (-0.3, 0.5), (0.5, 0.9)):
        cnt = np.sum((p[:, 0] >= lo) & (p[:, 0] < hi))
        assert abs(cnt - n * (hi - lo) / 2) <= 1.5
    assert np.all(np.abs(p.mean(axis=0)) < 5.0 / n ** 0.5 / 10)


def test_density_per_square_degree_gives_count_times_solid_angle():
    """deg² density: expected count = density × field solid angle.  The solid angle of a
    lateral eye's field is integrated independently on a fine equirectangular grid
    (pixel solid angle cos(el)·Δaz·Δel, common practice); the jittered count differs by
    boundary cells only, well under 2 %."""
    lay = load_layout("lateral")
    eye = lay.eyes[0]
    H = 720
    el = np.radians(90 - (np.arange(H) + 0.5) * 180 / H)
    az = np.radians(-180 + (np.arange(2 * H) + 0.5) * 180 / H)
    E, A = np.meshgrid(el, az, indexing="ij")
    d = np.stack([np.cos(E) * np.cos(A), np.cos(E) * np.sin(A), -np.sin(E)], -1).reshape(-1, 3)
    w = (np.cos(E) * (np.pi / H) ** 2).reshape(-1)
    omega = np.sum(w[eye.visible(d)])  # eye frame: the grid is rotation-free, any frame works
    spec = MosaicSpec(density=0.2, unit="deg2")
    m = build_mosaic(Layout("one", (eye,)), spec)
    expected = 0.2 * omega * SPHERE_DEG2 / (4 * math.pi)
    assert abs(m.n_receptors / expected - 1) < 0.02


def test_density_per_mm2_with_nodal_point_at_centre():
    """Retina of radius R with the nodal point at its centre: area = R² × solid angle
    (sphere geometry), so a full-field eye gets round(ρ·4πR²) receptors exactly and the
    per-mm² and per-deg² mosaics agree when ρ_deg² = ρ_mm²·R²·(π/180)²."""
    eye = sphere_eye(radius_mm=6.0)
    lay = Layout("s", (eye,))
    m = build_mosaic(lay, MosaicSpec(density=3.0, unit="mm2"))
    assert m.n_receptors == round(3.0 * 4 * math.pi * 36.0)
    m2 = build_mosaic(lay, MosaicSpec(density=3.0 * 36.0 * (math.pi / 180) ** 2, unit="deg2"))
    assert abs(m2.n_receptors - m.n_receptors) <= 1


def test_mm2_density_follows_retinal_magnification():
    """With the nodal point off centre, uniform retinal density means more receptors per
    steradian where dA/dΩ is larger.  For a ray through a nodal point at distance d in
    front of the centre of a sphere of radius R the paraxial magnification is R + d mm per
    radian (REFERENCES: eye and visual field, checked by ray tracing), so near the optic
    axis dA/dΩ = (R + d)²; the mosaic's receptor axes equal Eye.receptor_axes."""
    eye = Eye(retina_radius_mm=6.0, nodal_offset_mm=2.0, nasal_deg=40, temporal_deg=40,
              dorsal_deg=40, ventral_deg=40, name="e")
    on_axis = retinal_area_per_sr(eye, np.array([[1.0, 0.0, 0.0]]))[0]
    assert on_axis == pytest.approx((6.0 + 2.0) ** 2, rel=1e-6)
    lay = Layout("e", (eye,))
    m = build_mosaic(lay, MosaicSpec(density=5.0, unit="mm2", seed=1))
    u = m.dirs_head @ eye.R_head_eye  # head -> eye
    assert np.allclose(m.axes_eye, eye.receptor_axes(u), atol=1e-12)
    cap = np.arccos(np.clip(u[:, 0], -1, 1)) < np.radians(10)
    omega = 2 * np.pi * (1 - np.cos(np.radians(10)))
    expected = 5.0 * omega * np.mean(retinal_area_per_sr(eye, u[cap]))
    assert abs(cap.sum() - expected) < 4 * np.sqrt(expected)


def test_eccentricity_profile_thins_receptors():
    """Relative density falling linearly from 1 at the optic axis to 0 at 90°: the count
    inside 30° relative to a uniform mosaic is ∫₀^30 (1 − α/90) sin α dα / ∫₀^30 sin α dα
    (solid angle element sin α dα dφ), checked within 4 binomial standard errors."""
    lay = Layout("s", (sphere_eye(),))
    base = build_mosaic(lay, MosaicSpec(density=0.5, seed=2))
    m = build_mosaic(lay, MosaicSpec(density=0.5, seed=2, eccentricity_deg=(0.0, 90.0),
                                     relative_density=(1.0, 0.0)))
    a = np.radians(np.linspace(0, 30, 3001))
    frac = np.trapezoid((1 - a / (np.pi / 2)) * np.sin(a), a) / np.trapezoid(np.sin(a), a)
    n0 = np.sum(base.dirs_head[:, 0] > np.cos(np.radians(30)))
    n1 = np.sum(m.dirs_head[:, 0] > np.cos(np.radians(30)))
    assert abs(n1 - frac * n0) < 4 * np.sqrt(n0 * frac * (1 - frac))
    assert np.sum(m.dirs_head[:, 0] < -0.01) == 0  # beyond 90°: relative density 0


def test_poisson_disc_spacing_and_count():
    """Poisson-disc sets keep a minimum distance: near the projection centre (optic axis)
    no two points are closer than the disc radius r (Bridson 2007, SIGGRAPH sketches, as
    implemented by scipy.stats.qmc.PoissonDisk); the count matches the target within a
    binomial spread, and the minimum spacing is far above that of random points."""
    from scipy.spatial import cKDTree

    n = 1500
    p = sphere_poisson_disc(n, np.random.default_rng(5))
    assert abs(p.shape[0] - n) < 5 * np.sqrt(n)
    r_plane = math.sqrt(0.60 * 4 * math.pi / (1.15 * n))
    near = p[p[:, 0] > np.cos(np.radians(30))]
    dmin = cKDTree(near).query(near, k=2)[0][:, 1].min()
    # chord on the sphere vs plane distance: scale factor >= cos(15°) within 30° of centre
    assert dmin > 0.95 * r_plane * np.cos(np.radians(15))
    rnd = np.random.default_rng(5).standard_normal((p.shape[0], 3))
    rnd /= np.linalg.norm(rnd, axis=1, keepdims=True)
    assert cKDTree(rnd).query(rnd, k=2)[0][:, 1].min() < 0.3 * dmin


def test_seeded_and_reproducible():
    lay = load_layout("lateral")
    a = build_mosaic(lay, MosaicSpec(density=0.05, seed=4))
    b = build_mosaic(lay, MosaicSpec(density=0.05, seed=4))
    c = build_mosaic(lay, MosaicSpec(density=0.05, seed=5))
    assert np.array_equal(a.axes_eye, b.axes_eye) and np.array_equal(a.eye_index, b.eye_index)
    assert not np.array_equal(a.axes_eye[:50], c.axes_eye[:50])


def test_pooling_cells_have_the_pool_solid_angle():
    """Pools are Voronoi cells of a lattice with 2/(1 − cos ρ) centres on the sphere, so on
    a full-field eye the mean pool holds the receptors of a cap of radius ρ (solid angle
    2π(1 − cos ρ)) and its members lie within about 2ρ of each other's mean direction."""
    lay = Layout("s", (sphere_eye(),))
    m = build_mosaic(lay, MosaicSpec(density=1.0, pool_radius_deg=8.0))
    cap = 2 * np.pi * (1 - np.cos(np.radians(8))) * SPHERE_DEG2 / (4 * np.pi)
    assert abs(m.n_receptors / m.n_pools / cap - 1) < 0.05
    worst = 0.0
    for p in range(0, m.n_pools, 17):
        d = m.dirs_head[m.pool == p]
        c = d.mean(axis=0)
        c /= np.linalg.norm(c)
        worst = max(worst, np.degrees(np.arccos(np.clip(d @ c, -1, 1))).max())
    assert worst < 2.0 * 8.0


@pytest.mark.parametrize("kw, words", [
    ({"density": -1.0}, ["density", "-1"]),
    ({"density": 0.0}, ["density", "allowed"]),
    ({"unit": "cm2"}, ["unit", "mm2", "deg2"]),
    ({"method": "blue"}, ["method", "jittered"]),
    ({"pool_radius_deg": -2.0}, ["pool_radius_deg"]),
    ({"eccentricity_deg": (0, 30), "relative_density": (1.0,)}, ["equal length"]),
    ({"eccentricity_deg": (0, 30), "relative_density": (1.0, 1.5)}, ["relative_density"]),
])
def test_bad_specs_are_named(kw, words):
    with pytest.raises(MagretinaError) as e:
        MosaicSpec(**kw)
    for w in words:
        assert w in str(e.value)


def test_pool_radius_larger_than_field_is_refused():
    lay = load_layout("lateral")
    with pytest.raises(MagretinaError, match=r"larger than the field of eye 'left'.*100"):
        build_mosaic(lay, MosaicSpec(pool_radius_deg=120.0))


def test_too_low_density_is_refused():
    with pytest.raises(MagretinaError, match="too low"):
        build_mosaic(load_layout("lateral"), MosaicSpec(density=1e-6))
