"""Predictions under every receptor-alignment hypothesis: the per-receptor signal used
by the Fisher information equals the rendering kernels' signal, derivatives agree with
table-free references, and closed forms for tilt and disorder hold."""

import numpy as np
import pytest
from numpy.polynomial import legendre as npleg

from renderer import kernels, pipeline
from renderer.errors import MagretinaError
from renderer.eye import Eye, Layout
from renderer.eye.alignment import Disorder, FullFrame, Normal, Ratio, Tilt, examples
from renderer.field import fixed
from renderer.mosaic import MosaicSpec, build_mosaic, explicit_mosaic
from renderer.pose import Pose
from renderer.predict import CountModel, GaussianNoise, fisher_information, make_setup
from renderer.predict import fisher as F
from renderer.response import Legendre
from renderer.response.harmonic import SphericalHarmonic

from .conftest import sphere_eye

HEADINGS = [0.0, 33.0, 147.0, 250.0]
FIELD = fixed(47.0, 61.0, -5.0)
PITCH, ROLL = 8.0, -4.0
LEG = Legendre([0.6, 0.0, 0.2, 0.0, 0.05])
#: Lookup-table spacing of the renderer (renderer.response.base.LUT_SIZE = 4097 nodes).
H_LUT = 2.0 / 4096


def _harmonic(lmax, seed=5):
    """A made-up full response Σ c_lm Y_lm with every (l, m) up to lmax (test only)."""
    c = np.random.default_rng(seed).normal(0.0, 0.03, (lmax + 1) ** 2)
    c[0] = 0.6 * np.sqrt(4 * np.pi)  # mean 0.6
    return SphericalHarmonic(c)


SH4 = _harmonic(4)

#: Every registered hypothesis at its example settings, with the full response where
#: one of its kind can read one (else the Legendre series); and a tilt of a full one.
MODES = {name: (al, SH4 if al.kind == "full-frame" else LEG)
         for name, al in examples().items()}
MODES["tilt-of-full"] = (Tilt(tilt_deg=50.0), SH4)


def _expected_kind(al):
    """The prediction's table kind for a hypothesis, from its kernel mode."""
    if al.mode == kernels.MODE_RATIO:
        return F.KIND_RATIO
    return F.KIND_FRAME if al.mode in kernels.CUBE_MODES else F.KIND_AXIAL


def _layout(left, right=None, axial_mm=None):
    """Two lateral eyes with the nodal point off centre (normal ≠ chief ray)."""
    eyes = []
    for side, al in (("left", left), ("right", left if right is None else right)):
        eyes.append(Eye(name=side, retina_radius_mm=6.0, nodal_offset_mm=1.7,
                        retina_axial_mm=axial_mm, azimuth_deg=-55.0 if side == "left" else 55.0,
                        elevation_deg=4.0, torsion_deg=7.0, nasal_deg=75.0, temporal_deg=105.0,
                        dorsal_deg=85.0, ventral_deg=70.0, alignment=al))
    return Layout("t", tuple(eyes))


def _cube_error_bound(cube):
    """Bilinear interpolation error bound on a cube table: (h²/8)(max|f_uu| + max|f_vv|)
    (tensor-product linear interpolation; e.g. de Boor 2001, A Practical Guide to
    Splines, ch. II), with h²·f_uu estimated by the table's own second differences,
    plus the bicubic refinement error of kernels.cube_table (about 2.5e-9·max|∂⁴f|,
    bounded here by 1e-7, far above it for these degree-4 test responses)."""
    duu = np.abs(cube[:, 2:, :] - 2 * cube[:, 1:-1, :] + cube[:, :-2, :]).max()
    dvv = np.abs(cube[:, :, 2:] - 2 * cube[:, :, 1:-1] + cube[:, :, :-2]).max()
    return (duu + dvv) / 8.0 + 1e-7


def _second_derivative_max(r):
    """max |f''(c)| on [-1, 1] of a Legendre series (dense sampling, exact derivative)."""
    c = np.linspace(-1, 1, 20001)
    return float(np.max(np.abs(npleg.legval(c, npleg.legder(r.coeffs, 2)))))


