"""Operators, Hamiltonians, validation and memory estimates of renderer.spin."""

import numpy as np
import pytest
import qutip
import scipy.constants as sc
from scipy.spatial.transform import Rotation

from renderer.errors import MagretinaError
from renderer.spin import (GAMMA_E, RAD_S_PER_MT, Nucleus, Radical, RadicalPair, check_memory,
                           electron_operators, embed, kron_all, larmor_frequency_Hz,
                           pair_hamiltonian, point_dipolar_mT, radical_hamiltonian,
                           singlet_projector, spin_matrices)
from conftest import random_pair, random_tensor


@pytest.mark.parametrize("s", [0.5, 1.0, 1.5, 2.0, 2.5, 3.0])
def test_spin_matrices_match_qutip(s):
    """spin_matrices(s) equals QuTiP's jmat(s) (basis m = s ... −s) and obeys
    [Sx, Sy] = i Sz, S² = s(s+1) (angular-momentum algebra, common practice)."""
    mats = spin_matrices(s)
    for m, axis in zip(mats, "xyz"):
        np.testing.assert_allclose(m, qutip.jmat(s, axis).full(), atol=1e-14)
    sx, sy, sz = mats
    np.testing.assert_allclose(sx @ sy - sy @ sx, 1j * sz, atol=1e-13)
    np.testing.assert_allclose(sx @ sx + sy @ sy + sz @ sz, s * (s + 1) * np.eye(int(2 * s + 1)), atol=1e-13)


def test_bad_spin_values():
    for bad in (0.3, 0, -1, float("nan"), "x"):
        with pytest.raises(MagretinaError, match="spin"):
            spin_matrices(bad)
    with pytest.raises(MagretinaError, match="multiple of 1/2"):
        Nucleus(0.75, np.eye(3))


def test_radical_hamiltonian_matches_qutip_tensor(rng):
    """H of a radical with two nuclei against the same Hamiltonian assembled with QuTiP
    tensor products (electron first, nuclei in list order), γ_e and γ_p from
    scipy.constants (CODATA); the proton carries a nuclear Zeeman term."""
    gamma_h = sc.physical_constants["proton gyromag. ratio"][0]
    n1, n2 = Nucleus(1.0, random_tensor(rng)), Nucleus(0.5, random_tensor(rng), gamma_rad_s_T=gamma_h)
    rad = Radical([n1, n2], g=2.0040)
    b = np.array([20e-6, -35e-6, 41e-6])
    g_e = abs(sc.physical_constants["electron g factor"][0])
    gam = sc.physical_constants["electron gyromag. ratio"][0]
    ax = "xyz"
    s = [qutip.tensor(qutip.jmat(0.5, c), qutip.qeye(3), qutip.qeye(2)) for c in ax]
    i1 = [qutip.tensor(qutip.qeye(2), qutip.jmat(1, c), qutip.qeye(2)) for c in ax]
    i2 = [qutip.tensor(qutip.qeye(2), qutip.qeye(3), qutip.jmat(0.5, c)) for c in ax]
    h = sum(2.0040 / g_e * gam * b[i] * s[i] for i in range(3))
    for nuc, ii in ((n1, i1), (n2, i2)):
        h += sum(gam * 1e-3 * nuc.hyperfine_mT[i, j] * s[i] * ii[j] for i in range(3) for j in range(3))
    h += sum(-gamma_h * b[i] * i2[i] for i in range(3))  # nuclear Zeeman −γ_n B·I, asked for on n2
    np.testing.assert_allclose(radical_hamiltonian(rad, b), h.full(), atol=1e-6 * np.abs(h.full()).max())
    np.testing.assert_allclose(electron_operators(rad)[2], s[2].full(), atol=0)
    batch = radical_hamiltonian(rad, np.stack([b, -b]))
    assert batch.shape == (2, 12, 12)


def test_larmor_frequency_50uT():
    """γ_e B/2π at 50 µT ≈ 1.401 MHz with CODATA 2022 γ_e = 1.76085962784e11 s⁻¹ T⁻¹
    (scipy.constants key 'electron gyromag. ratio'); the level splitting of a bare
    electron in the Hamiltonian is the same frequency."""
    assert GAMMA_E == sc.physical_constants["electron gyromag. ratio"][0]
    f = larmor_frequency_Hz(50e-6)
    assert abs(f / 1e6 - 1.401) < 5e-4
    e = np.linalg.eigvalsh(radical_hamiltonian(Radical(), [0.0, 30e-6, 40e-6]))
    assert abs((e[1] - e[0]) / (2 * np.pi) - f) < 1e-6


