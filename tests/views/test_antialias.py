"""Anti-aliased scene resampling against the box-filtered ground truth.

The ground truth of a pixel is the integral of the scene over the pixel's square, taken
as the mean of 16 × 16 sub-pixel samples (the pixel grid of ``view.scaled(16)``), each a
bilinear read of the scene raster: the definition of a box-filtered pixel (common
practice).  The fast path is the footprint filter over the scene's mipmap pyramid
(Williams 1983, SIGGRAPH, "Pyramidal parametrics"; footprint ellipse from the Jacobian
as in Heckbert 1989, "Fundamentals of texture mapping and image warping"), the baseline
today's plain bilinear read at the pixel centre.  Requirement: the RMS error of the
filtered path at least 4 × smaller than bilinear's.

Scenes: a zone plate cos(k r²) whose local frequency k·r/π reaches the raster's Nyquist
limit (0.5 cycles per texel) at the corners, and a checkerboard of 4-texel squares, on a
1024 × 512 raster.  The views minify that raster several times (the eye disc by about 7,
the perspective screen and head panorama by 2 to 4 near the middle and far more towards
the scene's poles, which a pitched pose brings into view): the regime the filter is for.
Pixels of the eye disc whose sub-pixels are not all inside the disc are left out (their
box integral would include the masked area).
"""

from dataclasses import replace

import numpy as np
import pytest

import renderer
from renderer import kernels
from renderer.eye import load_layout
from renderer.field import fixed
from renderer.pose import Pose
from renderer.response import Legendre
from renderer.scene import Scene
from renderer.views import EyeDisc, HeadPanorama, PerspectiveScreen

SW = 1024
SUB = 16


def _zone_plate():
    SH = SW // 2
    y, x = np.mgrid[0:SH, 0:SW] + 0.5
    cx, cy = SW / 2, SH / 2
    k = np.pi / (2 * np.hypot(cx, cy))
    v = 0.5 + 0.5 * np.cos(k * ((x - cx) ** 2 + (y - cy) ** 2))
    return np.repeat(v[..., None], 3, 2).astype(np.float32)