@pytest.mark.parametrize("mode", list(MODES))
@pytest.mark.parametrize("product", ["singlet", "triplet"])
def test_receptor_signals_match_the_rendering_kernels_in_every_mode(mode, product):
    """Per receptor, the signal the Fisher information uses equals
    kernels.signal_numpy (the renderer's maths) at the receptor's head direction with
    its eye picked, for every alignment hypothesis and both products.  Tolerances are
    the renderer's own table errors: linear lookup h²/8·max|f_e''| (h = 2/4096; f_e the
    eye's averaged response), for a ratio f̃_A/f̃_B the propagated bound
    ε(1 + |s|)/|f_B|, and the cube map's bilinear bound for full-frame modes
    (common practice interpolation bounds, see _cube_error_bound)."""
    al, resp = MODES[mode]
    lay = _layout(al, axial_mm=5.4 if mode in ("tilt", "full-fixed") else None)
    mo = build_mosaic(lay, MosaicSpec(density=0.006, seed=2))
    st = make_setup(FIELD, lay, resp, mo, CountModel(gain=0.3), PITCH, ROLL, product)
    for psi in (33.0, 250.0):
        inp = pipeline.prepare(FIELD, Pose(psi, PITCH, ROLL), lay, resp, product)
        s = np.empty(mo.n_receptors)
        s[st.order] = F.receptor_signals(st, np.radians([psi]))[0][0]
        for e in range(2):
            sel = mo.eye_index == e
            ref = kernels.signal_numpy(mo.dirs_head[sel], inp.R_eye_head, inp.eye_params,
                                       inp.b_eye, inp.lut, pick=e, cubes=inp.cubes)
            assert not np.any(np.isnan(ref))
            if st.eye_kind[e] == F.KIND_FRAME:
                tol = _cube_error_bound(inp.cubes[0])
            else:
                eps = H_LUT ** 2 / 8 * _second_derivative_max(F.eye_axial_response(al, resp))
                if st.eye_kind[e] == F.KIND_RATIO:
                    fb = F.hermite_numpy(st.coef[st.eye_row[e]],
                                         st.axes_b[st.eye_slice(e)] @ inp.b_eye[e])[0]
                    sel_s = s[sel]
                    # setup rows of eye e are mosaic rows order[slice]; lateral mosaics are
                    # already grouped by eye, so the orders coincide
                    assert np.array_equal(st.order, np.arange(mo.n_receptors))
                    tol = eps * (1 + np.abs(sel_s)) / np.abs(fb) * 1.01
                else:
                    tol = eps * 1.01
            assert np.all(np.abs(ref - s[sel]) <= tol), (mode, e, np.max(np.abs(ref - s[sel])))
    assert all(k == _expected_kind(al) for k in st.eye_kind)


@pytest.mark.parametrize("left,right", [("tilt", "disorder"), ("normal", "ratio"),
                                        ("chief-ray", "full-random")])
def test_derivatives_match_complex_step(left, right):
    """Axial (exact Hermite slopes of the averaged series) and ratio (quotient rule)
    against the complex step Im μ(ψ+iε)/ε on the table-free model (Squire & Trapp 1998,
    SIAM Rev. 40:110).  What remains is the cubic Hermite slope error
    (√3/216)·h³·max|f⁗| ≈ 6e-11·max|f⁗| at h = 2/1024 (error of Hermite interpolation,
    e.g. Burden & Faires, Numerical Analysis, thm 3.9 differentiated), i.e. about 2e-10
    on slopes of order 0.1 for these degree-4 series: relative 2e-9 in μ', twice that in
    J, hence rtol 5e-9.  The numba kernel (all-axial layouts) equals its NumPy twin."""
    lay = _layout(MODES[left][0], MODES[right][0])
    resp = LEG if right != "full-random" else SH4
    mo = build_mosaic(lay, MosaicSpec(density=0.01, seed=4, pool_radius_deg=0.0))
    cm = CountModel(gain=0.4)
    res = fisher_information(FIELD, lay, resp, mo, cm, HEADINGS, PITCH, ROLL)
    st = make_setup(FIELD, lay, resp, mo, cm, PITCH, ROLL)
    cs = F.fisher_complex_step(st, HEADINGS)
    assert np.allclose(res.J_eye, cs, rtol=5e-9, atol=0)
    assert np.all(res.J_eye > 0)
    if st.all_axial:
        twin = fisher_information(FIELD, lay, resp, mo, cm, HEADINGS, PITCH, ROLL, backend="numpy")
        assert np.allclose(res.J_eye, twin.J_eye, rtol=1e-12)
        # one Hermite table per distinct eye response (chief ray and random in-plane angle
        # both read the in-plane average of the full response)
        assert len(st.coef) == (2 if left == "tilt" else 1)


