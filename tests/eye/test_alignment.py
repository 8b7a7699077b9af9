"""Receptor alignment hypotheses: averages precomputed into tables, checked against
closed forms, the addition theorem and Monte-Carlo sampling."""

import dataclasses

import numpy as np
import pytest
from numpy.polynomial import legendre as npleg
from scipy import stats

from renderer import pipeline
from renderer.errors import MagretinaError
from renderer.eye import Eye, Layout, parse_alignment
from renderer.eye.alignment import ChiefRay, Disorder, FullFrame, Normal, Ratio, Tilt
from renderer.eye.alignment.averaging import kappa_from_p2, p2_of_kappa, vmf_factors
from renderer.field import fixed
from renderer.pose import Pose
from renderer.response import Legendre, Tabulated, lut_nodes
from renderer.views import HeadPanorama

C = lut_nodes()


def cos2_series(a, b):
    """a + b cos²θ as a Legendre series: cos² = (1 + 2 P_2)/3."""
    return Legendre([a + b / 3.0, 0.0, 2.0 * b / 3.0])


def as_table(resp):
    """The same function as a Tabulated response, so the generic projection path is used."""
    th = np.linspace(0.0, 180.0, 721)
    return Tabulated(th, resp(np.cos(np.radians(th))))


@pytest.mark.parametrize("make", [lambda r: r, as_table], ids=["legendre", "tabulated"])
def test_tilt_90_turns_cos2_into_half_sin2(make):
    """Fixed tilt γ = 90° with free rotation: a + b cos²θ → a + (b/2) sin²θ (rotation average
    of cos² of the molecular angle, spherical-harmonic addition theorem; common practice).
    The tabulated path projects a cubic spline of 721 samples onto Legendre terms; its
    spline error (h⁴ with h = 0.25°) stays below 1e-9."""
    a, b = 0.6, 0.3
    lut = Tilt(tilt_deg=90.0).axial_lut(make(cos2_series(a, b)))
    np.testing.assert_allclose(lut, a + 0.5 * b * (1 - C**2), atol=1e-9)


def test_magic_angle_cancels_the_l2_term():
    """γ = arccos(1/√3) = 54.7356°: P_2(cos γ) = 0, so c_0 + c_2 P_2 becomes c_0 (addition
    theorem; common practice) while the l = 4 term survives scaled by P_4(cos γ) = −7/18."""
    g = np.degrees(np.arccos(1 / np.sqrt(3)))
    lut = Tilt(tilt_deg=g).axial_lut(Legendre([0.5, 0.0, 0.2]))
    np.testing.assert_allclose(lut, 0.5, atol=1e-14)
    lut4 = Tilt(tilt_deg=g).axial_lut(Legendre([0.5, 0.0, 0.0, 0.0, 0.1]))
    np.testing.assert_allclose(lut4, 0.5 + 0.1 * (-7 / 18) * npleg.legval(C, [0, 0, 0, 0, 1]),
                               atol=1e-12)


def test_tilt_equals_brute_force_rotation_average():
    """The P_l(cos γ) scaling against a direct average over the rotation angle φ of
    f(cos θ cos γ + sin θ sin γ cos φ) (512-point trapezoid, spectrally exact for the
    degree-6 polynomial used)."""
    resp = Legendre([0.4, 0.0, 0.25, 0.0, -0.1, 0.0, 0.05])
    g = np.radians(33.0)
    phi = 2 * np.pi * np.arange(512) / 512
    s = np.sqrt(1 - C**2)
    brute = resp(C[:, None] * np.cos(g) + s[:, None] * np.sin(g) * np.cos(phi)).mean(axis=1)
    np.testing.assert_allclose(Tilt(tilt_deg=33.0).axial_lut(resp), brute, atol=1e-13)


