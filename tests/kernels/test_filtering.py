"""The prefiltered scene lookup: the mipmap pyramid's levels against exact area averages,
and the footprint-filter kernels (resampled equirectangular views, direction-grid views)
against their NumPy twins (an independent vectorised implementation of the same filter:
Williams 1983 pyramid, footprint axes from the Jacobian's singular values as in Heckbert
1989, taps along the major axis)."""

import numpy as np
import pytest

from renderer import kernels, pipeline
from renderer.eye import load_layout
from renderer.field import fixed
from renderer.pose import Pose
from renderer.response import Legendre
from renderer.views import EyeDisc, PerspectiveScreen


@pytest.mark.parametrize("shape", [(8, 16, 3), (7, 14, 1), (5, 9, 2)])
def test_pyramid_levels_are_exact_area_averages(shape):
    """Each level of the pyramid is the area average of level 0 over its cells.  The
    reference replicates every texel n_out times along each axis (so the cells align with
    whole replicated texels) and takes plain block means: the definition of the area
    average of a piecewise-constant image (common practice); float32 storage: 1e-6."""
    rng = np.random.default_rng(sum(shape))
    img = rng.uniform(size=shape).astype(np.float32)
    pyr = kernels.build_pyramid(img)
    H, W = shape[:2]
    assert pyr.levels[-1, 1:].tolist() == [1, 1]
    for l in range(pyr.levels.shape[0]):
        lv = pyr.level(l)
        h, w = lv.shape[:2]
        big = np.repeat(np.repeat(img.astype(np.float64), h, axis=0), w, axis=1)
        ref = big.reshape(h, H, w, W, -1).mean(axis=(1, 3))
        np.testing.assert_allclose(lv, ref, atol=1e-6)
        assert pyr.scale[l] == pytest.approx(np.sqrt(H / h * W / w))


def _inputs():
    return pipeline.prepare(fixed(48.0, 64.0, 2.0), Pose(121.0, 14.0, -9.0),
                            load_layout("lateral"), Legendre([0.6, 0.0, 0.25]))


@pytest.mark.parametrize("filt", ["trilinear", "mipmap"])
@pytest.mark.parametrize("north_col, W", [(0.0, 160), (37.3, 160), (37.3, 400)])
def test_resampled_footprint_filter_matches_twin(filt, north_col, W):
    """Head panorama over a random scene, minified (W = 160 over a 192-wide scene) and
    magnified (W = 400: most pixels take the one-bilinear-read shortcut): the kernel's
    analytic per-row Jacobian and filter against the twin fed with the same analytic
    pixel steps (v changes by (2π/W)·∂v/∂az per column and (π/H)·∂v/∂el per row): 1e-6
    (float32 output)."""
    inp = _inputs()
    H = W // 2
    rng = np.random.default_rng(5)
    img = rng.uniform(size=(96, 192, 3)).astype(np.float32)
    pyr = kernels.build_pyramid(img)
    tables = kernels.equirect_tables(W, H)
    Q = np.ascontiguousarray(inp.R_head_world.T)
    out = np.empty((H, W, 3), np.float32)
    kernels.composite_resampled(img, north_col, *tables, np.eye(3), Q, inp.R_eye_head,
                                inp.eye_params, inp.b_eye, inp.lut, -1, 1 / 0.8, 0.4, 0.25, out,
                                pyramid=pyr, ntaps_max=kernels.ntaps_for(filt))
    ce, se, caz, saz = (np.asarray(t) for t in tables)
    CE, SE = ce[:, None] * np.ones(W), se[:, None] * np.ones(W)
    CA, SA = np.ones(H)[:, None] * caz, np.ones(H)[:, None] * saz
    tcol = np.stack([-CE * SA, CE * CA, 0 * CE], -1).reshape(-1, 3) * (2 * np.pi / W)
    trow = np.stack([SE * CA, SE * SA, CE], -1).reshape(-1, 3) * (np.pi / H)
    dirs = kernels.equirect_dirs(*tables)
    sig = kernels.pattern_numpy(dirs, np.eye(3), inp.R_eye_head, inp.eye_params, inp.b_eye,
                                inp.lut, -1)
    px = kernels.sample_filtered_numpy(img, north_col, dirs @ Q.T, tcol @ Q.T, trow @ Q.T, filt,
                                       pyramid=pyr)
    want = kernels.modulate_numpy(px, sig, 1 / 0.8, 0.4, 0.25)
    np.testing.assert_allclose(out.reshape(-1, 3), want, atol=1e-6)
    # the analytic steps are the derivatives the twin's grid differences approximate
    dc, dr = kernels.grid_tangents_numpy(dirs.reshape(H, W, 3))
    assert np.abs(dc[:, 1:-1].reshape(-1, 3) - tcol.reshape(H, W, 3)[:, 1:-1].reshape(-1, 3)).max() < 1e-3


