"""Large nuclear sets: equivalent-nucleus blocks and the binned spectral convolution.

External references: the exact separable double sum of :mod:`renderer.spin.separable`
(Lee et al. 2014, J. R. Soc. Interface, suppl. §1, written independently of the code
under test), the closed form for one isotropic spin-1/2 nucleus at zero field
(Timmel et al. 1998, Mol. Phys. 95:71: Φ_S = 5/8 + 3/8·k²/(k² + a²)), and the textbook
decomposition of equivalent spins into total spins (angular-momentum addition, common
practice: three spin-1/2 → 3/2 ⊕ 2×1/2; two spin-1 → 2 ⊕ 1 ⊕ 0).
"""

import numpy as np
import pytest

from renderer.errors import MagretinaError
from renderer.spin import Nucleus, Radical, RadicalPair, load_pair, singlet_yield
from renderer.spin.hamiltonian import GAMMA_E
from renderer.spin.large import (binning_error_bound, radical_blocks, radical_spectrum,
                                 separable_binned, separable_direct, singlet_yield_spectral,
                                 total_spin_multiplicities)

from conftest import random_fields, random_pair, random_tensor


def test_total_spin_decomposition_textbook():
    """Angular-momentum addition (common practice): 1/2⊗1/2⊗1/2 = 3/2 ⊕ 1/2 ⊕ 1/2,
    1⊗1 = 2 ⊕ 1 ⊕ 0, and dimensions add up for a larger case."""
    assert total_spin_multiplicities(0.5, 3) == {1.5: 1, 0.5: 2}
    assert total_spin_multiplicities(1.0, 2) == {2.0: 1, 1.0: 1, 0.0: 1}
    d = total_spin_multiplicities(0.5, 6)
    assert sum(c * (2 * j + 1) for j, c in d.items()) == 2**6
    assert d == {3.0: 1, 2.0: 5, 1.0: 9, 0.0: 5}  # Catalan-triangle numbers, common practice


def test_methyl_blocks_equal_full_calculation(rng):
    """A methyl group (three protons, one tensor) as total-spin blocks gives the same Φ_S as
    the full product space, computed by the independent separable solver."""
    methyl = random_tensor(rng, 0.4)
    a = Radical([Nucleus(1.0, random_tensor(rng, 0.6), "N")] + [Nucleus(0.5, methyl, f"H{i}") for i in range(3)])
    b = Radical([Nucleus(0.5, random_tensor(rng, 0.5), "Hb")])
    pair = RadicalPair(a, b, k_s=2e6, k_t=2e6)
    blocks = radical_blocks(a)
    assert len(blocks) == 2 and abs(sum(w for w, _ in blocks) - 1) < 1e-15
    fields = random_fields(rng, 3)
    ref = singlet_yield(pair, fields, method="separable")
    got = singlet_yield_spectral(pair, fields, method="direct", use_blocks=True)
    assert np.max(np.abs(got - ref)) < 1e-12


def test_closed_form_one_isotropic_nucleus_zero_field():
    """Timmel et al. 1998: one spin-1/2 nucleus, coupling a, zero field:
    Φ_S = 5/8 + 3/8·k²/(k² + a²), a in rad/s."""
    a_mT, k = 0.3, 5e6
    pair = RadicalPair(Radical([Nucleus.isotropic(0.5, a_mT)]), Radical(), k_s=k, k_t=k)
    a = GAMMA_E * a_mT * 1e-3
    exact = 5 / 8 + 3 / 8 * k * k / (k * k + a * a)
    phi, bound = singlet_yield_spectral(pair, np.zeros(3), tol=1e-7, return_bound=True)
    assert abs(phi - exact) <= bound
    assert abs(singlet_yield_spectral(pair, np.zeros(3), method="direct") - exact) < 1e-13


