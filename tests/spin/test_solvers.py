"""Solver agreement, symmetries and equivalent-nuclei blocks.

Agreement to 1e-10 where the solvers' domains overlap is required by the method
(all three are exact; the differences are round-off of O(N) LAPACK operations).
"""

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from renderer.errors import MagretinaError
from renderer.spin import (Nucleus, Radical, RadicalPair, choose_method, point_dipolar_mT,
                           singlet_yield, yields)
from conftest import all_methods, random_fields, random_pair, random_tensor


def test_equal_rates_uncoupled_all_agree(rng):
    """Every exact solver of the registry (separable, eigenbasis, liouville) agrees to 1e-10
    for random anisotropic uncoupled pairs."""
    for spins_a, spins_b in [((1.0,), (0.5,)), ((0.5, 1.0), (1.5,)), ((0.5,), ())]:
        pair = random_pair(rng, spins_a, spins_b, k_s=3e6, k_t=3e6)
        f = random_fields(rng, 4, 1e-4)
        r = [ps for ps, pt in all_methods(pair, f).values()]
        assert len(r) >= 3
        for other in r[1:]:
            np.testing.assert_allclose(r[0], other, atol=1e-10, rtol=0)


def test_equal_rates_coupled_agree(rng):
    """The exact solvers that apply (eigenbasis, liouville) agree to 1e-10 with exchange,
    dipolar coupling and a g-tensor."""
    pair = random_pair(rng, (1.0,), (0.5,), k_s=1e6, k_t=1e6, exchange_mT=0.05,
                       dipolar_mT=point_dipolar_mT(2.0, (0.2, 0.5, 1.0)))
    f = random_fields(rng, 4)
    r = [ps for ps, pt in all_methods(pair, f).values()]
    assert len(r) >= 2
    for other in r[1:]:
        np.testing.assert_allclose(r[0], other, atol=1e-10, rtol=0)


def test_auto_choice_and_domain_errors(rng):
    pair = random_pair(rng, (0.5,), (0.5,))
    assert choose_method(pair) == "separable"
    coupled = random_pair(rng, (0.5,), (0.5,), exchange_mT=0.1)
    assert choose_method(coupled) == "eigenbasis"
    unequal = random_pair(rng, (0.5,), (0.5,), k_s=1e6, k_t=2e6)
    assert choose_method(unequal) == "liouville"
    with pytest.raises(MagretinaError, match="needs equal rates"):
        singlet_yield(unequal, [0, 0, 5e-5], method="separable")
    with pytest.raises(MagretinaError, match="uncoupled"):
        singlet_yield(coupled, [0, 0, 5e-5], method="separable")
    with pytest.raises(MagretinaError, match="unknown"):
        singlet_yield(pair, [0, 0, 5e-5], method="magic")
    with pytest.raises(MagretinaError, match="shape"):
        singlet_yield(pair, [0, 5e-5])
    assert isinstance(singlet_yield(pair, [0, 0, 5e-5]), float)
    assert singlet_yield(pair, np.zeros((3, 3))).shape == (3,)


@pytest.mark.parametrize("kind", ["equal", "exchange+dipolar", "unequal"])
def test_inversion_symmetry(rng, kind):
    """Φ_S(B) = Φ_S(−B): time reversal maps H(B) to H(−B) and leaves P_S and the Haberkorn
    terms unchanged (common practice).  In polar angles this is Φ(θ, φ) = Φ(π − θ, φ + π);
    Φ(π − θ, φ) (a mirror through the xy plane) differs in general."""
    kw = {"equal": {}, "exchange+dipolar": {"exchange_mT": 0.1, "dipolar_mT": random_tensor(rng, 0.2)},
          "unequal": {"k_t": 5e6}}[kind]
    pair = random_pair(rng, (1.0,), (0.5,), **({"k_s": 1e6, "k_t": 1e6} | kw))
    th, ph = rng.uniform(0, np.pi, 6), rng.uniform(-np.pi, np.pi, 6)

    def field(t, p):
        return 50e-6 * np.stack([np.sin(t) * np.cos(p), np.sin(t) * np.sin(p), np.cos(t)], -1)

    f = singlet_yield(pair, field(th, ph))
    np.testing.assert_allclose(singlet_yield(pair, field(np.pi - th, ph + np.pi)), f, atol=1e-13, rtol=0)
    mirror = singlet_yield(pair, field(np.pi - th, ph))
    assert np.max(np.abs(mirror - f)) > 1e-5


def test_rotation_invariance(rng):
    """Rotating every tensor (hyperfine, dipolar, g) and the field together by the same R
    leaves Φ_S unchanged: H' = U H U† for the spin rotation U (common practice).
    Rotations from scipy.spatial.transform.Rotation."""
    pair = random_pair(rng, (1.0,), (0.5,), k_s=1e6, k_t=3e6, exchange_mT=0.02,
                       dipolar_mT=random_tensor(rng, 0.1))
    from dataclasses import replace

    pair = replace(pair, a=replace(pair.a, g=np.diag([2.0031, 2.0024, 2.0022])))
    f = random_fields(rng, 3)
    r = Rotation.random(random_state=7)
    rotated = pair.rotated(r.as_matrix())
    np.testing.assert_allclose(yields(rotated, r.apply(f))[0], yields(pair, f)[0], atol=1e-12)


def test_methyl_total_spin_blocks(rng):
    """Three equivalent protons (identical tensor A, e.g. a freely rotating methyl group)
    enter H only through the total spin: Σ_j S·A·I_j = S·A·I_tot.  The 8-dim nuclear space
    splits (Clebsch–Gordan, common practice) into one J = 3/2 and two J = 1/2 copies, H is
    block diagonal, and ρ0 = P_S/M splits alike, so Φ_S = Σ_J c_J (2J+1) Z_rest/M · Φ_S(J)
    = (4/8) Φ(3/2) + 2·(2/8) Φ(1/2), Φ(J) the yield with one spin-J nucleus in place of the
    group.  The block result must equal the full calculation."""
    a_methyl = random_tensor(rng, 0.4)
    other = Nucleus(1.0, random_tensor(rng, 0.5), name="N")
    b = Radical([Nucleus(0.5, random_tensor(rng, 0.3))])

    def pair_with(nuclei):
        return RadicalPair(Radical([other, *nuclei]), b, k_s=2e6, k_t=2e6)

    full = pair_with([Nucleus(0.5, a_methyl, name=f"H{i}") for i in range(3)])
    blocks = {1.5: 1, 0.5: 2}
    f = random_fields(rng, 4)
    ref = singlet_yield(full, f)
    total = sum(c * (2 * j + 1) / 8 * singlet_yield(pair_with([Nucleus(j, a_methyl)]), f)
                for j, c in blocks.items())
    assert sum(c * (2 * j + 1) for j, c in blocks.items()) == 8
    np.testing.assert_allclose(total, ref, atol=1e-12)


def test_duplicate_fields_are_solved_once(rng):
    """Identical field vectors (zero field for all directions) return identical results."""
    pair = random_pair(rng, (1.0,), (0.5,))
    f = np.vstack([random_fields(rng, 2), np.zeros((3, 3))])
    out = singlet_yield(pair, f)
    assert out[2] == out[3] == out[4]
    np.testing.assert_allclose(out[:2], singlet_yield(pair, f[:2]), atol=0)
