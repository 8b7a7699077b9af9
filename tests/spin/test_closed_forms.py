"""Closed forms and limits of the singlet yield, derived from the eigenbasis formula.

Source of the formula: Timmel, Till, Brocklehurst, McLauchlan & Hore 1998, Mol. Phys.
95:71, Φ_S = (1/M) Σ_mn |⟨m|P_S|n⟩|² k²/(k² + ω_mn²) for k_S = k_T = k.  Each test
derives its special case in its docstring; all run every solver that applies.
"""

import numpy as np
import pytest
import sympy as sp

from renderer.response.spin_table import compute_spin_table
from renderer.spin import (G_FREE, GAMMA_E, RAD_S_PER_MT, Nucleus, Radical, RadicalPair,
                           yields)
from conftest import all_methods, random_fields, random_pair, random_tensor


def test_no_nuclei_equal_g_is_one(rng):
    """No nuclei, g_A = g_B: H = ω·(S_A + S_B) commutes with P_S (the singlet has total spin
    0), so P_mn ≠ 0 only between degenerate states, ω_mn = 0 there, and
    Φ_S = (1/M) Σ|P_mn|² = Tr P_S / M = 1."""
    pair = RadicalPair(Radical(), Radical(), k_s=1e6, k_t=1e6)
    fields = random_fields(rng, 5, 1e-3)
    for name, (ps, pt) in all_methods(pair, fields).items():
        np.testing.assert_allclose(ps, 1.0, atol=1e-12, err_msg=name)
        np.testing.assert_allclose(pt, 0.0, atol=1e-12, err_msg=name)


@pytest.mark.parametrize("k", [1e5, 1e6, 1e7])
def test_delta_g_only(k):
    """Δg only: H = ω_A S_Az + ω_B S_Bz mixes |S⟩ and |T0⟩ at Δω = ω_A − ω_B, so
    p_S(t) = cos²(Δω t/2) = ½(1 + cos Δω t) and Φ_S = k∫e^{−kt}p_S = ½ + ½ k²/(k² + Δω²),
    with ω = (g/g_e) γ_e B (electron Zeeman convention of renderer.spin.hamiltonian)."""
    g_a, g_b = 2.0031, 2.0003
    b = 2e-3  # 2 mT along an oblique direction
    field = b * np.array([0.3, -0.4, np.sqrt(1 - 0.25)])
    pair = RadicalPair(Radical(g=g_a), Radical(g=g_b), k_s=k, k_t=k)
    dw = (g_a - g_b) / G_FREE * GAMMA_E * b
    expected = 0.5 + 0.5 * k * k / (k * k + dw * dw)
    for name, (ps, _) in all_methods(pair, field).items():
        assert abs(ps - expected) < 1e-12, name
    pair2 = RadicalPair(Radical(), Radical(), k_s=k, k_t=k, g_a=g_a, g_b=g_b)
    assert abs(yields(pair2, field)[0] - expected) < 1e-12


def zero_field_one_nucleus(spin, a_rad_s, k):
    """Φ_S at zero field for one nucleus of spin I, isotropic coupling a, on radical A.

    Derivation: B has no nuclei, so (separable form) p_S(t) = 1/4 + ½ Σ_p R^A_pp(t).
    H_A = a S·I has levels F = I ± ½ split by Ω = a(I + ½).  By the projection theorem
    S acts within manifold F as c_F F with c_± = ±1/(2I+1), so the static part of
    Tr[S_z S_z(t)] is Σ_F c_F² (2F+1)F(F+1)/3 = (4I² + 4I + 3)/(6(2I+1)) out of
    Tr[S_z²] = (2I+1)/2: a fraction w = (4I² + 4I + 3)/(3(2I+1)²); the rest oscillates
    at Ω.  Hence Φ_S = 1/4 + ¾[w + (1 − w) k²/(k² + Ω²)].  For I = ½: w = ½ and
    Φ_S = 5/8 + 3/8 · k²/(k² + a²).
    """
    w = (4 * spin**2 + 4 * spin + 3) / (3 * (2 * spin + 1) ** 2)
    om = a_rad_s * (spin + 0.5)
    return 0.25 + 0.75 * (w + (1 - w) * k * k / (k * k + om * om))