def _checkerboard(c=4):
    y, x = np.mgrid[0:SW // 2, 0:SW]
    return np.repeat((((x // c + y // c) % 2).astype(np.float32))[..., None], 3, 2)


SCENES = {"zone-plate": _zone_plate, "checkerboard": _checkerboard}
VIEWS = {"eye-disc": (EyeDisc(0, 64, radius_deg=160.0), Pose(0.0, 20.0, 0.0)),
         "perspective": (PerspectiveScreen(64, 48, 110.0, yaw_deg=30.0, pitch_deg=35.0,
                                           frame="head"), Pose(0.0, 20.0, 0.0)),
         "head-panorama": (HeadPanorama(128), Pose(40.0, 35.0, -10.0))}


def _truth(view, pose, layout, img):
    H, W = view.shape
    d = view.scaled(SUB).directions(layout)
    inside = ~np.isnan(d[..., 0])
    R = pose.R_head_world.T  # world <- head
    dw = np.where(inside[..., None], d, 1.0).reshape(-1, 3) @ R.T
    dw /= np.linalg.norm(dw, axis=1, keepdims=True)
    v = kernels.sample_equirect_numpy(img, SW / 2, dw)[:, 0].reshape(H, SUB, W, SUB)
    return v.mean(axis=(1, 3)), inside.reshape(H, SUB, W, SUB).all(axis=(1, 3))


@pytest.mark.parametrize("scene_name", list(SCENES))
@pytest.mark.parametrize("view_name", list(VIEWS))
def test_filtered_resampling_is_4x_closer_to_the_box_integral(scene_name, view_name):
    img = SCENES[scene_name]()
    scene = Scene(img, name=scene_name)
    view, pose = VIEWS[view_name]
    layout = load_layout("all-around")  # sees everywhere: nothing masked by the eyes
    truth, full = _truth(view, pose, layout, img)
    assert full.mean() > 0.5
    rms = {}
    for filt in ("bilinear", "mipmap"):
        # gain 0 and outside 1: the composite is the resampled scene itself
        out = renderer.render(fixed(50.0, 60.0, 0.0), pose, layout, Legendre([1.0]),
                              replace(view, filter=filt), scene=scene, gain=0.0, outside=1.0)
        rms[filt] = float(np.sqrt(np.mean((out[..., 0][full] - truth[full]) ** 2)))
    assert rms["bilinear"] > 0.1  # the baseline does alias here (else the test proves nothing)
    assert rms["bilinear"] >= 4.0 * rms["mipmap"], rms


def test_default_filter_is_the_mipmap_and_bilinear_stays_available():
    """Views default to the anisotropic mipmap; 'bilinear' gives today's plain reads (the
    twin's bilinear lookup at the pixel centres, to float32 precision); unknown names and
    bad supersampling factors are refused."""
    from renderer.errors import MagretinaError

    assert EyeDisc().filter == "mipmap" and HeadPanorama().supersample == 1
    img = _zone_plate()
    view = PerspectiveScreen(32, 24, 90.0, yaw_deg=10.0, frame="head", filter="bilinear")
    layout = load_layout("all-around")
    pose = Pose(0.0, 0.0, 0.0)
    out = renderer.render(fixed(50.0, 60.0, 0.0), pose, layout, Legendre([1.0]), view,
                          scene=Scene(img), gain=0.0, outside=1.0)
    d = view.directions(layout).reshape(-1, 3) @ pose.R_head_world
    want = kernels.sample_equirect_numpy(img, SW / 2, d)
    np.testing.assert_allclose(out.reshape(-1, 3), want, atol=1e-6)
    with pytest.raises(MagretinaError, match="filter"):
        EyeDisc(filter="box")
    with pytest.raises(MagretinaError, match="supersample"):
        HeadPanorama(64, supersample=0)


@pytest.mark.parametrize("view", [HeadPanorama(32, supersample=4),
                                  EyeDisc("left", 24, supersample=3),
                                  PerspectiveScreen(20, 12, 100.0, yaw_deg=180.0, frame="head",
                                                    supersample=2)])
def test_supersampling_is_the_box_average_of_the_fine_frame(view):
    """With supersample N the modulation of a pixel is the box average over its N × N
    sub-pixels (the definition of a box-filtered pixel, common practice): on a uniform
    scene (so the scene filter plays no part) the frame equals the N-times-finer frame
    (``view.scaled(N)``, its sub-pixel grid) averaged over each pixel's sub-pixels inside
    the view's footprint, to float32 precision; the field-of-view outline (lateral
    layout) then takes intermediate values."""
    from renderer.scene import uniform

    layout = load_layout("lateral")
    args = (fixed(50.0, 60.0, 5.0), Pose(30.0, 10.0, 0.0), layout, Legendre([0.7, 0.0, 0.4]))
    scene = uniform(256, 0.4)
    n = view.supersample
    got = renderer.render(*args, view, scene=scene, gain=1.5, outside=0.25)[..., 0]
    fine = view.scaled(n)
    ref = renderer.render(*args, fine, scene=scene, gain=1.5, outside=0.25)[..., 0]
    H, W = view.shape
    inside = np.ones(fine.shape, bool) if fine.equirect else \
        ~np.isnan(fine.directions(layout)[..., 0])
    cnt = inside.reshape(H, n, W, n).sum(axis=(1, 3))
    want = np.where(inside, ref, 0.0).reshape(H, n, W, n).sum(axis=(1, 3)) / np.maximum(cnt, 1)
    centre = ~np.isnan(view.directions(layout)[..., 0])
    np.testing.assert_allclose(got[centre], want[centre], atol=2e-6)
    plain = renderer.render(*args, replace(view, supersample=1), scene=scene, gain=1.5,
                            outside=0.25)[..., 0]
    # along the outline, partly seen pixels take values between seen and unseen ones
    assert np.abs(got - plain)[centre].max() > 0.05


def test_pyramid_is_built_once_per_scene_and_locks_the_image():
    """Scene.pyramid() returns the same object on every call and makes the image
    read-only, so the pyramid cannot go stale by an in-place edit."""
    scene = Scene(_checkerboard()[:64, :128].copy())
    p = scene.pyramid()
    assert scene.pyramid() is p
    with pytest.raises(ValueError):
        scene.image[0, 0, 0] = 0.5