@pytest.mark.parametrize("tol", [1e-4, 1e-6, 1e-9])
def test_binned_error_within_bound(rng, tol):
    """The binned sum agrees with the independent direct separable solver within its a-priori
    bound (derivation in binning_error_bound), for random anisotropic pairs."""
    pair = random_pair(rng, spins_a=(1.0, 0.5, 0.5), spins_b=(1.0, 0.5), k_s=1e6, k_t=1e6)
    fields = random_fields(rng, 3)
    ref = singlet_yield(pair, fields, method="separable")
    phi, bound = singlet_yield_spectral(pair, fields, tol=tol, return_bound=True)
    assert np.all(bound <= tol * (1 + 1e-12))
    assert np.all(np.abs(phi - ref) <= bound)


def test_bound_is_fourth_order():
    """The bound scales as (h/k)⁴ (cubic Lagrange interpolation remainder)."""
    assert binning_error_bound(2.0, 100.0) / binning_error_bound(1.0, 100.0) == pytest.approx(16.0)


def test_mixed_initial_state(rng):
    """Triplet-born and mixed starts agree with the independent separable solver."""
    base = random_pair(rng, spins_a=(1.0,), spins_b=(0.5,), k_s=3e6, k_t=3e6)
    for init in ("triplet", 0.3):
        pair = RadicalPair(base.a, base.b, k_s=3e6, k_t=3e6, initial=init)
        f = random_fields(rng, 2)
        assert np.max(np.abs(singlet_yield_spectral(pair, f) - singlet_yield(pair, f))) < 1e-6


def test_scaled_down_flavin_tryptophan_preset():
    """A scaled-down cut of the 7+7 preset (FAD N5, N10, methyl; Trp N1, H1, Hbeta1), 50 µT:
    binned Φ_S within its 1e-6 bound of the direct separable solver (independent code)."""
    full = load_pair("fad-trp-7plus7")
    a = Radical([n for n in full.a.nuclei if n.name in ("N5", "N10", "H8a1", "H8a2", "H8a3")])
    b = Radical([n for n in full.b.nuclei if n.name in ("N1", "H1", "Hbeta1")])
    pair = RadicalPair(a, b, k_s=1e6, k_t=1e6)
    f = 50e-6 * np.array([[0.0, 0.0, 1.0], [0.6, 0.0, 0.8], [0.36, 0.48, 0.8]])
    ref = singlet_yield(pair, f, method="separable")
    phi, bound = singlet_yield_spectral(pair, f, tol=1e-6, return_bound=True)
    assert np.all(np.abs(phi - ref) <= bound) and np.all(bound <= 1e-6)


def test_lines_complete_and_direct_kernel(rng):
    """Each quantum spectrum carries total weight Σ_p Tr(S_p²)/Z = 3/2 (trace identity), and the
    line kernel reproduces the separable solver exactly."""
    pair = random_pair(rng, spins_a=(0.5, 0.5), spins_b=(1.0,))
    f = random_fields(rng, 1)[0]
    sa, sb = radical_spectrum(pair.a, f), radical_spectrum(pair.b, f)
    assert sa.total_weight() == pytest.approx(1.5, abs=1e-12)
    assert separable_direct(sa, sb, 1e6) == pytest.approx(singlet_yield(pair, f), abs=1e-12)
    phi, bound, h = separable_binned(sa, sb, 1e6, tol=1e-6)
    assert h > 0 and abs(phi - singlet_yield(pair, f)) <= bound


def test_refuses_outside_domain(rng):
    pair = random_pair(rng, k_s=1e6, k_t=2e6)
    with pytest.raises(MagretinaError, match="equal rates"):
        singlet_yield_spectral(pair, np.zeros(3))
    pair = random_pair(rng, exchange_mT=0.1)
    with pytest.raises(MagretinaError, match="exchange"):
        singlet_yield_spectral(pair, np.zeros(3))
    with pytest.raises(MagretinaError, match="tol"):
        singlet_yield_spectral(random_pair(rng), np.zeros(3), tol=0)
