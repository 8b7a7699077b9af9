"""The row passes of the equirectangular kernels: block visibility decisions, the shared
value of chief-ray eyes, and the polynomial bounds they rely on, against the NumPy twin
(an independent per-direction implementation of the same maths) and against numpy/scipy
evaluations of the functions the polynomials stand for."""

import numpy as np
import pytest

from renderer import kernels, pipeline
from renderer.kernels import layout, rows, sampling
from renderer.eye import Eye, Layout, load_layout
from renderer.eye.alignment import ChiefRay, Normal, Tilt
from renderer.field import fixed
from renderer.pose import Pose
from renderer.response import Legendre
from renderer.scene import dusk


def _check_against_twin(inp, W, pick=-1, gain=0.3):
    """pattern_equirect and composite_world_aligned against the twins: same mask (every
    visibility decision equal), values to 1e-6 (float32 images: 1e-6 absolute)."""
    H = W // 2
    tables = kernels.equirect_tables(W, H)
    M = np.ascontiguousarray(inp.R_head_world)
    out = np.empty((H, W))
    kernels.pattern_equirect(*tables, M, inp.R_eye_head, inp.eye_params, inp.b_eye, inp.lut, pick,
                             out, cubes=inp.cubes)
    dirs = kernels.equirect_dirs(*tables)
    twin = kernels.pattern_numpy(dirs, M, inp.R_eye_head, inp.eye_params, inp.b_eye, inp.lut, pick,
                                 cubes=inp.cubes).reshape(H, W)
    np.testing.assert_array_equal(np.isnan(out), np.isnan(twin))
    np.testing.assert_allclose(out, twin, atol=1e-6, equal_nan=True)
    img = dusk(W).image
    comp = np.empty_like(img)
    kernels.composite_world_aligned(img, *tables, M, inp.R_eye_head, inp.eye_params, inp.b_eye,
                                    inp.lut, pick, 1 / 0.8, gain, 0.25, comp, cubes=inp.cubes)
    want = kernels.modulate_numpy(img.reshape(-1, 3), twin.ravel(), 1 / 0.8, gain, 0.25)
    np.testing.assert_allclose(comp.reshape(-1, 3), want, atol=1e-6)
    return out


@pytest.mark.parametrize("pick", [-1, 0, 1])
@pytest.mark.parametrize("W", [300, 512])
def test_shared_chief_ray_eyes_match_twin(pick, W):
    """Lateral preset (nodal point at the retina's centre): both eyes form the shared
    group, whose one value per pixel must equal the per-eye twin's mean; W = 300 is not
    a multiple of the 64-column block."""
    inp = pipeline.prepare(fixed(48.0, 64.0, 2.0), Pose(21.0, -6.0, 4.0), load_layout("lateral"),
                           Legendre([0.6, 0.0, 0.25, 0.0, 0.05]))
    shared, _ = rows._shared_group(layout._fold(inp.R_eye_head, inp.R_head_world),
                                      inp.eye_params, inp.b_eye)
    assert shared.tolist() == [1.0, 1.0]
    out = _check_against_twin(inp, W, pick)
    assert 0.2 < np.mean(~np.isnan(out)) < 1.0


def test_mixed_shared_and_own_eyes_match_twin():
    """A chief-ray eye, a d = 0 normal eye (both shared: same table) and a tilted eye
    (its own table row): the general path with a shared group present."""
    eyes = (Eye(name="l", side="left", azimuth_deg=-70.0, elevation_deg=10.0, nasal_deg=60.0,
                temporal_deg=110.0, dorsal_deg=70.0, ventral_deg=80.0, alignment=ChiefRay(),
                nodal_offset_mm=2.0),
            Eye(name="r", side="right", azimuth_deg=65.0, elevation_deg=-5.0, torsion_deg=12.0,
                nasal_deg=50.0, temporal_deg=95.0, dorsal_deg=85.0, ventral_deg=65.0,
                alignment=Normal()),
            Eye(name="f", side="right", azimuth_deg=0.0, elevation_deg=30.0, nasal_deg=40.0,
                temporal_deg=40.0, dorsal_deg=30.0, ventral_deg=30.0, alignment=Tilt(tilt_deg=30.0),
                nodal_offset_mm=1.0))
    inp = pipeline.prepare(fixed(52.0, 70.0, -8.0), Pose(140.0, 12.0, -7.0), Layout("mix", eyes),
                           Legendre([0.5, 0.0, 0.3]))
    for pick in (-1, 0, 2):
        _check_against_twin(inp, 320, pick)