@pytest.mark.parametrize("spin", [0.5, 1.0, 1.5, 2.0])
def test_one_isotropic_nucleus_zero_field(spin):
    """Zero field, one isotropic nucleus: closed form of :func:`zero_field_one_nucleus`."""
    a_mT, k = 0.7, 2e7
    pair = RadicalPair(Radical([Nucleus.isotropic(spin, a_mT)]), Radical(), k_s=k, k_t=k)
    expected = zero_field_one_nucleus(spin, a_mT * RAD_S_PER_MT, k)
    if spin == 0.5:
        a = a_mT * RAD_S_PER_MT
        assert abs(expected - (5 / 8 + 3 / 8 * k * k / (k * k + a * a))) < 1e-15
    for name, (ps, _) in all_methods(pair, np.zeros(3)).items():
        assert abs(ps - expected) < 1e-12, name


def sympy_in_field_formula():
    """Closed form for one spin-½ nucleus (isotropic a) on A, no nuclei on B, equal g, field ω.

    Derived exactly with sympy from the eigenbasis formula in the product eigenbasis:
    H_A = ω S_z + a S·I is diagonalised symbolically (levels ω/2 + a/4, −ω/2 + a/4,
    −a/4 ± ½√(a² + ω²)), H_B = ω S_z; ⟨ac|P_S|bd⟩ = δδ/4 − Σ_p (S_Ap)_ab (S_Bp)_cd and
    Φ_S = (1/2) Σ |P|² k²/(k² + (ω_ab + ω_cd)²), simplified to a rational function of
    (a, ω, k).  At ω = 0 it reduces to 5/8 + 3/8 k²/(k² + a²) (checked symbolically).
    """
    a, w, k = sp.symbols("a omega k", positive=True)
    half = sp.Rational(1, 2)
    sx = sp.Matrix([[0, half], [half, 0]])
    sy = sp.Matrix([[0, -sp.I * half], [sp.I * half, 0]])
    sz = sp.Matrix([[half, 0], [0, -half]])
    from sympy.physics.quantum import TensorProduct as TP

    s = [TP(m, sp.eye(2)) for m in (sx, sy, sz)]
    nuc = [TP(sp.eye(2), m) for m in (sx, sy, sz)]
    ha = w * s[2] + a * sum((s[i] * nuc[i] for i in range(3)), sp.zeros(4))
    v, dmat = ha.diagonalize(normalize=True)
    ea = [sp.simplify(dmat[i, i]) for i in range(4)]
    eb = [w / 2, -w / 2]
    sa = [sp.simplify(v.H * s[p] * v) for p in range(3)]
    sb = [sx, sy, sz]
    tot = 0
    for i in range(4):
        for j in range(4):
            for c in range(2):
                for d in range(2):
                    g = sum(sa[p][i, j] * sb[p][c, d] for p in range(3))
                    if i == j and c == d:
                        g = g - sp.Rational(1, 4)
                    g2 = sp.simplify(g * sp.conjugate(g))
                    if g2 == 0:
                        continue
                    om = ea[i] - ea[j] + eb[c] - eb[d]
                    tot += g2 * k**2 / (k**2 + om**2)
    phi = sp.simplify(tot / 2)
    zero = sp.simplify(phi.subs(w, 0) - (sp.Rational(5, 8) + sp.Rational(3, 8) * k**2 / (k**2 + a**2)))
    assert zero == 0
    return sp.lambdify((a, w, k), phi, "numpy")


def test_one_nucleus_in_field_matches_sympy(rng):
    """Every solver against the sympy-derived in-field closed form (see its docstring),
    for several fields, couplings and rates; field along any direction (isotropic a)."""
    f = sympy_in_field_formula()
    for a_mT, b_T, k in [(0.5, 50e-6, 1e6), (1.2, 0.3e-3, 3e6), (0.2, 2e-3, 1e7), (0.8, 1e-6, 5e5)]:
        pair = RadicalPair(Radical([Nucleus.isotropic(0.5, a_mT)]), Radical(), k_s=k, k_t=k)
        field = random_fields(rng, 1, b_T)[0]
        expected = float(f(a_mT * RAD_S_PER_MT, GAMMA_E * b_T, k))
        for name, (ps, _) in all_methods(pair, field).items():
            assert abs(ps - expected) < 1e-11, (name, a_mT, b_T, k)