def test_vmf_factors_against_langevin_and_monte_carlo():
    """⟨P_1⟩ of a von Mises–Fisher distribution is the Langevin function coth κ − 1/κ
    (common practice); ⟨P_l⟩ for l = 1..4 against 200 000 samples from
    scipy.stats.vonmises_fisher (seed 7): agreement within 5 standard errors."""
    for k in (0.5, 3.0, 40.0):
        assert vmf_factors(k, 1)[1] == pytest.approx(1 / np.tanh(k) - 1 / k, rel=1e-12)
    kappa = 4.0
    x = stats.vonmises_fisher([0.0, 0.0, 1.0], kappa).rvs(200_000, random_state=7)[:, 2]
    V = npleg.legvander(x, 4)
    mean, se = V.mean(axis=0), V.std(axis=0) / np.sqrt(len(x))
    np.testing.assert_array_less(np.abs(vmf_factors(kappa, 4) - mean)[1:], 5 * se[1:])


def test_disorder_table_against_monte_carlo_of_the_response():
    """Disorder-averaged response at a few θ against a Monte-Carlo average of f over
    sampled molecular axes (vMF about the nominal axis, κ = 6, 200 000 samples, seed 3),
    within 5 standard errors."""
    resp = Legendre([0.5, 0.0, 0.3, 0.0, 0.1])
    al = Disorder(kappa=6.0)
    lut = al.axial_lut(resp)
    axes = stats.vonmises_fisher([0.0, 0.0, 1.0], 6.0).rvs(200_000, random_state=3)
    for th in (0.0, 35.0, 70.0, 90.0):
        b = np.array([np.sin(np.radians(th)), 0.0, np.cos(np.radians(th))])
        v = resp(axes @ b)
        want = np.interp(np.cos(np.radians(th)), C, lut)
        assert abs(v.mean() - want) < 5 * v.std() / np.sqrt(v.size)


def test_order_parameter_round_trip_and_limits():
    """⟨P_2⟩ ↔ κ is one-to-one; κ = 0 flattens the pattern; a large κ approaches perfect
    order (⟨P_l⟩ ≈ 1 − l(l+1)/(2κ), the small-angle limit; common practice)."""
    for k in (0.3, 2.0, 25.0, 400.0):
        assert kappa_from_p2(p2_of_kappa(k)) == pytest.approx(k, rel=1e-8)
    assert Disorder(order_p2=0.5).kappa == pytest.approx(kappa_from_p2(0.5))
    resp = Legendre([0.5, 0.0, 0.3])
    np.testing.assert_allclose(Disorder(kappa=0.0).axial_lut(resp), 0.5, atol=1e-15)
    assert vmf_factors(1e4, 2)[2] == pytest.approx(1 - 3 / 1e4, abs=1e-7)
    with pytest.raises(MagretinaError, match="order_p2"):
        Disorder(order_p2=1.0)
    with pytest.raises(MagretinaError, match="exactly one"):
        Disorder(kappa=1.0, order_p2=0.2)


def _pattern(layout, resp, field=None, pose=Pose(20.0, 10.0, 5.0), width=96):
    field = field or fixed(48.0, 64.0, 4.0)
    return pipeline.render_pattern(field, pose, layout, resp, HeadPanorama(width))


def test_chief_ray_and_normal_coincide_at_d0_and_differ_otherwise():
    """With the nodal point at the retina's centre the chief ray is the normal (geometry);
    with d ≠ 0 they differ, and the chief-ray pattern is f(u·b) of the viewing direction
    u whatever the eye geometry (the hypothesis's defining property)."""
    resp = Legendre([0.6, 0.0, 0.25])
    for d in (0.0, 2.5):
        base = Eye(retina_radius_mm=6.0, nodal_offset_mm=d, nasal_deg=180, temporal_deg=180,
                   dorsal_deg=180, ventral_deg=180, name="sphere")
        n = _pattern(Layout("t", (base,)), resp)
        c = _pattern(Layout("t", (base.with_alignment(ChiefRay()),)), resp)
        if d == 0.0:
            np.testing.assert_allclose(n, c, atol=1e-14)
        else:
            assert np.max(np.abs(n - c)) > 1e-3
            view = HeadPanorama(96)
            b = Pose(20.0, 10.0, 5.0).R_head_world @ (fixed(48.0, 64.0, 4.0).ned_T / fixed(48.0, 64.0, 4.0).total_T)
            want = resp(view.directions() @ b)
            np.testing.assert_allclose(c, want, atol=2e-8)  # LUT interpolation, h²/8·|f''|


