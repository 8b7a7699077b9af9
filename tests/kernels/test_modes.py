"""numba kernels against their NumPy twins for every alignment mode and entry point."""

import numpy as np
import pytest

from renderer import kernels, pipeline
from renderer.kernels import leaf
from renderer.eye import Eye, Layout, load_layout
from renderer.eye import alignment
from renderer.field import fixed
from renderer.pose import Pose
from renderer.response import Legendre
from renderer.scene import dusk


class XYResponse:
    """Made-up full response with x/y dependence (test only)."""

    axial = False

    def evaluate_dirs(self, d):
        d = np.asarray(d, float)
        return 0.5 + 0.2 * d[..., 0] ** 2 - 0.1 * d[..., 1] ** 2 + 0.1 * d[..., 0] * d[..., 2]

    def axial_average(self):
        return Legendre([0.5 + 0.1 / 3, 0.0, -0.1 / 3])


#: Every registered alignment hypothesis at each of its example settings.
MODES = alignment.examples()
_NAMES = list(MODES)
#: Layouts of two eyes, consecutive examples side by side (the last pairs with the first
#: if their number is odd), with spherical and spheroidal retinas in turn; then one eye
#: per kernel mode in a single layout.
_AXIAL_MM = (None, 5.2, None, 6.8)
COMBOS = [((_NAMES[i], _NAMES[(i + 1) % len(_NAMES)]), _AXIAL_MM[(i // 2) % len(_AXIAL_MM)])
          for i in range(0, len(_NAMES), 2)]
_FIRST = {}
for _n, _a in MODES.items():
    _FIRST.setdefault(_a.mode, _n)
COMBOS.append((tuple(_FIRST.values()), 5.5))


def test_every_kernel_mode_is_reached_by_an_example():
    """The examples of the registered hypotheses reach every mode of the kernels' mode
    table, and only those (so the twin checks below cover each kernel branch)."""
    codes = {m.code for m in kernels.KERNEL_MODES.values()}
    assert {a.mode for a in MODES.values()} == codes
    assert len(codes) == len(kernels.KERNEL_MODES)
    assert set(kernels.CUBE_MODES) == {m.code for m in kernels.KERNEL_MODES.values() if m.cube}
    assert {type(a) for a in MODES.values()} == set(alignment.REGISTRY.values())


def _layout(mode_names, axial_mm=None):
    eyes = []
    for k, m in enumerate(mode_names):
        side = "left" if k % 2 == 0 else "right"
        eyes.append(Eye(name=f"{side}{k}", side=side, retina_radius_mm=6.0, nodal_offset_mm=1.7,
                        retina_axial_mm=axial_mm, azimuth_deg=-55.0 if side == "left" else 55.0,
                        elevation_deg=4.0, torsion_deg=7.0, nasal_deg=75.0, temporal_deg=105.0,
                        dorsal_deg=85.0, ventral_deg=70.0, alignment=MODES[m]))
    return Layout("t", tuple(eyes))


@pytest.mark.parametrize("modes,axial_mm", COMBOS)
@pytest.mark.parametrize("pick", [-1, 1])
def test_kernels_agree_with_numpy_twin(modes, axial_mm, pick):
    """pattern_equirect, pattern_dirs and the three composite kernels against the twins
    (same maths, independent code) to 1e-6 (float32 images: 1e-6 absolute)."""
    lay = _layout(modes, axial_mm)
    full = any(MODES[m].needs_full_response() for m in modes)
    resp = XYResponse() if full else Legendre([0.6, 0.0, 0.2, 0, 0.05])
    inp = pipeline.prepare(fixed(47.0, 61.0, -5.0), Pose(33.0, 8.0, -4.0), lay, resp)
    W, H = 96, 48
    tables = kernels.equirect_tables(W, H)
    M = np.ascontiguousarray(inp.R_head_world)
    out = np.empty((H, W))
    kernels.pattern_equirect(*tables, M, inp.R_eye_head, inp.eye_params, inp.b_eye, inp.lut, pick,
                             out, cubes=inp.cubes)
    dirs = kernels.equirect_dirs(*tables)
    twin = kernels.pattern_numpy(dirs, M, inp.R_eye_head, inp.eye_params, inp.b_eye, inp.lut, pick,
                                 cubes=inp.cubes).reshape(H, W)
    np.testing.assert_array_equal(np.isnan(out), np.isnan(twin))
    assert (~np.isnan(out)).sum() > 100
    np.testing.assert_allclose(out, twin, atol=1e-6, equal_nan=True)
    flat = np.empty(dirs.shape[0])
    kernels.pattern_dirs(np.ascontiguousarray(dirs), M, inp.R_eye_head, inp.eye_params, inp.b_eye,
                         inp.lut, pick, flat, cubes=inp.cubes)
    np.testing.assert_allclose(flat.reshape(H, W), twin, atol=1e-6, equal_nan=True)

    scene = dusk(W)
    img = scene.image
    mean = pipeline.visual_field_mean(inp)
    comp = np.empty_like(img)
    kernels.composite_world_aligned(img, *tables, M, inp.R_eye_head, inp.eye_params, inp.b_eye,
                                    inp.lut, pick, 1 / mean, 0.3, 0.25, comp, cubes=inp.cubes)
    want = kernels.modulate_numpy(img.reshape(-1, 3), twin.ravel(), 1 / mean, 0.3, 0.25)
    np.testing.assert_allclose(comp.reshape(-1, 3), want, atol=1e-6)
    Q = np.ascontiguousarray(inp.R_head_world.T)
    eye_tab = kernels.equirect_tables(W, H)
    comp2 = np.empty_like(img)
    kernels.composite_resampled(img, scene.north_col + 3.3, *eye_tab, np.eye(3), Q, inp.R_eye_head,
                                inp.eye_params, inp.b_eye, inp.lut, pick, 1 / mean, 0.3, 0.25, comp2,
                                cubes=inp.cubes)
    sig = kernels.pattern_numpy(dirs, np.eye(3), inp.R_eye_head, inp.eye_params, inp.b_eye, inp.lut,
                                pick, cubes=inp.cubes)
    px = kernels.sample_equirect_numpy(img, scene.north_col + 3.3, dirs @ Q.T)
    np.testing.assert_allclose(comp2.reshape(-1, 3), kernels.modulate_numpy(px, sig, 1 / mean, 0.3,
                                                                            0.25), atol=1e-6)
    comp3 = np.empty((dirs.shape[0], 3), np.float32)
    kernels.composite_dirs(img, scene.north_col + 3.3, np.ascontiguousarray(dirs), np.eye(3), Q,
                           inp.R_eye_head, inp.eye_params, inp.b_eye, inp.lut, pick, 1 / mean, 0.3,
                           0.25, comp3, cubes=inp.cubes)
    np.testing.assert_allclose(comp3, comp2.reshape(-1, 3), atol=1e-6)


def test_cube_lookup_twin_and_accuracy():
    """Cube-map lookup: kernel helper and NumPy twin agree; against the exact function the
    error stays within h²/8·max|∂²f| (h = 2/(n − 1) in gnomonic face coordinates,
    second derivatives of the test function bounded by about 3 there)."""
    f = XYResponse().evaluate_dirs
    n = 65
    cube = kernels.cube_table(f, n)
    rng = np.random.default_rng(4)
    d = rng.normal(size=(4000, 3))
    d /= np.linalg.norm(d, axis=1, keepdims=True)
    twin = kernels.cube_lookup_numpy(cube, d)
    jit = np.array([leaf._cube_lookup(cube, *v) for v in d[:300]])
    np.testing.assert_allclose(jit, twin[:300], atol=1e-14)
    h = 2 / (n - 1)
    assert np.max(np.abs(twin - f(d))) <= h * h / 8 * 3.0


def test_legacy_single_table_calls_still_work():
    """pack_eyes(layout) with one shared 1-D table (the spine's calling convention)."""
    lay = load_layout("lateral")
    R, P = kernels.pack_eyes(lay)
    lut = Legendre([0.7, 0.0, 0.1]).lut()
    b = np.array([[0.3, 0.1, 0.9], [0.2, -0.4, 0.8]])
    b /= np.linalg.norm(b, axis=1, keepdims=True)
    d = np.random.default_rng(0).normal(size=(200, 3))
    d /= np.linalg.norm(d, axis=1, keepdims=True)
    out = np.empty(200)
    kernels.pattern_dirs(d, np.eye(3), R, P, b, lut, -1, out)
    np.testing.assert_allclose(out, kernels.signal_numpy(d, R, P, b, lut), atol=1e-12, equal_nan=True)


def test_missing_tables_are_refused():
    """A full-frame layout without its cube tables, or eye rows beyond the table stack,
    raise instead of reading the wrong table."""
    lay = _layout(("normal", "full-meridian"))
    inp = pipeline.prepare(fixed(47.0, 61.0, 0.0), Pose(0, 0, 0), lay, XYResponse())
    out = np.empty(10)
    d = np.tile([1.0, 0.0, 0.0], (10, 1))
    with pytest.raises(ValueError, match="cube-map"):
        kernels.pattern_dirs(d, np.eye(3), inp.R_eye_head, inp.eye_params, inp.b_eye, inp.lut, -1, out)
    lay2 = _layout(("normal", "tilt"))
    inp2 = pipeline.prepare(fixed(47.0, 61.0, 0.0), Pose(0, 0, 0), lay2, Legendre([0.5, 0, 0.2]))
    assert inp2.lut.shape[0] == 2
    with pytest.raises(ValueError, match="rows"):
        kernels.pattern_dirs(d, np.eye(3), inp2.R_eye_head, inp2.eye_params, inp2.b_eye,
                             inp2.lut[0], -1, out)


def test_fast_angle_error_bound():
    """The visibility test's polynomial angle stays within 3.8e-8 rad of atan2 on a dense
    grid (the margin ATAN_MARGIN = 1e-7 it falls back inside must cover it)."""
    t = np.linspace(0.0, np.pi, 200_001)
    r, ux = np.sin(t), np.cos(t)
    got = np.array([kernels.fast_angle(a, b) for a, b in zip(r[::50], ux[::50])])
    assert np.max(np.abs(got - t[::50])) <= 3.8e-8
    x = np.linspace(-1.0, 1.0, 400_001)
    poly = x * np.polynomial.polynomial.polyval(x * x, kernels.ATAN_COEFFS)
    assert np.max(np.abs(poly - np.arctan(x))) <= 3.8e-8 < kernels.ATAN_MARGIN / 2


def test_cube_table_spline_refinement():
    """Refining a 65-node sampling by bicubic splines reproduces direct sampling of a
    smooth full response (real harmonics up to l = 6) on the 257-node grid to 1e-6,
    below the fine grid's own bilinear error (about 4e-6·max|∂²f|, with |∂²f| of order
    one here), and keeps shared cube edges equal on both faces."""
    harmonic = pytest.importorskip("renderer.response.harmonic")
    rng = np.random.default_rng(9)
    c = np.zeros(49)
    c[0] = 2.0
    c[4:9], c[16:25], c[36:49] = 0.2 * rng.normal(size=5), 0.05 * rng.normal(size=9), 0.02 * rng.normal(size=13)
    resp = harmonic.SphericalHarmonic(c)
    fine = kernels.cube_table(resp.evaluate_dirs, 257, n_sample=257)
    refined = kernels.cube_table(resp.evaluate_dirs, 257)
    np.testing.assert_allclose(refined, fine, atol=1e-6)
    # +x face's u = +1 edge (y = x) is the +y face's u = +1 edge (x = y), both parametrised by z
    np.testing.assert_allclose(refined[0, -1, :], refined[2, -1, :], atol=1e-12)
