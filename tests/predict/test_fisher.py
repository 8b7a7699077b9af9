"""Fisher information about heading: derivatives checked three ways, closed forms,
Monte-Carlo ML estimates against the Cramér–Rao bound, and the compass signature."""

import numpy as np
import pytest

from renderer import kernels
from renderer.errors import MagretinaError
from renderer.eye import load_layout
from renderer.eye.layout import Layout
from renderer.field import fixed
from renderer.mosaic import MosaicSpec, build_mosaic, explicit_mosaic
from renderer.pose import Pose
from renderer.predict import CountModel, GaussianNoise, PoissonNoise, fisher_information, make_setup
from renderer.predict import fisher as F
from renderer.predict.estimate import ml_heading, simulate_counts, wrapped_error_deg
from renderer.predict.signature import compass_signature
from renderer.response import Legendre, Tabulated

from .conftest import ring_dirs, sphere_eye

HEADINGS = np.array([0.0, 37.0, 101.0, 180.0, 263.0, 331.0])
#: cos²θ = (1 + 2 P₂(cos θ))/3 (P₂ = (3c² − 1)/2; Abramowitz & Stegun 1964, table 22.9)
COS2 = Legendre([1 / 3, 0.0, 2 / 3])


@pytest.fixture(scope="module")
def lateral():
    lay = load_layout("lateral")
    return lay, build_mosaic(lay, MosaicSpec(density=0.03, seed=11))


@pytest.mark.parametrize("pool, product, pitch, roll", [(0.0, "singlet", 0.0, 0.0),
                                                        (6.0, "triplet", 20.0, -10.0)])
def test_analytic_derivative_matches_complex_step_and_finite_differences(lateral, pool, product,
                                                                         pitch, roll):
    """dμ/dψ analytic through the rotation (Hermite table of f and f') against two
    independent references on the table-free model: the complex step Im μ(ψ+iε)/ε
    (Squire & Trapp 1998, SIAM Rev. 40:110; no cancellation, exact to rounding) and the
    eighth-order central difference (Fornberg 1988, Math. Comp. 51:699; truncation
    O(h⁸) ≈ 1e-16 at h = 0.01).  Agreement to 1e-9 relative leaves only the Hermite
    table error O(h⁴ f⁗/384) with h = 2/4096."""
    lay, _ = lateral
    mo = build_mosaic(lay, MosaicSpec(density=0.03, seed=11, pool_radius_deg=pool))
    resp = Legendre([0.7, 0.05, 0.12, 0.0, -0.03])
    cm = CountModel(gain=0.4)
    field = fixed(48.0, 62.0, 7.0)
    res = fisher_information(field, lay, resp, mo, cm, HEADINGS, pitch, roll, product)
    st = make_setup(field, lay, resp, mo, cm, pitch, roll, product)
    cs = F.fisher_complex_step(st, HEADINGS)
    fd = F.fisher_finite_difference(st, HEADINGS)
    assert np.allclose(res.J_eye, cs, rtol=1e-9, atol=0)
    assert np.allclose(fd, cs, rtol=1e-8, atol=0)
    assert np.all(res.J > 0)


def test_numba_kernel_equals_numpy_twin(lateral):
    lay, mo = lateral
    for m in (mo, build_mosaic(lay, MosaicSpec(density=0.03, seed=11, pool_radius_deg=5.0))):
        a = fisher_information(fixed(50, 65, 0), lay, COS2, m, CountModel(), HEADINGS)
        b = fisher_information(fixed(50, 65, 0), lay, COS2, m, CountModel(), HEADINGS,
                               backend="numpy")
        assert np.allclose(a.J_eye, b.J_eye, rtol=1e-12)
        assert a.min_count == pytest.approx(b.min_count, rel=1e-14)


def test_receptor_signals_match_the_rendering_kernels(lateral):
    """The prediction model must see the same pattern the renderer draws: per receptor,
    the Hermite value equals kernels.signal_numpy at the receptor's head direction with
    that eye picked, up to the renderer's linear-table error h²/8·max|f''| (h = 2/4096).
    (Every alignment mode: tests/predict/test_alignment_modes.py.)"""
    lay, mo = lateral
    field, pose = fixed(50, 65, 0), Pose(40.0, 10.0, 0.0)
    from renderer import pipeline

    inputs = pipeline.prepare(field, pose, lay, COS2)
    st = make_setup(field, lay, COS2, mo, CountModel(), 10.0, 0.0)
    b, _ = F.field_eye_vs_heading(st.b_world_unit, st.R_eye_head, st.M_world_head0,
                                  np.radians([40.0]))
    assert np.allclose(b[0], inputs.b_eye, atol=1e-14)
    s = np.empty(mo.n_receptors)
    s[st.order] = F.receptor_signals(st, np.radians([40.0]))[0][0]
    for e in range(len(lay.eyes)):
        sel = mo.eye_index == e
        ref = kernels.signal_numpy(mo.dirs_head[sel], inputs.R_eye_head, inputs.eye_params,
                                   inputs.b_eye, inputs.lut, pick=e)
        # f = cos²θ: f'' = 2 in cos θ
        assert np.nanmax(np.abs(ref - s[sel])) < (2 / 4096) ** 2 / 8 * 2.0 * 1.01