def test_ratio_cancels_overall_intensity():
    """A ratio channel s_A/s_B is unchanged when every receptor's signal is scaled by the
    same light level (Worster, Mouritsen & Hore 2017), while each population alone is not."""
    eye = Eye(retina_radius_mm=6.0, nodal_offset_mm=1.5, name="left", azimuth_deg=-60,
              nasal_deg=80, temporal_deg=100, dorsal_deg=80, ventral_deg=80,
              alignment=Ratio(delta_deg=70.0, chi_deg=30.0))
    lay = Layout("t", (eye,))
    r1 = _pattern(lay, Legendre([0.6, 0.0, 0.25]))
    r3 = _pattern(lay, Legendre([1.8, 0.0, 0.75]))
    np.testing.assert_allclose(r1, r3, rtol=1e-12)
    assert np.nanmax(np.abs(r1 - 1.0)) > 0.05


def test_ratio_population_b_axis_from_explicit_frames():
    """Population B's axis = cos δ·a + sin δ(cos χ·e1 + sin χ·e2) built from the eye's
    explicit receptor frames (meridian reference) gives the same ratio as the kernel."""
    al = Ratio(delta_deg=50.0, chi_deg=-20.0)
    eye = Eye(retina_radius_mm=6.0, nodal_offset_mm=2.0, alignment=al, nasal_deg=170,
              temporal_deg=170, dorsal_deg=170, ventral_deg=170)
    resp = Legendre([0.6, 0.0, 0.25])
    b_head = np.array([0.3, -0.5, 0.81])
    b_head /= np.linalg.norm(b_head)
    view = HeadPanorama(64)
    u = view.directions().reshape(-1, 3)
    F = eye.receptor_frames(u)
    axB = al.population_b_axes(F[..., 2], F[..., 0], F[..., 1])
    want = resp(F[..., 2] @ b_head) / resp(axB @ b_head)
    got = pipeline.render_pattern(_Field(b_head), Pose(0, 0, 0), Layout("t", (eye,)), resp, view)
    seen = ~np.isnan(got.ravel())
    np.testing.assert_allclose(got.ravel()[seen], want[seen], atol=1e-7)


class _Field:
    """A bare field object in the head frame (pose identity), total 50 µT."""

    def __init__(self, unit):
        self.ned_T = 50e-6 * np.asarray(unit)


class XYResponse:
    """A full (non-axial) test response with explicit x/y dependence, even in the field:
    f = 0.5 + 0.2 x² − 0.1 y² + 0.15 z² + 0.08 xy (made up for the test)."""

    axial = False

    def evaluate_dirs(self, d):
        d = np.asarray(d, float)
        x, y, z = d[..., 0], d[..., 1], d[..., 2]
        return 0.5 + 0.2 * x * x - 0.1 * y * y + 0.15 * z * z + 0.08 * x * y

    def axial_average(self):
        # <x²> = <y²> = sin²θ/2 over the in-plane angle, <xy> = 0
        return Legendre([0.5 + (0.2 - 0.1) / 3 + 0.15 / 3, 0.0, (-(0.2 - 0.1) / 3 + 0.15 * 2 / 3)])


