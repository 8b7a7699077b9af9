"""Views: pixel conventions against reference libraries (pyproj, py360convert)."""

import dataclasses

import numpy as np
import pytest

import renderer
from renderer.errors import MagretinaError
from renderer.eye import Eye, Layout, load_layout
from renderer.field import fixed
from renderer.pose import Pose
from renderer.response import Legendre
from renderer.scene import Scene
from renderer.views import REGISTRY, EyeDisc, PerspectiveScreen, RetinaView, WorldPanorama

pyproj = pytest.importorskip("pyproj")
py360convert = pytest.importorskip("py360convert")


def test_registry_names():
    """The contract names stay; the new views are registered."""
    for name in ("world-panorama", "head-panorama", "eye-disc", "perspective", "retina"):
        assert name in REGISTRY


@pytest.mark.parametrize("rim", [60.0, 120.0, 175.0])
def test_eye_disc_is_pyproj_aeqd_on_a_sphere(rim):
    """Azimuthal equidistant about the optic axis: pixel centre (x, y)·rim (rad) is the
    projected position of the pixel's direction under pyproj's ``aeqd`` on a unit sphere
    (+R=1) centred at lat 0, lon 0, with longitude = atan2(u_y, u_x) (image right = eye
    +y) and latitude = asin(−u_z) (image up = dorsal).  Pixel centres are at
    ((j + ½)/n·2 − 1, 1 − (i + ½)/n·2).  PROJ's series are exact to ~1e-9 here."""
    lay = Layout("t", (Eye(nasal_deg=rim, temporal_deg=rim, dorsal_deg=rim, ventral_deg=rim),))
    view = EyeDisc(0, size=41, radius_deg=rim)
    d = view.eye_frame_directions(lay).reshape(-1, 3)
    n = 41
    c = (np.arange(n) + 0.5) / n * 2 - 1
    x, y = np.meshgrid(c, -c)
    inside = np.hypot(x, y).ravel() <= 1.0
    proj = pyproj.Proj("+proj=aeqd +lat_0=0 +lon_0=0 +R=1 +units=m")
    d = d[inside]
    lon = np.degrees(np.arctan2(d[:, 1], d[:, 0]))
    lat = np.degrees(np.arcsin(np.clip(-d[:, 2], -1, 1)))
    px, py = proj(lon, lat)
    R = np.radians(rim)
    np.testing.assert_allclose(px, x.ravel()[inside] * R, atol=1e-8)
    np.testing.assert_allclose(py, y.ravel()[inside] * R, atol=1e-8)


def _smooth_panorama(W):
    """An equirectangular image (our world-panorama convention) of smooth functions of
    direction, three channels."""
    view = WorldPanorama(W)
    d = view.directions()
    return np.stack([0.5 + 0.3 * d[..., 0] * d[..., 1] + 0.2 * d[..., 2],
                     0.5 + 0.4 * np.sin(2 * d[..., 0] + d[..., 1]) * 0.5,
                     0.5 + 0.25 * d[..., 2] * d[..., 0]], -1).astype(np.float32)


def _analytic(d):
    return np.stack([0.5 + 0.3 * d[..., 0] * d[..., 1] + 0.2 * d[..., 2],
                     0.5 + 0.4 * np.sin(2 * d[..., 0] + d[..., 1]) * 0.5,
                     0.5 + 0.25 * d[..., 2] * d[..., 0]], -1)


@pytest.mark.parametrize("yaw,pitch", [(0.0, 0.0), (47.0, 20.0), (-130.0, -35.0)])
def test_perspective_against_py360convert(yaw, pitch):
    """py360convert.e2p samples an equirectangular image (column 0 = longitude −180°,
    pixel centres at half-pixel offsets, positive u turns right, positive v looks up)
    bilinearly; its perspective grid puts the first and last pixel *centres* at
    ±tan(fov/2), ours puts the image *edges* there, so it is called with
    tan(fov'/2) = tan(fov/2)·(W − 1)/W.  Our perspective directions evaluated exactly
    must match its output within bilinear error (h²/8·|g''| ≈ 1e-5 at 2048 columns) plus
    float32 rounding; ignoring the pixel-centre difference costs ~1e-3."""
    W, H, hfov = 160, 100, 60.0
    img = _smooth_panorama(2048)
    view = PerspectiveScreen(W, H, hfov, yaw_deg=yaw, pitch_deg=pitch)
    t = np.tan(np.radians(hfov) / 2)
    fov_h = 2 * np.degrees(np.arctan(t * (W - 1) / W))
    fov_v = 2 * np.degrees(np.arctan(t * (H - 1) / W))
    ref = py360convert.e2p(img, (fov_h, fov_v), yaw, pitch, (H, W), mode="bilinear")
    np.testing.assert_allclose(_analytic(view.directions()), ref, atol=1e-5)