def test_isotropic_tables(rng):
    """Zero field, or isotropic couplings with isotropic g only: H(R B) = U_R H(B) U_R† for a
    rotation U_R of all spins, and P_S is rotation-invariant, so Φ_S does not depend on
    the field direction; the table's anisotropy must vanish (round-off)."""
    iso = RadicalPair(Radical([Nucleus.isotropic(1, 0.6), Nucleus.isotropic(0.5, -0.3)]),
                      Radical([Nucleus.isotropic(0.5, 0.4)]), k_s=1e6, k_t=1e6)
    tab = compute_spin_table(iso, 50e-6, lmax=6, use_cache=False)
    assert np.ptp(tab.values) < 1e-12
    assert np.max(np.abs(tab.coeffs[1:])) < 1e-12
    aniso = random_pair(rng, spins_a=(1.0,), spins_b=(0.5,))
    tab0 = compute_spin_table(aniso, 0.0, lmax=4, use_cache=False)
    assert np.ptp(tab0.values) == 0.0
    assert np.ptp(compute_spin_table(aniso, 50e-6, lmax=4, use_cache=False).values) > 1e-4


def test_fast_recombination_limit(rng):
    """k → ∞: k²/(k² + ω²) → 1 for every term, so Φ_S → (1/M) Σ|P_mn|² = 1; the deficit is
    O((ω/k)²) ≈ (0.5 mT·γ_e / 1e12 s⁻¹)² ≈ 1e-8."""
    pair = random_pair(rng, spins_a=(1.0, 0.5), spins_b=(0.5,), k_s=1e12, k_t=1e12)
    for name, (ps, _) in all_methods(pair, random_fields(rng, 3)).items():
        np.testing.assert_allclose(ps, 1.0, atol=1e-6, err_msg=name)


def test_bounds_and_sum_rule(rng):
    """Equal rates: ¼ ≤ Φ_S ≤ 1.  Upper: k²/(k²+ω²) ≤ 1 and Σ|P_mn|² = Tr P_S = M.  Lower:
    the m = n terms alone give (1/M) Σ_m P_mm² ≥ (1/M)(Σ_m P_mm)²/N = M/(4M) = ¼ by
    Cauchy–Schwarz (N = 4M).  Unequal rates: 0 ≤ Φ_S ≤ 1 and Φ_S + Φ_T = 1 (every pair
    recombines); the Liouville solver computes Φ_S and Φ_T independently, so the sum
    rule is a real check there (common practice)."""
    for i in range(3):
        kw = dict(exchange_mT=rng.normal() * 0.1, dipolar_mT=random_tensor(rng, 0.1))
        k = 10 ** rng.uniform(5, 7)
        eq = random_pair(rng, spins_a=(1.0,), spins_b=(0.5,), k_s=k, k_t=k, **kw)
        f = random_fields(rng, 4, 10 ** rng.uniform(-5, -3))
        got = all_methods(eq, f)
        assert len(got) >= 2
        for ps, pt in got.values():
            assert np.all(ps >= 0.25 - 1e-12) and np.all(ps <= 1 + 1e-12)
        uneq = random_pair(rng, spins_a=(1.0,), spins_b=(0.5,), k_s=10 ** rng.uniform(5, 7),
                           k_t=10 ** rng.uniform(5, 7), **kw)
        ps, pt = yields(uneq, f, method="liouville")
        assert np.all(ps >= 0) and np.all(ps <= 1) and np.all(pt >= 0)
        np.testing.assert_allclose(ps + pt, 1.0, atol=1e-10)


def test_triplet_and_mixed_start(rng):
    """Triplet-born with equal rates: ρ0 = (1 − P_S)/3M gives Φ_S = (1 − Φ_S^singlet)/3
    (eigenbasis module docstring); a mixed start is linear in the singlet fraction.  The
    Liouville solver builds ρ0 directly, so it checks the shortcut."""
    base = random_pair(rng, spins_a=(1.0,), spins_b=(0.5,), k_s=2e6, k_t=2e6)
    f = random_fields(rng, 3)
    from dataclasses import replace

    s = yields(base, f, method="separable")[0]
    for ini, expected in (("triplet", (1 - s) / 3), (0.3, 0.3 * s + 0.7 * (1 - s) / 3)):
        p = replace(base, initial=ini)
        got = all_methods(p, f)
        assert len(got) >= 3
        for ps, pt in got.values():
            np.testing.assert_allclose(ps, expected, atol=1e-10)
