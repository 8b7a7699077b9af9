"""Spin Hamiltonians of radicals and radical pairs, in rad/s, in the molecular frame.

Conventions (used by every solver and by code built on this module):

* Units: H is in angular frequency (rad s⁻¹); couplings given in mT are converted with
  the free-electron gyromagnetic ratio γ_e (CODATA, ``scipy.constants`` key
  ``"electron gyromag. ratio"``), ω = γ_e · A[mT] · 10⁻³, the trade's usual convention.
* Electron Zeeman: H_Z = +(γ_e/g_e) B·g·S, i.e. a free electron (g = g_e) precesses at
  ω = γ_e|B| (1.401 MHz at 50 µT).  The electron's moment is antiparallel to its spin,
  hence the + sign.  Nuclear Zeeman (only if a nucleus carries gamma_rad_s_T ≠ 0):
  H = −γ_n B·I.
* Hyperfine: H = γ_e S·A·I per nucleus.  Exchange: H = −2 γ_e J S_A·S_B.  Dipolar:
  H = γ_e S_A·D·S_B.
* Kronecker order: a radical's space is electron ⊗ nucleus 1 ⊗ nucleus 2 ...; the
  pair's space is (space of A) ⊗ (space of B).

H(B) is affine in B, so each system is stored as a field-independent part ``h0`` plus
three Zeeman operators, ``H(B) = h0 + Σ_i B_i zeeman[i]``; building a Hamiltonian for
many field vectors is then one tensor contraction.  This module does not solve
dynamics (:mod:`.solvers` does).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import scipy.constants as sc

from .operators import embed, spin_matrices
from .system import G_FREE, Radical, RadicalPair

#: Free-electron gyromagnetic ratio γ_e (rad s⁻¹ T⁻¹), CODATA via scipy.constants.
GAMMA_E = sc.physical_constants["electron gyromag. ratio"][0]
#: Angular frequency (rad s⁻¹) of a coupling of 1 mT.
RAD_S_PER_MT = GAMMA_E * 1e-3


def _ro(a):
    a.setflags(write=False)
    return a


@dataclass(frozen=True, eq=False)
class SpinOperators:
    """Operators of one spin system (a radical or a pair), all read-only complex128.

    Attributes
    ----------
    h0 : ndarray (D, D)
        Field-independent Hamiltonian (rad/s).
    zeeman : ndarray (3, D, D)
        Zeeman operators (rad s⁻¹ T⁻¹): H(B) = h0 + Σ_i B_i zeeman[i], B in tesla.
    s : ndarray (3, D, D) or None
        Electron spin operators (S_x, S_y, S_z) of a radical, embedded (radicals only).
    s_a, s_b : ndarray (3, D, D) or None
        Electron spin operators of radicals A and B in the pair space (pairs only).
    """

    h0: np.ndarray
    zeeman: np.ndarray
    s: np.ndarray = None
    s_a: np.ndarray = None
    s_b: np.ndarray = None

    @property
    def dim(self) -> int:
        return self.h0.shape[0]

    def hamiltonian(self, field_T):
        """H for field vectors ``field_T`` of shape (..., 3) (T) → (..., D, D) rad/s."""
        b = np.asarray(field_T, dtype=np.float64)
        return self.h0 + np.tensordot(b, self.zeeman, axes=([-1], [0]))


@lru_cache(maxsize=64)
def radical_operators(radical: Radical) -> SpinOperators:
    """Operators of one radical (cached per Radical object; Radicals are immutable).

    Returns
    -------
    SpinOperators
        ``h0`` = hyperfine terms, ``zeeman`` = electron (and nuclear) Zeeman
        operators, ``s`` = electron spin operators; dimension 2·Z.
    """
    dims = (2,) + radical.nuclear_dims
    d = int(np.prod(dims))
    s = np.stack([embed(m, 0, dims) for m in spin_matrices(0.5)])
    h0 = np.zeros((d, d), dtype=np.complex128)
    zee = np.einsum("ij,jkl->ikl", radical.g_tensor * (GAMMA_E / G_FREE), s).astype(np.complex128)
    for k, nuc in enumerate(radical.nuclei):
        ii = np.stack([embed(m, k + 1, dims) for m in spin_matrices(nuc.spin)])
        a = nuc.hyperfine_mT * RAD_S_PER_MT
        # S·A·I = Σ_ij A_ij S_i I_j; S_i and I_j act on different factors and commute
        for i in range(3):
            for j in range(3):
                if a[i, j] != 0.0:
                    h0 += a[i, j] * (s[i] @ ii[j])
        if nuc.gamma_rad_s_T != 0.0:
            zee = zee - nuc.gamma_rad_s_T * ii
    return SpinOperators(h0=_ro(h0), zeeman=_ro(zee), s=_ro(s))


def electron_operators(radical: Radical) -> np.ndarray:
    """Electron spin operators (S_x, S_y, S_z) in the radical's space, shape (3, 2Z, 2Z)."""
    return radical_operators(radical).s