def test_block_visibility_agrees_with_exact_test_on_random_eyes():
    """Random eyes (half-widths from 5° to 179.5°, any torsion, poses, widths that are not multiples of the block): the
    kernels' visibility (block decisions, sub-blocks, per-pixel fallback) equals the
    twin's exact per-direction test at every pixel."""
    rng = np.random.default_rng(20261201)
    for trial in range(12):
        hw = rng.uniform(5.0, 179.5, size=4)
        az = rng.uniform(-180, 180)
        eye = Eye(name="e", side="left" if az < 0 else "right", azimuth_deg=az, elevation_deg=rng.uniform(-80, 80),
                  torsion_deg=rng.uniform(-180, 180), nasal_deg=hw[0], temporal_deg=hw[1],
                  dorsal_deg=hw[2], ventral_deg=hw[3], nodal_offset_mm=rng.choice([0.0, 1.5]))
        inp = pipeline.prepare(fixed(50.0, rng.uniform(-80, 80), rng.uniform(-30, 30)),
                               Pose(*rng.uniform(-90, 90, size=3)), Layout("r", (eye,)),
                               Legendre([0.5, 0.0, 0.2]))
        _check_against_twin(inp, int(rng.choice([130, 258, 642])))


def test_cos_sqrt_polynomial_error_bound():
    """cos √t by the degree-9 polynomial stays within 9e-15 of numpy's cos on a dense grid
    of [0, π²], far inside the margin COS_MARGIN the visibility tests defer within."""
    t = np.linspace(0.0, np.pi ** 2, 2_000_001)
    poly = np.polynomial.polynomial.polyval(t, kernels.COS_SQRT_COEFFS)
    err = np.max(np.abs(poly - np.cos(np.sqrt(t))))
    assert err <= 9e-15 < kernels.COS_MARGIN / 1000
    got = np.array([rows._cos_sqrt(x) for x in t[::20000]])
    np.testing.assert_allclose(got, np.cos(np.sqrt(t[::20000])), atol=1e-14)


@pytest.mark.parametrize("widths", [(70, 100, 80, 75), (10, 170, 5, 120), (90, 90, 90, 90)])
def test_fov_slope_bounds_the_half_width_derivative(widths):
    """The Lipschitz constant the block test uses bounds |dw/dφ| of the field-of-view
    outline w(φ)⁻² = cos²φ/w_h² + sin²φ/w_v², checked against numerical differentiation
    (numpy.gradient) on a fine grid of φ."""
    nas, tem, dor, ven = np.radians(widths)
    phi = np.linspace(-np.pi, np.pi, 400_001)
    h, v = np.cos(phi), np.sin(phi)
    wh = np.where(h >= 0, nas, tem)
    wv = np.where(v >= 0, dor, ven)
    w = 1.0 / np.sqrt(h * h / wh ** 2 + v * v / wv ** 2)
    slope = np.max(np.abs(np.gradient(w, phi)))
    p = np.zeros(kernels.PARAMS)
    p[kernels.P_NASAL:kernels.P_VENTRAL + 1] = nas, tem, dor, ven
    bound = rows._fov_slope(p)
    assert slope <= bound * (1 + 1e-6) + 1e-9  # 1e-9: rounding of the numerical derivative
    if len(set(widths)) == 1:
        assert bound == 0.0


@pytest.mark.parametrize("nblk", [1, 7, 64, 129])
@pytest.mark.parametrize("T", [1, 2, 3, 8])
def test_item_order_is_a_permutation(nblk, T):
    """Every block of rows is taken by exactly one work item, whatever the thread count."""
    order = rows._item_order(nblk, T)
    assert sorted(order.tolist()) == list(range(nblk))