@pytest.mark.parametrize("in_plane", ["meridian", "fixed"])
def test_full_frame_heading_derivative_three_ways(in_plane):
    """Full-frame receptors (per-receptor molecular frame).  A response of harmonic
    degree ≤ 2 is, on the unit sphere, k + g·d + dᵀQd (real harmonics of degree ≤ 2 span
    the polynomials of degree ≤ 2 restricted to the sphere; e.g. Stein & Weiss 1971,
    ch. IV), fitted here by least squares (residual checked), so ds/dψ = g·d' + 2dᵀQd'
    with d = C b(ψ) is the analytic variant.  The spectral derivative of
    F.frame_spectrum (exact for a trigonometric polynomial of degree ≤ 2) agrees with it
    per receptor to 1e-12, and J with the eighth-order finite difference (Fornberg 1988,
    Math. Comp. 51:699; truncation O(h⁸)) to 1e-8."""
    resp = _harmonic(2, seed=9)
    lay = _layout(FullFrame(in_plane=in_plane, in_plane_deg=25.0))
    mo = build_mosaic(lay, MosaicSpec(density=0.01, seed=6))
    cm = CountModel(gain=0.4)
    st = make_setup(FIELD, lay, resp, mo, cm, PITCH, ROLL)
    d = np.random.default_rng(0).normal(size=(400, 3))
    d /= np.linalg.norm(d, axis=1, keepdims=True)
    x, y, z = d.T
    V = np.stack([np.ones_like(x), x, y, z, x * x, y * y, z * z, x * y, x * z, y * z], 1)
    coef, *_ = np.linalg.lstsq(V, resp.evaluate_dirs(d), rcond=None)
    assert np.max(np.abs(V @ coef - resp.evaluate_dirs(d))) < 1e-13
    g = coef[1:4]
    Q = np.array([[coef[4], coef[7] / 2, coef[8] / 2], [coef[7] / 2, coef[5], coef[9] / 2],
                  [coef[8] / 2, coef[9] / 2, coef[6]]])
    psi = np.radians(HEADINGS)
    s, ds = F.receptor_signals(st, psi)
    b, db = F.field_eye_vs_heading(st.b_world_unit, st.R_eye_head, st.M_world_head0, psi)
    for e in range(2):
        sl = st.eye_slice(e)
        dm = np.einsum("nij,hj->hni", st.mol[sl], b[:, e])
        ddm = np.einsum("nij,hj->hni", st.mol[sl], db[:, e])
        analytic = ddm @ g + 2 * np.einsum("hni,ij,hnj->hn", dm, Q, ddm)
        assert np.max(np.abs(ds[:, sl] - analytic)) < 1e-12
        assert np.max(np.abs(s[:, sl] - resp.evaluate_dirs(dm.reshape(-1, 3)).reshape(dm.shape[:2]))) < 1e-13
    res = fisher_information(FIELD, lay, resp, mo, cm, HEADINGS, PITCH, ROLL)
    assert np.allclose(res.J_eye, F.fisher_finite_difference(st, HEADINGS), rtol=1e-8, atol=0)
    with pytest.raises(MagretinaError, match="full-frame"):
        F.fisher_complex_step(st, HEADINGS)


