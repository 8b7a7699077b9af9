"""Real spherical-harmonic responses: basis, fitting, orientational averages, lookup tables."""

import numpy as np
import pytest
import sympy as sp
from scipy.spatial.transform import Rotation
from scipy.stats import vonmises_fisher

from renderer.errors import MagretinaError
from renderer.response import REGISTRY, Legendre
from renderer.response.harmonic import (SphericalHarmonic, angles_to_dirs, fit_quadrature,
                                        interp_sphere_lut, lebedev_grid, lm_index, n_coeffs,
                                        real_sph_harm, sphere_lut_nodes, vmf_factors)


@pytest.fixture
def rng():
    return np.random.default_rng(7)


def random_even(rng, lmax):
    c = rng.normal(size=n_coeffs(lmax)) / (1 + np.arange(n_coeffs(lmax))) ** 0.5
    l = np.concatenate([np.full(2 * k + 1, k) for k in range(lmax + 1)])
    c[l % 2 == 1] = 0
    return SphericalHarmonic(c)


def test_basis_matches_sympy_real_harmonics(rng):
    """Our Y_lm equal sympy's real harmonics Znm (sympy.functions.special.spherical_harmonics)
    up to sign conventions: ours omit the Condon–Shortley phase, so Y_lm = (−1)^m Z_lm for
    m ≥ 0, and ours are +√2 N_l|m| P̃_l|m|(cos θ) sin(|m|φ) for m < 0 where sympy's
    Z_l,−|m| = (Y_l^{−|m|} − conj)/(√2 i) carries the opposite sign: Y_lm = −Z_lm."""
    th, ph = 1.1, -2.3
    d = angles_to_dirs(th, ph)[None]
    y = real_sph_harm(5, d)[0]
    for l in range(6):
        for m in range(-l, l + 1):
            z = complex(sp.Znm(l, m, th, ph).expand(func=True).evalf())
            assert abs(z.imag) < 1e-12
            sign = (-1) ** m if m >= 0 else -1
            assert abs(y[lm_index(l, m)] - sign * z.real) < 1e-12, (l, m)


def test_orthonormal_on_lebedev():
    """Orthonormality with scipy's Lebedev rule of order 41 (exact to degree 41 ≥ 2·16)."""
    nodes, w = lebedev_grid(41)
    y = real_sph_harm(16, nodes)
    g = 4 * np.pi * (y.T * w) @ y
    np.testing.assert_allclose(g, np.eye(g.shape[0]), atol=1e-12)


def test_fit_is_exact_for_band_limited(rng):
    f = random_even(rng, 8)
    nodes, w = lebedev_grid(17)
    np.testing.assert_allclose(fit_quadrature(8, nodes, w, f.evaluate_dirs(nodes)), f.coeffs, atol=1e-12)


def test_axial_average_is_phi_average(rng):
    f = random_even(rng, 10)
    ax = f.axial_average()
    assert isinstance(ax, Legendre) and ax.is_even
    th = np.linspace(0, np.pi, 7)
    phi = np.linspace(-np.pi, np.pi, 64, endpoint=False)  # exact for trig degree < 64
    d = angles_to_dirs(th[:, None], phi[None, :])
    direct = f.evaluate_dirs(d.reshape(-1, 3)).reshape(7, 64).mean(axis=1)
    np.testing.assert_allclose(ax(np.cos(th)), direct, atol=1e-12)
    assert abs(ax.coeffs[0] - f.mean()) < 1e-14