def test_pair_hamiltonian_structure(rng):
    """Exchange H = −2J S_A·S_B with S_A·S_B = −¾ on the singlet and +¼ on the triplets gives
    E_S = +3J/2 and E_T = −J/2, a singlet–triplet gap of 2J (common practice)."""
    pair = RadicalPair(Radical(), Radical(), k_s=1e6, k_t=1e6, exchange_mT=0.5)
    e = np.linalg.eigvalsh(pair_hamiltonian(pair, np.zeros(3)))
    j = 0.5 * RAD_S_PER_MT
    np.testing.assert_allclose(sorted(e), sorted([-2 * j * 0.25] * 3 + [2 * j * 0.75]), atol=1e-6)
    ps = singlet_projector(pair)
    np.testing.assert_allclose(ps @ ps, ps, atol=1e-14)
    assert abs(np.trace(ps).real - 1) < 1e-14
    big = random_pair(rng, (1.0,), (0.5,))
    h = pair_hamiltonian(big, [1e-5, 2e-5, 3e-5])
    np.testing.assert_allclose(h, h.conj().T, atol=1e-6)


def test_kron_and_embed():
    sx = spin_matrices(0.5)[0]
    np.testing.assert_allclose(embed(sx, 1, (3, 2, 2)), kron_all([np.eye(3), sx, np.eye(2)]))
    assert kron_all([]).shape == (1, 1)


def test_from_principal_and_isotropic():
    """A = R diag(p) Rᵀ with R from scipy Rotation; isotropic part tr(A)/3.  N5 principal
    values (−0.1002, −0.0868, 1.7569) mT give 0.5233 mT (Hiscock et al. 2016, secondary copy)."""
    r = Rotation.from_euler("ZYZ", [10, 40, -25], degrees=True)
    n = Nucleus.from_principal(1, [-0.1002, -0.0868, 1.7569], r)
    np.testing.assert_allclose(np.linalg.eigvalsh(n.hyperfine_mT), [-0.1002, -0.0868, 1.7569], atol=1e-12)
    assert abs(n.isotropic_mT - 0.5233) < 1e-4
    np.testing.assert_allclose(Nucleus.isotropic(0.5, 0.3).hyperfine_mT, 0.3 * np.eye(3))


def test_point_dipolar_prefactor():
    """Point dipole: secular coupling (3/2)·μ0 g² μB²/(4π ħ γ_e r³) ≈ 2.785 mT at 1 nm for
    g = g_e ('d(r) = −2.785 mT nm³/r³', Efimova & Hore 2008, Biophys. J. 94:1565; from memory).
    Tolerance 0.05 % covers the rounding of the recalled value."""
    d = point_dipolar_mT(1.0, (0, 0, 1))
    assert abs(-1.5 * d[2, 2] / 2 - 2.785) < 0.05e-2 * 2.785
    np.testing.assert_allclose(np.trace(d), 0, atol=1e-12)
    np.testing.assert_allclose(point_dipolar_mT(2.0) * 8, d, rtol=1e-12)


def test_validation_messages(rng):
    with pytest.raises(MagretinaError, match="symmetric"):
        Nucleus(0.5, [[0, 1, 0], [0, 0, 0], [0, 0, 0]], name="H1")
    with pytest.raises(MagretinaError, match="finite"):
        Nucleus(0.5, np.full((3, 3), np.nan))
    with pytest.raises(MagretinaError, match="shape"):
        Nucleus(0.5, np.eye(2))
    with pytest.raises(MagretinaError, match="k_t = -1"):
        RadicalPair(Radical(), Radical(), k_s=1e6, k_t=-1)
    with pytest.raises(MagretinaError, match="k_s"):
        RadicalPair(Radical(), Radical(), k_s=0, k_t=1e6)
    with pytest.raises(MagretinaError, match="initial"):
        RadicalPair(Radical(), Radical(), k_s=1e6, k_t=1e6, initial="doublet")
    with pytest.raises(MagretinaError, match="dipolar_mT must be symmetric"):
        RadicalPair(Radical(), Radical(), 1e6, 1e6, dipolar_mT=[[0, 1, 0], [0, 0, 0], [0, 0, 0]])
    with pytest.raises(MagretinaError, match="g"):
        Radical(g=-2)
    from renderer.spin import yields

    never = RadicalPair(Radical([Nucleus.isotropic(0.5, 0.5)]), Radical(), k_s=1e6, k_t=0)
    with pytest.raises(MagretinaError, match="never recombine"):
        yields(never, [0, 0, 5e-5], method="liouville")


def test_memory_estimate_before_allocation():
    """A pair too large for dense solvers is refused before allocation, naming the solver
    and the memory; the separable solver stays possible."""
    nuc = [Nucleus.isotropic(1, 0.1)] * 6 + [Nucleus.isotropic(0.5, 0.1)] * 4
    pair = RadicalPair(Radical(nuc), Radical(nuc), k_s=1e6, k_t=1e6, exchange_mT=0.1)
    with pytest.raises(MagretinaError, match=r"solver 'eigenbasis' would need about .* GiB"):
        check_memory(pair, "eigenbasis")
    from renderer.spin import singlet_yield

    with pytest.raises(MagretinaError, match="too large"):
        singlet_yield(pair, [0, 0, 5e-5])
    uncoupled = RadicalPair(Radical(nuc[:5]), Radical(nuc[:3]), k_s=1e6, k_t=1e6)
    assert check_memory(uncoupled, "separable") < 2**30