def _ring(n):
    lay = Layout("sphere", (sphere_eye(),))
    return lay, explicit_mosaic(lay, np.zeros(n, int), ring_dirs(n))


def test_closed_form_ring_poisson_and_gaussian():
    """Closed form.  N receptors with axes equally spaced on the horizon, φ_k, a horizontal
    field (inclination 0) and s = cos²θ.  At yaw ψ, cos θ_k = cos(φ_k + ψ), so
    s_k = (1 + cos 2x_k)/2 with x_k = φ_k + ψ; the mean over an equally spaced set is
    exactly ½ (N ≥ 3), hence m_k = cos 2x_k and

        μ_k = A(1 + g cos 2x_k),    μ_k' = −2Ag sin 2x_k.

    Poisson: J = Σ 4A²g² sin²2x_k / (A(1 + g cos 2x_k)).  The sum over N equally spaced
    points equals N/2π × the period integral up to aliasing terms O(r^N),
    r = (1 − √(1−g²))/g, and ∫₀^{2π} sin²u/(1 + g cos u) du = 2π(1 − √(1−g²))/g²
    (Gradshteyn & Ryzhik 2007, 3.613.2 with sin² = 1 − cos²), so

        J = 4AN(1 − √(1 − g²)).

    Gaussian with a constant floor σ (no shot term): J = Σ μ'²/σ² = 4A²g² Σ sin²2x_k/σ²
    = 2A²g²N/σ² exactly (Σ cos 4x_k = 0 for N ≥ 5).  With shot noise and a floor → 0 the
    Gaussian form tends to the Poisson one."""
    N, A, g = 48, 500.0, 0.3
    lay, mo = _ring(N)
    field = fixed(50.0, 0.0, 0.0)
    poisson = CountModel(flux_per_s=A / 0.1, integration_s=0.1, gain=g)
    res = fisher_information(field, lay, COS2, mo, poisson, HEADINGS)
    assert np.allclose(res.J, 4 * A * N * (1 - np.sqrt(1 - g * g)), rtol=1e-8)
    sigma = 7.0
    gauss = CountModel(flux_per_s=A / 0.1, integration_s=0.1, gain=g,
                       noise=GaussianNoise(floor_counts=sigma, shot=False))
    res_g = fisher_information(field, lay, COS2, mo, gauss, HEADINGS)
    assert np.allclose(res_g.J, 2 * A * A * g * g * N / sigma ** 2, rtol=1e-9)
    tiny = CountModel(flux_per_s=A / 0.1, integration_s=0.1, gain=g,
                      noise=GaussianNoise(floor_counts=1e-6, shot=True))
    assert np.allclose(fisher_information(field, lay, COS2, mo, tiny, HEADINGS).J, res.J,
                       rtol=1e-12)
    assert res.crb_deg == pytest.approx(np.degrees(1 / np.sqrt(res.J)))


def test_ml_estimates_reach_the_cramer_rao_bound_at_high_counts():
    """Maximum-likelihood estimates are asymptotically efficient (Cramér 1946; e.g.
    Kay 1993, Fundamentals of Statistical Signal Processing I, thm 7.1): for the ring of
    the closed-form test at high counts the spread of ψ̂ over K draws equals
    1/√J = 1/√(4AN(1 − √(1 − g²))).  With K = 1500 the sample standard deviation has
    relative standard error 1/√(2K) ≈ 1.8 %; the test allows 8 % (4.4 SE).  Errors are
    taken modulo 180°, the period of an axial pattern at zero inclination."""
    N, A, g = 36, 2.0e4, 0.2
    lay, mo = _ring(N)
    field = fixed(50.0, 0.0, 0.0)
    cm = CountModel(flux_per_s=A, integration_s=1.0, gain=g)
    st = make_setup(field, lay, COS2, mo, cm)
    crb = np.degrees(1 / np.sqrt(4 * A * N * (1 - np.sqrt(1 - g * g))))
    rng = np.random.default_rng(20260915)
    ratios = []
    for psi0 in (10.0, 55.0, 128.0):
        n = simulate_counts(st, PoissonNoise(), psi0, 1500, rng)
        est = ml_heading(n, st, PoissonNoise(), grid_step_deg=0.05)
        err = wrapped_error_deg(est, psi0, period_deg=180.0)
        assert abs(err.mean()) < 4 * crb / np.sqrt(1500)  # unbiased to within the SE
        ratios.append(err.std(ddof=1) / crb)
    assert np.all(np.abs(np.array(ratios) - 1) < 0.08), ratios