def test_vmf_average_matches_scipy_vonmises_fisher(rng):
    """f̄(d) = ∫ f(d') vMF(d'; d, κ) dd' computed with scipy.stats.vonmises_fisher's pdf on a
    Lebedev rule of order 131 (the pdf at κ = 8 is smooth enough for ~1e-10) against the
    Funk–Hecke factors I_{l+1/2}(κ)/I_{1/2}(κ)."""
    f = random_even(rng, 8)
    kappa = 8.0
    g = f.vmf_average(kappa)
    nodes, w = lebedev_grid(131)
    vals = f.evaluate_dirs(nodes)
    for d in rng.normal(size=(3, 3)):
        d /= np.linalg.norm(d)
        ref = 4 * np.pi * np.sum(w * vals * vonmises_fisher(d, kappa).pdf(nodes))
        assert abs(g.evaluate_dirs(d) - ref) < 1e-9
    np.testing.assert_allclose(vmf_factors(4, 0.0), [1, 0, 0, 0, 0])
    np.testing.assert_allclose(vmf_factors(4, np.inf), 1)
    assert np.all(np.isfinite(vmf_factors(40, 1e5)))
    with pytest.raises(MagretinaError, match="kappa"):
        vmf_factors(4, -1)


def test_rotation_and_rotation_average(rng):
    """rotated(R)(d) = f(Rᵀ d) with scipy Rotation; the average over free rotation about an
    axis n equals the mean over 72 evenly spaced rotations about n (exact for degree < 72)."""
    f = random_even(rng, 8)
    r = Rotation.random(random_state=3)
    d = rng.normal(size=(5, 3))
    np.testing.assert_allclose(f.rotated(r).evaluate_dirs(d), f.evaluate_dirs(r.inv().apply(d)), atol=1e-12)
    axis = np.array([0.3, -0.5, 0.8])
    avg = f.rotation_average(axis)
    axis = axis / np.linalg.norm(axis)
    ang = np.linspace(0, 2 * np.pi, 72, endpoint=False)
    ref = np.mean([f.evaluate_dirs(Rotation.from_rotvec(a * axis).apply(d)) for a in ang], axis=0)
    np.testing.assert_allclose(avg.evaluate_dirs(d), ref, atol=1e-12)
    # about z it is the axial average
    np.testing.assert_allclose(f.rotation_average([0, 0, 1]).evaluate_dirs(d),
                               f.axial_average()(d[:, 2] / np.linalg.norm(d, axis=1)), atol=1e-12)


def test_sphere_lut_convention_and_bilinear(rng):
    """lut[i, j] = f(θ_i, φ_j) on θ = linspace(0, π, n_θ), φ = linspace(−π, π, n_φ) with the
    endpoint; bilinear lookup errs by ≤ (h_θ² max|f_θθ| + h_φ² max|f_φφ|)/8."""
    f = random_even(rng, 6)
    lut = f.sphere_lut(91, 181)
    th, ph = sphere_lut_nodes(91, 181)
    assert lut.shape == (91, 181)
    assert abs(lut[30, 40] - f.evaluate_dirs(angles_to_dirs(th[30], ph[40]))) < 1e-13
    np.testing.assert_allclose(lut[:, 0], lut[:, -1], atol=1e-13)
    np.testing.assert_allclose(lut[0], lut[0, 0], atol=1e-12)  # the pole is one point
    d = rng.normal(size=(500, 3))
    err = np.max(np.abs(interp_sphere_lut(lut, d) - f.evaluate_dirs(d)))
    # |f_θθ|, |f_φφ| ≤ Σ|c_lm| l² for unit-normalised real harmonics up to √((2l+1)/4π)
    l = np.concatenate([np.full(2 * k + 1, k) for k in range(7)])
    bound = np.sum(np.abs(f.coeffs) * l**2 * np.sqrt((2 * l + 1) / (4 * np.pi))) * \
        ((np.pi / 90) ** 2 + (2 * np.pi / 180) ** 2) / 8
    assert err <= bound


def test_registry_and_errors():
    assert REGISTRY["harmonic"] is SphericalHarmonic
    assert "spin-table" in REGISTRY
    with pytest.raises(MagretinaError):
        SphericalHarmonic([1.0, 2.0])
    with pytest.raises(MagretinaError):
        SphericalHarmonic([np.nan])