def test_perspective_composite_samples_scene_like_py360convert():
    """The full render path with gain 0 and nothing masked returns the scene sampled at
    the perspective pixels: our plain bilinear scene lookup (filter = "bilinear") against
    py360convert's on the same image, to float32 precision."""
    img = _smooth_panorama(512)
    scene = Scene(img, north_col=256.0, name="t")
    W, H, hfov = 64, 48, 80.0
    view = PerspectiveScreen(W, H, hfov, yaw_deg=25.0, pitch_deg=10.0, filter="bilinear")
    out = renderer.render(fixed(50, 60, 0), Pose(0, 0, 0), load_layout("all-around"),
                          Legendre([1.0]), view, scene=scene, gain=0.0, outside=1.0)
    t = np.tan(np.radians(hfov) / 2)
    ref = py360convert.e2p(img, (2 * np.degrees(np.arctan(t * (W - 1) / W)),
                                 2 * np.degrees(np.arctan(t * (H - 1) / W))), 25.0, 10.0, (H, W))
    np.testing.assert_allclose(out, ref, atol=2e-5)


def test_perspective_solid_angle_of_the_screen():
    """Total solid angle of a rectangular screen with half-angles a, b:
    Ω = 4·arcsin(sin a · sin b) (common formula); midpoint rule error ~ s²."""
    v = PerspectiveScreen(400, 300, 90.0)
    a = np.radians(45.0)
    b = np.arctan(np.tan(a) * 300 / 400)
    assert v.solid_angle().sum() == pytest.approx(4 * np.arcsin(np.sin(a) * np.sin(b)), rel=1e-4)
    assert v.vfov_deg == pytest.approx(np.degrees(2 * b))


@pytest.mark.parametrize("axial_mm,d", [(None, 0.0), (None, 2.2), (5.0, 1.0), (7.5, -1.5)])
def test_retina_view_pixels_are_the_receptors_they_show(axial_mm, d):
    """Round trip through independent code: the ray from each retina-view pixel's view
    direction lands (ray-ellipsoid intersection) on the retinal point whose normal is
    the pixel's (β, meridian)."""
    eye = Eye(retina_radius_mm=6.0, retina_axial_mm=axial_mm, nodal_offset_mm=d, nasal_deg=150,
              temporal_deg=150, dorsal_deg=150, ventral_deg=150)
    lay = Layout("t", (eye,))
    view = RetinaView(0, size=33, rim_deg=150.0)
    u = view.eye_frame_directions(lay).reshape(-1, 3)
    want = view.retinal_directions(lay).reshape(-1, 3)
    ok = ~np.isnan(u[:, 0])
    np.testing.assert_allclose(-eye.retinal_normals(u[ok]), want[ok], atol=1e-10)


def test_retina_view_is_the_inverted_eye_disc_at_d0():
    """d = 0 on a sphere: β = α, and the retinal image is inverted, so the retina view is the
    eye disc turned by 180° (geometry of a pinhole at the centre).  Moving the nodal point
    leaves each normal receptor's value (fixed by its retinal position) unchanged but
    moves the field's edge on the retina, and changes chief-ray receptors' values."""
    lay = load_layout("frontal")
    f, p, r = fixed(50, 60, 10), Pose(30, 5, 0), Legendre([0.6, 0.0, 0.3])
    disc = renderer.render_pattern(f, p, lay, r, EyeDisc(0, 40, radius_deg=60.0))
    ret = renderer.render_pattern(f, p, lay, r, RetinaView(0, 40, rim_deg=60.0))
    np.testing.assert_allclose(ret, np.rot90(disc, 2), atol=1e-12, equal_nan=True)
    lay2 = lay.with_eyes([dataclasses.replace(lay.eyes[0], nodal_offset_mm=2.0)])
    wide = RetinaView(0, 40, rim_deg=80.0)
    ret0 = renderer.render_pattern(f, p, lay, r, wide)
    ret2 = renderer.render_pattern(f, p, lay2, r, wide)
    both = ~np.isnan(ret0) & ~np.isnan(ret2)
    np.testing.assert_allclose(ret2[both], ret0[both], atol=1e-12)
    assert np.isnan(ret2).sum() < np.isnan(ret0).sum()  # β > α: the 60° field reaches β ≈ 77°
    lay3 = lay2.with_alignment("chief-ray")
    ret3 = renderer.render_pattern(f, p, lay3, r, wide)
    assert np.nanmax(np.abs(ret3 - ret2)) > 1e-3


def test_view_bad_input():
    """Bad view parameters name the argument and the allowed range."""
    with pytest.raises(MagretinaError, match=r"hfov_deg = 180.*\(0, 170\]"):
        PerspectiveScreen(hfov_deg=180.0)
    with pytest.raises(MagretinaError, match="width = 1.5"):
        PerspectiveScreen(width=1.5)
    with pytest.raises(MagretinaError, match="frame = 'eye'"):
        PerspectiveScreen(frame="eye")
    with pytest.raises(MagretinaError, match=r"rim_deg = 180"):
        RetinaView(rim_deg=180.0)