def test_rows_do_not_depend_on_the_thread_count():
    """Reproducibility (common practice): the same frame rendered on one thread and on
    every available thread is bitwise identical, including the composite."""
    import numba

    inp = pipeline.prepare(fixed(48.0, 64.0, 2.0), Pose(21.0, -6.0, 4.0), load_layout("lateral"),
                           Legendre([0.6, 0.0, 0.25]))
    W = 256
    tables = kernels.equirect_tables(W, W // 2)
    M = np.ascontiguousarray(inp.R_head_world)
    img = dusk(W).image
    n0 = numba.get_num_threads()
    outs = []
    try:
        for n in (1, n0):
            numba.set_num_threads(n)
            pat = np.empty((W // 2, W))
            kernels.pattern_equirect(*tables, M, inp.R_eye_head, inp.eye_params, inp.b_eye,
                                     inp.lut, -1, pat)
            comp = np.empty_like(img)
            kernels.composite_world_aligned(img, *tables, M, inp.R_eye_head, inp.eye_params,
                                            inp.b_eye, inp.lut, -1, 1.25, 0.3, 0.25, comp)
            outs.append((pat, comp))
    finally:
        numba.set_num_threads(n0)
    np.testing.assert_array_equal(outs[0][0], outs[1][0])
    np.testing.assert_array_equal(outs[0][1], outs[1][1])


def test_vectorisable_atan2_matches_numpy():
    """The scene lookup's polynomial atan2 against numpy.arctan2 (the C library's) on
    random points of every octant, the axes and the origin: within 2e-15 rad."""
    rng = np.random.default_rng(7)
    pts = rng.normal(size=(20_000, 2)) * np.exp(rng.uniform(-20, 20, size=(20_000, 1)))
    ring = np.linspace(-np.pi, np.pi, 4001)
    pts = np.vstack([pts, np.c_[np.sin(ring), np.cos(ring)],
                     [[0.0, 0.0], [0.0, 1.0], [0.0, -1.0], [1.0, 0.0], [-1.0, 0.0],
                      [1.0, 1.0], [-1.0, -1.0], [1e-300, -1.0]]])
    got = np.array([sampling._atan2(y, x) for y, x in pts])
    want = np.arctan2(pts[:, 0], pts[:, 1])
    # the sign of a zero y is not kept: −π and π name the same direction
    diff = np.abs(np.angle(np.exp(1j * (got - want))))
    assert diff.max() <= 2e-15


@pytest.mark.parametrize("C", [1, 3, 4])
@pytest.mark.parametrize("north_col", [0.0, 37.3, 159.9])
def test_resampled_scene_matches_twin(C, north_col):
    """Head-frame composite over a resampled scene (grey, RGB and four-channel scenes; the
    north column at the seam and elsewhere, so columns wrap) against the twin's
    bilinear lookup and modulation: 1e-6 (float32 output)."""
    inp = pipeline.prepare(fixed(48.0, 64.0, 2.0), Pose(121.0, 14.0, -9.0),
                           load_layout("lateral"), Legendre([0.6, 0.0, 0.25]))
    W, H = 160, 80
    rng = np.random.default_rng(C)
    img = rng.uniform(0.0, 1.0, size=(96, 192, C)).astype(np.float32)
    tables = kernels.equirect_tables(W, H)
    Q = np.ascontiguousarray(inp.R_head_world.T)
    out = np.empty((H, W, C), np.float32)
    kernels.composite_resampled(img, north_col, *tables, np.eye(3), Q, inp.R_eye_head,
                                inp.eye_params, inp.b_eye, inp.lut, -1, 1 / 0.8, 0.4, 0.25, out)
    dirs = kernels.equirect_dirs(*tables)
    sig = kernels.pattern_numpy(dirs, np.eye(3), inp.R_eye_head, inp.eye_params, inp.b_eye,
                                inp.lut, -1)
    px = kernels.sample_equirect_numpy(img, north_col, dirs @ Q.T)
    want = kernels.modulate_numpy(px, sig, 1 / 0.8, 0.4, 0.25)
    np.testing.assert_allclose(out.reshape(-1, C), want, atol=1e-6)
