"""Schulten–Wolynes semiclassical yields: where the approximation holds and where it fails.

References: Schulten & Wolynes 1978 (J. Chem. Phys. 68:3292; from memory) for the model
(static Gaussian hyperfine field, variance per component Σ a² I(I+1)/3); the exact
separable solver of :mod:`renderer.spin.separable` (independent code) as the truth;
the Δg closed form Φ_S = ½ + ½·k²/(k² + Δω²) for nucleus-free radicals (Timmel et al.
1998, Mol. Phys. 95:71), where the semiclassical model has nothing to approximate.
The documented failure — no low-field effect for slow recombination — is stated in
Manolopoulos & Hore 2013 (J. Chem. Phys. 139:124106; from memory).
"""

import numpy as np
import pytest

from renderer.spin import Nucleus, Radical, RadicalPair, singlet_yield
from renderer.spin.hamiltonian import GAMMA_E, RAD_S_PER_MT
from renderer.spin.semiclassical import (LABEL, hyperfine_covariance,
                                         singlet_yield_semiclassical)
from renderer.spin.system import G_FREE

A_MT = (0.6, 0.45, 0.3, 0.2)
B_MT = (0.5, 0.35)


def _pair(k):
    a = Radical([Nucleus.isotropic(0.5, x) for x in A_MT])
    b = Radical([Nucleus.isotropic(0.5, x) for x in B_MT])
    return RadicalPair(a, b, k_s=k, k_t=k)


def test_label_says_approximation():
    assert "approximation" in LABEL and "not exact" in LABEL


def test_covariance_matches_schulten_wolynes_tau():
    """Isotropic couplings: each component of h has variance (1/3)Σ a² I(I+1) = 2/τ² with
    Schulten & Wolynes' τ⁻² = (1/6)Σ a² I(I+1)."""
    rad = Radical([Nucleus.isotropic(0.5, x) for x in A_MT] + [Nucleus.isotropic(1.0, 0.2)])
    tau_inv2 = sum((x * RAD_S_PER_MT) ** 2 * 0.75 for x in A_MT) / 6 + (0.2 * RAD_S_PER_MT) ** 2 * 2 / 6
    assert np.allclose(hyperfine_covariance(rad), 2 * tau_inv2 * np.eye(3), rtol=1e-12)


def test_exact_without_nuclei():
    """No nuclei, different g-values: the model is exact, ½ + ½·k²/(k² + Δω²)."""
    k, b = 2e7, 0.05
    pair = RadicalPair(Radical(g=2.0023), Radical(g=2.0040), k_s=k, k_t=k)
    dw = GAMMA_E / G_FREE * (2.0040 - 2.0023) * b
    phi = singlet_yield_semiclassical(pair, np.array([0.0, 0.0, b]), n_repeats=1)
    assert phi == pytest.approx(0.5 + 0.5 * k * k / (k * k + dw * dw), abs=1e-6)


def test_misses_low_field_effect_for_slow_recombination():
    """k = 1e6 s⁻¹ (slow against a ≈ 1e8 rad/s): the exact yield dips well below its zero-field
    value at about 0.2 mT (the low-field effect, here by ≈ 0.09), the semiclassical yield does
    not dip at all (non-decreasing within 5 standard errors) and is also wrong at zero field."""
    pair = _pair(1e6)
    fields = np.array([[0, 0, b * 1e-3] for b in (0.0, 0.05, 0.1, 0.2, 0.3)])
    exact = singlet_yield(pair, fields)
    sw, se = singlet_yield_semiclassical(pair, fields, return_error=True)
    assert exact[0] - exact.min() > 0.05
    assert np.all(np.diff(sw) > -5 * (se[1:] + se[:-1]))
    assert abs(sw[0] - exact[0]) > 0.05


def test_adequate_for_fast_recombination():
    """k = 1e8 s⁻¹: the semiclassical yield follows the exact one within 0.01 from 0 to 10 mT
    (measured maximal deviation 0.0055 for this 4+2 nucleus pair)."""
    pair = _pair(1e8)
    fields = np.array([[0, 0, b * 1e-3] for b in (0.0, 0.5, 3.0, 10.0)])
    assert np.max(np.abs(singlet_yield_semiclassical(pair, fields) - singlet_yield(pair, fields))) < 0.01
