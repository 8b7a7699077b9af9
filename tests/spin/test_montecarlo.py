"""Spin-coherent-state Monte Carlo converges to the exact yields.

References: Lewis, Fay & Manolopoulos 2016 (J. Chem. Phys.; from memory) for the method;
the exact solvers of :mod:`renderer.spin` (separable, Liouville: independent code) as
the truth; the resolution of identity of spin coherent states,
(2I+1)/(4π) ∫ |Ω⟩⟨Ω| dΩ = 1 (common practice), checked with scipy's Lebedev rule.
A Monte Carlo mean must lie within 4 standard errors of the exact value (a deviation
that large has probability < 1e-4 for a correct unbiased estimator).
"""

import numpy as np
import pytest
from scipy.integrate import lebedev_rule

from renderer.errors import MagretinaError
from renderer.spin import pair_hamiltonian, singlet_yield, spin_matrices
from renderer.spin.montecarlo import (coherent_state, singlet_yield_montecarlo,
                                      sparse_pair_hamiltonian)

from conftest import random_fields, random_pair


@pytest.mark.parametrize("spin", [0.5, 1.0, 1.5])
def test_coherent_states_resolve_identity(spin):
    """(2I+1)/(4π) Σ w |Ω⟩⟨Ω| = 1 on a Lebedev grid (exact for these low degrees) and ⟨S⟩ = I Ω."""
    x, w = lebedev_rule(17)
    acc = 0
    s = spin_matrices(spin)
    for (px, py, pz), wi in zip(x.T, w):
        th, ph = np.arccos(np.clip(pz, -1, 1)), np.arctan2(py, px)
        v = coherent_state(spin, th, ph)
        acc = acc + wi * np.outer(v, v.conj())
        mean = [np.real(v.conj() @ m @ v) for m in s]
        assert np.allclose(mean, spin * np.array([px, py, pz]), atol=1e-12)
    assert np.allclose((2 * spin + 1) / (4 * np.pi) * acc, np.eye(int(2 * spin + 1)), atol=1e-12)


def test_sparse_hamiltonian_equals_dense(rng):
    pair = random_pair(rng, spins_a=(1.0, 0.5), spins_b=(0.5,), exchange_mT=0.2,
                       dipolar_mT=np.diag([-0.1, -0.1, 0.2]))
    b = random_fields(rng, 1)[0]
    h = pair_hamiltonian(pair, b)
    assert np.max(np.abs(sparse_pair_hamiltonian(pair, b).toarray() - h)) < 1e-9 * np.max(np.abs(h))


def test_converges_separable_equal_rates(rng):
    pair = random_pair(rng, spins_a=(1.0, 0.5), spins_b=(0.5,), k_s=1e7, k_t=1e7)
    b = random_fields(rng, 1)[0]
    mean, se = singlet_yield_montecarlo(pair, b, n_samples=128, seed=1)
    exact = singlet_yield(pair, b)
    assert 0 < se < 0.01
    assert abs(mean - exact) < 4 * se


def test_converges_coupled_unequal_rates(rng):
    """Exchange coupling and k_S ≠ k_T: only the Liouville solver is exact here."""
    pair = random_pair(rng, spins_a=(1.0,), spins_b=(0.5,), k_s=1e7, k_t=3e6, exchange_mT=0.1)
    b = random_fields(rng, 1)[0]
    mean, se = singlet_yield_montecarlo(pair, b, n_samples=128, seed=2)
    exact = singlet_yield(pair, b, method="liouville")
    assert 0 < se < 0.01
    assert abs(mean - exact) < 4 * se


def test_error_shrinks_with_samples(rng):
    """The standard error falls roughly as 1/√n (ratio for 4× the samples within 0.3..0.7)."""
    pair = random_pair(rng, spins_a=(0.5,), spins_b=(0.5,), k_s=2e7, k_t=2e7)
    b = random_fields(rng, 1)[0]
    _, se1 = singlet_yield_montecarlo(pair, b, n_samples=64, seed=3)
    _, se4 = singlet_yield_montecarlo(pair, b, n_samples=256, seed=3)
    assert 0.3 < se4 / se1 < 0.7


def test_bad_sample_count(rng):
    with pytest.raises(MagretinaError, match="n_samples"):
        singlet_yield_montecarlo(random_pair(rng), np.zeros(3), n_samples=1)