@pytest.mark.parametrize("filt", ["trilinear", "mipmap"])
@pytest.mark.parametrize("view", [EyeDisc(0, 48, radius_deg=170.0),
                                  PerspectiveScreen(40, 30, 120.0, yaw_deg=20.0, pitch_deg=60.0)])
def test_direction_grid_footprint_filter_matches_twin(filt, view):
    """Eye disc (masked beyond its rim: one-sided differences there) and a perspective
    screen looking near the zenith (the scene's pole): the per-pixel kernel against the
    twin, footprints from the same grid differences (grid_tangents_numpy): 1e-6."""
    inp = _inputs()
    lay = load_layout("lateral")
    rng = np.random.default_rng(9)
    img = rng.uniform(size=(64, 128, 3)).astype(np.float32)
    pyr = kernels.build_pyramid(img)
    H, W = view.shape
    grid = view.directions(lay)
    dirs = np.ascontiguousarray(grid.reshape(-1, 3))
    M = np.ascontiguousarray(inp.R_head_world if view.frame == "world" else np.eye(3))
    Q = np.ascontiguousarray(inp.R_head_world.T @ M)
    pick = 0 if isinstance(view, EyeDisc) else -1
    out = np.empty((H * W, 3), np.float32)
    kernels.composite_dirs(img, 64.0, dirs, M, Q, inp.R_eye_head, inp.eye_params, inp.b_eye,
                           inp.lut, pick, 1 / 0.8, 0.4, 0.25, out, pyramid=pyr,
                           ntaps_max=kernels.ntaps_for(filt), grid_width=W)
    dc, dr = kernels.grid_tangents_numpy(grid)
    ok = ~np.isnan(dirs[:, 0])
    px = kernels.sample_filtered_numpy(img, 64.0, dirs[ok] @ Q.T, dc.reshape(-1, 3)[ok] @ Q.T,
                                       dr.reshape(-1, 3)[ok] @ Q.T, filt, pyramid=pyr)
    sig = kernels.pattern_numpy(dirs[ok], M, inp.R_eye_head, inp.eye_params, inp.b_eye, inp.lut,
                                pick)
    want = kernels.modulate_numpy(px, sig, 1 / 0.8, 0.4, 0.25)
    np.testing.assert_allclose(out[ok], want, atol=1e-6)
    assert np.all(out[~ok] == 0.0)


def test_filter_arguments_are_checked():
    """A pyramid of another image, or a direction list without its grid width, is refused
    instead of read out of bounds."""
    inp = _inputs()
    img = np.zeros((8, 16, 3), np.float32)
    other = kernels.build_pyramid(np.zeros((4, 8, 3), np.float32))
    dirs = np.tile([1.0, 0.0, 0.0], (6, 1))
    out = np.empty((6, 3), np.float32)
    with pytest.raises(ValueError, match="pyramid"):
        kernels.composite_dirs(img, 8.0, dirs, np.eye(3), np.eye(3), inp.R_eye_head,
                               inp.eye_params, inp.b_eye, inp.lut, -1, 1.0, 0.0, 1.0, out,
                               pyramid=other, ntaps_max=1, grid_width=3)
    with pytest.raises(ValueError, match="grid width"):
        kernels.composite_dirs(img, 8.0, dirs, np.eye(3), np.eye(3), inp.R_eye_head,
                               inp.eye_params, inp.b_eye, inp.lut, -1, 1.0, 0.0, 1.0, out,
                               pyramid=kernels.build_pyramid(img), ntaps_max=1)
