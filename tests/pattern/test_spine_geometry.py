"""Pattern geometry of the spine: receptors normal to a spherical retina."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

import renderer
from renderer import kernels, pipeline
from renderer.eye import Eye, load_layout
from renderer.field import fixed, igrf
from renderer.frames import azel_to_vec
from renderer.pose import Pose
from renderer.response import Legendre
from renderer.views import EyeDisc, HeadPanorama, WorldPanorama

RESP = Legendre([0.7, 0.0, 0.1, 0.0, -0.03])


@given(st.floats(-1, 1), st.floats(-1, 1), st.floats(-1, 1))
def test_axis_equals_view_direction_at_zero_offset(x, y, z):
    """Nodal point at the retina's centre (d = 0): every ray meets the retina along the
    radius, so the receptor axis (the retinal normal) is the viewing direction."""
    v = np.array([[x, y, z]])
    if np.linalg.norm(v) < 1e-3:
        return
    v /= np.linalg.norm(v)
    eye = Eye(retina_radius_mm=7.0, nodal_offset_mm=0.0)
    assert np.allclose(eye.receptor_axes(v), v, atol=1e-12)


def test_axis_with_nodal_offset_is_a_retinal_normal():
    """With d ≠ 0 the axis is still a unit retinal normal, and the ray from the nodal
    point along −u reaches the retina point −R·axis (ray geometry)."""
    eye = Eye(retina_radius_mm=6.0, nodal_offset_mm=2.5)
    rng = np.random.default_rng(1)
    u = rng.normal(size=(200, 3))
    u /= np.linalg.norm(u, axis=1, keepdims=True)
    a = eye.receptor_axes(u)
    assert np.allclose(np.linalg.norm(a, axis=1), 1.0)
    P = -6.0 * a                     # retinal point in mm
    N = np.array([2.5, 0.0, 0.0])    # nodal point
    w = N - P                        # from retina back to nodal point: along +u
    w /= np.linalg.norm(w, axis=1, keepdims=True)
    assert np.allclose(w, u, atol=1e-12)


def test_world_panorama_depends_only_on_angle_to_field():
    """All-around eye, d = 0, receptors normal: the value at each world direction is
    f(cos ∠(direction, field)), whatever the head pose (independent computation of the
    angle with frames.azel_to_vec; LUT error bound h²/8·max|f''| < 1e-7)."""
    f = igrf(45.0, -73.0, 0.0, "2026-06-01")
    view = WorldPanorama(256)
    az, el = view.pixel_azel()
    d = azel_to_vec(*np.meshgrid(az, el))
    expected = RESP(d @ f.unit_ned)
    for pose in (Pose(0, 0, 0), Pose(123, -20, 15), Pose(-75, 60, -40)):
        got = renderer.render_pattern(f, pose, load_layout("all-around"), RESP, view)
        assert np.max(np.abs(got - expected)) < 1e-7


@pytest.mark.parametrize("view", [WorldPanorama(128), HeadPanorama(128), EyeDisc("right", 64)])
def test_field_reversal_leaves_pattern_unchanged(view):
    """An even response (radical-pair yields are field-reversal symmetric) makes the
    pattern blind to field polarity: an inclination compass (Wiltschko & Wiltschko 1972,
    Science 176:62).  Checked with a nodal offset so receptor axes differ from rays."""
    layout = load_layout("lateral")
    eyes = [Eye(**{**e.describe(), "nodal_offset_mm": 2.0}) for e in layout.eyes]
    layout = layout.with_eyes(eyes)
    f = fixed(50.0, 66.0, 4.0)
    rev = f.replace(-f.ned_T)
    pose = Pose(40.0, 10.0, 5.0)
    a = renderer.render_pattern(f, pose, layout, RESP, view)
    b = renderer.render_pattern(rev, pose, layout, RESP, view)
    assert np.array_equal(np.isnan(a), np.isnan(b))
    assert np.nanmax(np.abs(a - b)) < 1e-9


@pytest.mark.parametrize("view", [WorldPanorama(192), HeadPanorama(192), EyeDisc("left", 96),
                                  WorldPanorama(192, pick="right")])
def test_numba_kernel_matches_numpy_twin(view):
    """The numba kernels and their plain NumPy twin agree to 1e-6 (same maths)."""
    layout = load_layout("lateral")
    eyes = [Eye(**{**e.describe(), "nodal_offset_mm": 1.5}) for e in layout.eyes]
    layout = layout.with_eyes(eyes)
    f = fixed(47.0, 63.0, -5.0)
    pose = Pose(-110.0, 12.0, -8.0)
    got = renderer.render_pattern(f, pose, layout, RESP, view)
    inputs = pipeline.prepare(f, pose, layout, RESP)
    M = inputs.R_head_world if view.frame == "world" else np.eye(3)
    dirs = view.directions(layout).reshape(-1, 3)
    pick = -1 if view.pick is None else layout.eye_index(view.pick)
    ok = ~np.isnan(dirs[:, 0])  # outside a disc's footprint
    ref = np.full(dirs.shape[0], np.nan)
    ref[ok] = kernels.pattern_numpy(dirs[ok], M, inputs.R_eye_head, inputs.eye_params,
                                    inputs.b_eye, inputs.lut, pick)
    ref = ref.reshape(view.shape)
    assert np.array_equal(np.isnan(got), np.isnan(ref))
    assert np.nanmax(np.abs(got - ref)) < 1e-6


def test_composite_kernels_match_twin():
    from renderer.scene import dusk

    layout = load_layout("lateral")
    f = fixed(47.0, 63.0, -5.0)
    pose = Pose(33.0, -4.0, 2.0)
    scene = dusk(256)
    # Plain bilinear reads: the twin below is the bilinear sampler (the footprint
    # filters have their own twin checks in tests/views/test_antialias.py).
    views = (WorldPanorama(256, filter="bilinear"), HeadPanorama(128, filter="bilinear"),
             EyeDisc("right", 64, filter="bilinear"))
    for view in views:
        img = renderer.render(f, pose, layout, RESP, view, scene=scene, gain=0.8, outside=0.3)
        inputs = pipeline.prepare(f, pose, layout, RESP)
        mean = pipeline.visual_field_mean(inputs)
        M = inputs.R_head_world if view.frame == "world" else np.eye(3)
        Q = inputs.R_head_world.T @ M
        dirs = view.directions(layout).reshape(-1, 3)
        pick = -1 if view.pick is None else layout.eye_index(view.pick)
        ok = ~np.isnan(dirs[:, 0])
        s = np.full(dirs.shape[0], np.nan)
        s[ok] = kernels.pattern_numpy(dirs[ok], M, inputs.R_eye_head, inputs.eye_params,
                                      inputs.b_eye, inputs.lut, pick)
        px = np.zeros((dirs.shape[0], 3))
        px[ok] = kernels.sample_equirect_numpy(scene.image, scene.north_col, dirs[ok] @ Q.T)
        ref = kernels.modulate_numpy(px, s, 1 / mean, 0.8, 0.3)
        ref[~ok] = 0.0
        assert np.max(np.abs(img.reshape(-1, 3) - ref)) < 1e-6


def test_unseen_directions_are_nan_and_overlap_is_mean():
    """Behind the head no eye of the lateral layout sees (NaN); straight ahead both see."""
    layout = load_layout("lateral")
    f = fixed(50.0, 60.0, 0.0)
    dirs = azel_to_vec(np.array([180.0, 0.0]), np.array([0.0, 0.0]))[None]
    from renderer.views.base import View

    class Two(View):
        frame = "head"
        shape = (1, 2)

        def directions(self, layout):
            return dirs

    v = renderer.render_pattern(f, Pose(), layout, RESP, Two())
    assert np.isnan(v[0, 0])
    one = [renderer.render_pattern(f, Pose(), layout, RESP, EyeDisc(k, 8)) for k in (0, 1)]
    inputs = pipeline.prepare(f, Pose(), layout, RESP)
    each = [kernels.signal_numpy(dirs[0][1:], inputs.R_eye_head, inputs.eye_params, inputs.b_eye,
                                 inputs.lut, k)[0] for k in (0, 1)]
    assert np.isclose(v[0, 1], 0.5 * (each[0] + each[1]))
    assert all(np.isfinite(o).any() for o in one)


def test_zero_field_gives_no_pattern():
    f = fixed(0.0, 60.0, 0.0)
    v = renderer.render_pattern(f, Pose(), load_layout("all-around"), RESP, WorldPanorama(32))
    assert np.nanmax(v) - np.nanmin(v) < 1e-12
    assert np.isclose(np.nanmean(v), 0.7, atol=1e-6)  # spherical mean of Σ c_l P_l is c_0