def radical_hamiltonian(radical: Radical, field_T) -> np.ndarray:
    """Spin Hamiltonian of one radical (rad/s).

    Parameters
    ----------
    radical : Radical
    field_T : array_like, shape (3,) or (N, 3)
        Magnetic field in the molecular frame, tesla.

    Returns
    -------
    ndarray, shape (2Z, 2Z) or (N, 2Z, 2Z), complex128 Hermitian
        Electron Zeeman + hyperfine (+ nuclear Zeeman if asked for); electron first in
        the Kronecker order, then the nuclei in list order.
    """
    return radical_operators(radical).hamiltonian(field_T)


@lru_cache(maxsize=16)
def pair_operators(pair: RadicalPair) -> SpinOperators:
    """Operators of the whole pair in (space A) ⊗ (space B), cached per pair object.

    Returns
    -------
    SpinOperators
        ``h0`` = hyperfine of both radicals + exchange + dipolar, ``zeeman`` = all
        Zeeman operators, ``s_a``/``s_b`` = the two electron spins in the pair space.
    """
    oa, ob = radical_operators(pair.a), radical_operators(pair.b)
    ia = np.eye(oa.dim, dtype=np.complex128)
    ib = np.eye(ob.dim, dtype=np.complex128)
    s_a = np.stack([np.kron(m, ib) for m in oa.s])
    s_b = np.stack([np.kron(ia, m) for m in ob.s])
    h0 = np.kron(oa.h0, ib) + np.kron(ia, ob.h0)
    if pair.exchange_mT != 0.0:
        h0 += -2.0 * pair.exchange_mT * RAD_S_PER_MT * np.einsum("ikl,ilm->km", s_a, s_b)
    if pair.dipolar_mT is not None:
        dd = pair.dipolar_mT * RAD_S_PER_MT
        for i in range(3):
            for j in range(3):
                if dd[i, j] != 0.0:
                    h0 += dd[i, j] * (s_a[i] @ s_b[j])
    zee = np.stack([np.kron(oa.zeeman[i], ib) + np.kron(ia, ob.zeeman[i]) for i in range(3)])
    return SpinOperators(h0=_ro(h0), zeeman=_ro(zee), s_a=_ro(s_a), s_b=_ro(s_b))


def pair_hamiltonian(pair: RadicalPair, field_T) -> np.ndarray:
    """Spin Hamiltonian of the pair (rad/s), shape (N, N) or (K, N, N) for field (3,) / (K, 3).

    N = dim A · dim B; includes exchange −2J S_A·S_B and dipolar S_A·D·S_B.
    """
    return pair_operators(pair).hamiltonian(field_T)


def singlet_projector(pair: RadicalPair) -> np.ndarray:
    """P_S = 1/4 − S_A·S_B in the pair space, shape (N, N)."""
    op = pair_operators(pair)
    return 0.25 * np.eye(op.dim, dtype=np.complex128) - np.einsum("ikl,ilm->km", op.s_a, op.s_b)


def singlet_isometry(pair: RadicalPair) -> np.ndarray:
    """Orthonormal basis of the singlet subspace, shape (N, M), so that P_S = Q Q†.

    Column (i_A, i_B) is (|α⟩_A|β⟩_B − |β⟩_A|α⟩_B)/√2 ⊗ |i_A⟩ ⊗ |i_B⟩ with the nuclear
    states in place, i.e. the index of (e_A, i_A, e_B, i_B) is
    ((e_A·Z_A + i_A)·2 + e_B)·Z_B + i_B.
    """
    za, zb = pair.a.nuclear_multiplicity, pair.b.nuclear_multiplicity
    n = pair.dim
    q = np.zeros((n, za * zb), dtype=np.complex128)
    ia, ib = np.meshgrid(np.arange(za), np.arange(zb), indexing="ij")
    col = (ia * zb + ib).ravel()
    ia, ib = ia.ravel(), ib.ravel()

    def idx(ea, eb):
        return ((ea * za + ia) * 2 + eb) * zb + ib

    q[idx(0, 1), col] = 1 / np.sqrt(2)
    q[idx(1, 0), col] = -1 / np.sqrt(2)
    return q


def larmor_frequency_Hz(field_T, g=G_FREE) -> float:
    """Electron Larmor frequency (g/g_e) γ_e |B| / 2π in Hz for a field magnitude in tesla."""
    return float(g / G_FREE * GAMMA_E * abs(float(field_T)) / (2 * np.pi))