def test_full_frame_with_an_unknown_degree_and_a_rough_response():
    """A full response without a harmonic degree (an axial Legendre series read in the
    full frame has trigonometric degree ≤ 4 in heading) converges by the doubling rule
    and matches the finite difference; a response with a kink (|x|, not band-limited)
    is refused with a clear error rather than differentiated wrongly."""
    lay = _layout(FullFrame(in_plane="meridian"))
    mo = build_mosaic(lay, MosaicSpec(density=0.004, seed=1))
    cm = CountModel(gain=0.3)
    st = make_setup(FIELD, lay, LEG, mo, cm)
    res = fisher_information(FIELD, lay, LEG, mo, cm, HEADINGS)
    assert np.allclose(res.J_eye, F.fisher_finite_difference(st, HEADINGS), rtol=1e-8, atol=0)

    class Kink:
        axial = False

        def evaluate_dirs(self, d):
            return 0.5 + 0.1 * np.abs(np.asarray(d, float)[..., 0])

        def axial_average(self):
            return Legendre([0.5 + 0.05])

    with pytest.raises(MagretinaError, match="full-frame response"):
        make_setup(FIELD, lay, Kink(), explicit_mosaic(lay, [0, 1], [[1, 0, 0], [0.9, 0.3, 0.3]]),
                   cm)


def test_full_frame_random_equals_normal_with_the_in_plane_average():
    """A uniformly random in-plane angle is the response's average over rotations about
    molecular z (SphericalHarmonic.axial_average keeps the m = 0 terms): the predictions
    equal those of the normal hypothesis with that axial response."""
    lay_r = _layout(FullFrame(in_plane="random"))
    lay_n = _layout(Normal())
    mo = build_mosaic(lay_r, MosaicSpec(density=0.01, seed=3))
    a = fisher_information(FIELD, lay_r, SH4, mo, CountModel(), HEADINGS)
    b = fisher_information(FIELD, lay_n, SH4.axial_average(), mo, CountModel(), HEADINGS)
    assert np.allclose(a.J_eye, b.J_eye, rtol=1e-12)


def _icosahedron():
    """The 12 vertices of the regular icosahedron, (±1, ±φ, 0) and cyclic permutations,
    normalised: a spherical 5-design (Delsarte, Goethals & Seidel 1977, Geom. Dedicata
    6:363), so the mean of (a·b)² over the vertices is 1/3 for every unit b."""
    p = (1 + np.sqrt(5)) / 2
    v = []
    for s1 in (1, -1):
        for s2 in (1, -1):
            v += [(0, s1, s2 * p), (s1, s2 * p, 0), (s2 * p, 0, s1)]
    v = np.array(v, float)
    return v / np.linalg.norm(v, axis=1, keepdims=True)