def test_full_frame_against_explicit_frames():
    """Full-frame response, meridian and fixed in-plane references: the rendered value is
    f(Fᵀ b) with the receptor frames F from the eye's explicit geometry, within the cube
    map's bilinear error h²/8·max|∂²f| ≤ 8e-6 (h = 2/256, |∂²f| ≤ 1 here)."""
    resp = XYResponse()
    b_head = np.array([0.2, 0.6, 0.77])
    b_head /= np.linalg.norm(b_head)
    view = HeadPanorama(64)
    u = view.directions().reshape(-1, 3)
    for in_plane, psi in (("meridian", 0.0), ("meridian", 40.0), ("fixed", -25.0)):
        al = FullFrame(in_plane=in_plane, in_plane_deg=psi)
        eye = Eye(retina_radius_mm=6.0, nodal_offset_mm=1.8, alignment=al, nasal_deg=150,
                  temporal_deg=150, dorsal_deg=150, ventral_deg=150)
        F = eye.receptor_frames(u, in_plane, psi)
        want = resp.evaluate_dirs(np.einsum("nij,i->nj", F, b_head))
        got = pipeline.render_pattern(_Field(b_head), Pose(0, 0, 0), Layout("t", (eye,)), resp,
                                      view).ravel()
        seen = ~np.isnan(got)
        assert seen.sum() > 1000
        np.testing.assert_allclose(got[seen], want[seen], atol=1e-5)


def test_random_in_plane_is_the_average_of_fixed_angles():
    """Uniformly random in-plane angle = the axial average: for a response of degree 2 in
    the direction, the mean over ψ = 0°, 90°, 180°, 270° of the meridian-frame pattern
    removes every m ≠ 0 term and equals the random-angle pattern (cube-map error bound)."""
    resp = XYResponse()
    base = dict(retina_radius_mm=6.0, nodal_offset_mm=1.2, nasal_deg=120, temporal_deg=120,
                dorsal_deg=120, ventral_deg=120)
    pats = [_pattern(Layout("t", (Eye(**base, alignment=FullFrame(in_plane_deg=p)),)), resp)
            for p in (0.0, 90.0, 180.0, 270.0)]
    rnd = _pattern(Layout("t", (Eye(**base, alignment=FullFrame(in_plane="random")),)), resp)
    np.testing.assert_allclose(np.mean(pats, axis=0), rnd, atol=1e-5, equal_nan=True)
    assert np.nanmax(np.abs(pats[0] - rnd)) > 1e-2


def test_full_frame_with_the_spherical_harmonic_response():
    """The spin engineer's SphericalHarmonic response (evaluate_dirs, axial_average) works in
    the full-frame mode: random in-plane = its own axial average (Legendre) exactly, and
    the meridian frame agrees with explicit frames within the cube-map bound."""
    harmonic = pytest.importorskip("renderer.response.harmonic")
    rng = np.random.default_rng(5)
    c = np.zeros(9)
    c[0] = 2.0
    c[4:9] = 0.2 * rng.normal(size=5)  # l = 2, all m
    resp = harmonic.SphericalHarmonic(c)
    base = dict(retina_radius_mm=6.0, nodal_offset_mm=1.0, nasal_deg=120, temporal_deg=120,
                dorsal_deg=120, ventral_deg=120)
    rnd = _pattern(Layout("t", (Eye(**base, alignment=FullFrame(in_plane="random")),)), resp)
    ax = _pattern(Layout("t", (Eye(**base),)), resp.axial_average())
    np.testing.assert_allclose(rnd, ax, atol=1e-14, equal_nan=True)
    mer = _pattern(Layout("t", (Eye(**base, alignment=FullFrame()),)), resp)
    assert np.nanmax(np.abs(mer - rnd)) > 1e-3


def test_parse_alignment_errors_name_key_and_allowed():
    """Bad alignment specs: unknown mode, unknown key, out-of-range value."""
    with pytest.raises(MagretinaError, match="mode = 'tilted'.*allowed normal"):
        parse_alignment({"mode": "tilted"})
    with pytest.raises(MagretinaError, match="tilt_degrees: unknown key"):
        parse_alignment({"mode": "tilt", "tilt_degrees": 20})
    with pytest.raises(MagretinaError, match=r"tilt_deg = 200.*\[0, 180\]"):
        parse_alignment({"mode": "tilt", "tilt_deg": 200})
    with pytest.raises(MagretinaError, match="in_plane = 'radial'"):
        FullFrame(in_plane="radial")
    assert parse_alignment("chief-ray") == ChiefRay()
    assert dataclasses.asdict(parse_alignment({"mode": "disorder", "order_p2": 0.4}))["kappa"] > 0
    assert Normal().hypothesis.startswith("Receptor axis along the inward normal")