def test_low_counts_spread_exceeds_the_bound():
    """At low counts the bound is not reached (a bound, not an equality): with about 2
    photons per receptor the ML spread is well above 1/√J — the Monte-Carlo check can
    fail, so its agreement at high counts means something."""
    N, A, g = 36, 2.0, 0.2
    lay, mo = _ring(N)
    cm = CountModel(flux_per_s=A, integration_s=1.0, gain=g)
    st = make_setup(fixed(50.0, 0.0, 0.0), lay, COS2, mo, cm)
    crb = np.degrees(1 / np.sqrt(4 * A * N * (1 - np.sqrt(1 - g * g))))
    n = simulate_counts(st, PoissonNoise(), 30.0, 400, np.random.default_rng(1))
    err = wrapped_error_deg(ml_heading(n, st, PoissonNoise(), 0.1), 30.0, 180.0)
    assert err.std() > 1.15 * crb  # measured 1.23 with this seed; 1.00 ± 0.035 would be efficient


def test_inclination_compass_signature(lateral):
    """Inclination 0°: b_head(ψ+180°) = −b_head(ψ) and radical-pair yields are even in the
    field (time-reversal symmetry; REFERENCES, spin dynamics), so the ψ / ψ+180°
    asymmetry vanishes (to rounding).  Inclination 90°: yaw leaves b_head unchanged, so
    J = 0 (relative to a tilted field).  Intermediate inclinations separate poleward from
    equatorward (Wiltschko & Wiltschko 1972, Science 176:62, an inclination compass).  An
    odd response (c₁ ≠ 0) is not field-reversal symmetric and shows an asymmetry at 0°:
    the check can fail."""
    lay, mo = lateral
    cm = CountModel(gain=0.3)
    even = Legendre([0.7, 0.0, 0.1])
    sig = {I: compass_signature(make_setup(fixed(50, I, 0), lay, even, mo, cm, pitch_deg=15.0))
           for I in (0.0, 60.0)}
    assert sig[0.0]["asymmetry_rms"] < 1e-13 and sig[0.0]["asymmetry_dprime_mean"] < 1e-9
    assert sig[60.0]["asymmetry_rms"] > 1e-3 and sig[60.0]["asymmetry_dprime_min"] > 1.0
    odd = compass_signature(make_setup(fixed(50, 0.0, 0), lay, Legendre([0.7, 0.1, 0.1]), mo, cm))
    assert odd["asymmetry_rms"] > 1e-3
    J90 = fisher_information(fixed(50, 90.0, 0), lay, even, mo, cm, HEADINGS).J
    J60 = fisher_information(fixed(50, 60.0, 0), lay, even, mo, cm, HEADINGS).J
    assert np.all(J90 < 1e-20 * J60.min())
    assert np.all(fisher_information(fixed(0.0, 60.0, 0), lay, even, mo, cm, HEADINGS).J == 0)


def test_pooling_never_adds_information(lateral):
    """Summing independent Poisson counts is a statistic of the data, so the Fisher
    information cannot grow (data-processing inequality for Fisher information; Zamir
    1998, IEEE Trans. Inf. Theory 44:1246); the total count is unchanged."""
    lay, _ = lateral
    field = fixed(50, 65, 0)
    J = [fisher_information(field, lay, COS2,
                            build_mosaic(lay, MosaicSpec(density=0.03, seed=11, pool_radius_deg=r)),
                            CountModel(), HEADINGS).J for r in (0.0, 4.0, 15.0)]
    assert np.all(J[1] <= J[0] * (1 + 1e-12)) and np.all(J[2] <= J[1] * (1 + 1e-12))
    assert np.all(J[2] < J[0])


def test_derivative_tables():
    """Legendre derivative tables are exact (numpy.polynomial.legendre.legder); a
    tabulated response sampled from the same series gives the same slopes to the
    accuracy of its cubic spline; the generic fourth-order difference fallback agrees
    to O(h⁴)."""
    from renderer.response.base import lut_nodes

    leg = Legendre([0.6, 0.0, 0.2, 0.0, 0.05])
    c = lut_nodes()
    exact = F.derivative_lut(leg)
    th = np.linspace(0, 180, 91)
    tab = Tabulated(th, leg(np.cos(np.radians(th))))
    assert np.max(np.abs(F.derivative_lut(tab) - exact)) < 2e-3
    assert np.max(np.abs(F._fd4(leg, c) - exact)) < 1e-9
    assert np.array_equal(F.derivative_lut(leg, "triplet"), -exact)


def test_bad_inputs_are_reported(lateral):
    lay, mo = lateral
    with pytest.raises(MagretinaError, match="negative"):
        fisher_information(fixed(50, 65, 0), lay, Legendre([0.1, 0, 0.5]), mo,
                           CountModel(gain=5.0), HEADINGS)
    for kw, word in (({"flux_per_s": -3.0}, "flux_per_s"), ({"integration_s": 0.0}, "integration_s"),
                     ({"gain": -1.0}, "gain")):
        with pytest.raises(MagretinaError, match=word):
            CountModel(**kw)
    with pytest.raises(MagretinaError, match="floor_counts"):
        GaussianNoise(floor_counts=-1.0)
    with pytest.raises(MagretinaError, match="headings_deg"):
        fisher_information(fixed(50, 65, 0), lay, COS2, mo, CountModel(), [np.nan])