@pytest.mark.parametrize("alignment,factor", [
    (Tilt(tilt_deg=float(np.degrees(np.arccos(1 / np.sqrt(3))))), 0.0),
    (Tilt(tilt_deg=90.0), 0.25),
    (Disorder(order_p2=0.5), 0.25),
    (Tilt(tilt_deg=0.0), 1.0),
])
def test_tilt_and_disorder_closed_forms_for_a_p2_response(alignment, factor):
    """Closed form.  Response f = c₀ + c₂P₂(cos θ).  Tilt γ with free rotation scales the
    l = 2 term by P₂(cos γ) (addition theorem; Solov'yov, Mouritsen & Schulten 2010,
    Biophys. J. 99:40), disorder by ⟨P₂⟩: f_e = c₀ + k c₂P₂ with k = P₂(cos γ) or ⟨P₂⟩.
    Receptors along the 12 icosahedron vertices of a full-field eye with d = 0 (axes =
    view directions) have mean P₂(a·b) = (3·⅓ − 1)/2 = 0 at every heading, so ⟨s⟩ = c₀,
    d⟨s⟩/dψ = 0, m_i = k c₂P₂(a_i·b)/c₀ and μ_i' = A g k c₂ dP₂(a_i·b)/dψ / c₀.  With a
    constant Gaussian noise floor σ (no shot term) J = Σ μ_i'²/σ² = k² J(k = 1):
    at the magic angle γ = arccos(1/√3) = 54.74°, P₂ = (3·⅓ − 1)/2 = 0 and the pattern
    carries no heading information at all (any mosaic, any noise: checked on a lateral
    mosaic with Poisson noise too); at γ = 90° P₂(0) = −½, so J falls to ¼ of J(γ = 0);
    ⟨P₂⟩ = ½ gives the same ¼.  Tolerance 1e-12: rounding only."""
    c0, c2 = 0.6, 0.2
    resp = Legendre([c0, 0.0, c2])
    lay0 = Layout("ico", (sphere_eye(),))
    lay = Layout("ico", (sphere_eye(alignment=alignment),))
    mo = explicit_mosaic(lay0, np.zeros(12, int), _icosahedron())
    cm = CountModel(flux_per_s=1e4, integration_s=0.1, gain=0.5,
                    noise=GaussianNoise(floor_counts=3.0, shot=False))
    hd = [0.0, 20.0, 71.0, 200.0]
    J0 = fisher_information(FIELD, lay0, resp, mo, cm, hd, PITCH, ROLL).J
    J = fisher_information(FIELD, lay, resp, mo, cm, hd, PITCH, ROLL).J
    assert np.all(J0 > 1.0)
    if factor == 0.0:
        assert np.all(J < 1e-20 * J0)
        lat = _layout(alignment)
        mo_l = build_mosaic(lat, MosaicSpec(density=0.01, seed=2))
        J_l = fisher_information(FIELD, lat, resp, mo_l, CountModel(gain=0.3), hd).J
        J_n = fisher_information(FIELD, _layout(Normal()), resp, mo_l, CountModel(gain=0.3), hd).J
        assert np.all(J_l < 1e-20 * J_n)
    else:
        assert np.allclose(J / J0, factor, rtol=1e-12, atol=0)


def test_eye_movements_in_predictions():
    """Receptors keep their place on the retina when the eye moves: predictions with
    eye_offsets equal those for the moved layout with the same mosaic, their signals
    equal the kernels' for the moved eyes, and moving an eye changes its J (the other
    eye's J changes only through the layout mean ⟨s⟩)."""
    lay = _layout(Tilt(tilt_deg=30.0), Ratio(delta_deg=70.0))
    mo = build_mosaic(lay, MosaicSpec(density=0.008, seed=8))
    off = {"left": (-10.0, 6.0, 12.0)}
    moved = lay.moved(off)
    cm = CountModel(gain=0.3)
    a = fisher_information(FIELD, lay, LEG, mo, cm, HEADINGS, eye_offsets=off)
    b = fisher_information(FIELD, moved, LEG, mo, cm, HEADINGS)
    c = fisher_information(FIELD, lay, LEG, mo, cm, HEADINGS)
    assert np.array_equal(a.J_eye, b.J_eye)
    assert not np.allclose(a.J_eye[:, 0], c.J_eye[:, 0], rtol=1e-3)
    st = make_setup(FIELD, lay, LEG, mo, cm, eye_offsets=off)
    inp = pipeline.prepare(FIELD, Pose(147.0), moved, LEG)
    from renderer.predict.noisy import receptor_signal

    s = np.empty(mo.n_receptors)
    s[st.order] = F.receptor_signals(st, np.radians([147.0]))[0][0]
    assert np.max(np.abs(receptor_signal(inp, mo) - s)) < 1e-6


def test_a_mosaic_from_another_geometry_is_refused():
    lay = _layout(Normal())
    mo = build_mosaic(lay, MosaicSpec(density=0.005, seed=1))
    narrow = Layout("n", tuple(Eye(**{**e.describe(), "alignment": None, "nasal_deg": 30.0,
                                      "temporal_deg": 30.0}) for e in lay.eyes))
    with pytest.raises(MagretinaError, match="outside its field of view"):
        make_setup(FIELD, narrow, LEG, mo, CountModel())
    other = Layout("o", (sphere_eye(),))
    with pytest.raises(MagretinaError, match="built for eyes"):
        make_setup(FIELD, other, LEG, mo, CountModel())
