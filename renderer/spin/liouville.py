"""Exact yields for any rates and couplings from the Liouville-space resolvent.

The Haberkorn master equation dρ/dt = −i(H_eff ρ − ρ H_eff†), H_eff = H −
(i/2)(k_S P_S + k_T P_T), integrated over t ∈ [0, ∞) gives for X = ∫ρ dt the
Sylvester equation

    (iH_eff) X + X (iH_eff)† = ρ0,      Φ_S = k_S Tr[P_S X],  Φ_T = k_T Tr[P_T X].

It is solved by Bartels–Stewart without ever forming the N²×N² Liouvillian: one
complex Schur form iH_eff = Z T Z† (LAPACK zgees via scipy), then the triangular
Sylvester equation T Y + Y T† = Z† ρ0 Z (LAPACK ztrsyl), X = Z Y Z†; O(N³) time and
O(N²) memory.  Φ_S and Φ_T are computed independently, so Φ_S + Φ_T = 1 is a check,
not an identity.  The equation is singular if some populated state never decays
(k_T = 0 and a triplet level that does not mix with the singlet); that is reported.
"""

from __future__ import annotations

import numpy as np
from scipy.linalg import schur
from scipy.linalg.lapack import ztrsyl

from ..errors import MagretinaError
from .hamiltonian import pair_operators, singlet_projector
from .system import RadicalPair

NAME = "liouville"


def applicable(pair: RadicalPair):
    """(ok, reason): this solver handles every pair."""
    return True, ""


def initial_density(pair: RadicalPair, p_s=None):
    """ρ0 = p P_S/M + (1 − p) P_T/(3M), shape (N, N); p the pair's singlet fraction."""
    if p_s is None:
        p_s = singlet_projector(pair)
    m = pair.nuclear_multiplicity
    p = pair.singlet_fraction
    eye = np.eye(p_s.shape[0], dtype=np.complex128)
    return p * p_s / m + (1.0 - p) * (eye - p_s) / (3 * m)


def yields(pair: RadicalPair, fields_T, progress=None):
    """Singlet and triplet yields for field vectors (K, 3) in T → two arrays (K,)."""
    ops = pair_operators(pair)
    p_s = singlet_projector(pair)
    rho0 = initial_density(pair, p_s)
    n = ops.dim
    decay = -0.5j * (pair.k_s * p_s + pair.k_t * (np.eye(n) - p_s))
    fields_T = np.asarray(fields_T, dtype=np.float64).reshape(-1, 3)
    phi_s = np.empty(len(fields_T))
    phi_t = np.empty(len(fields_T))
    for i, f in enumerate(fields_T):
        a = 1j * (ops.hamiltonian(f) + decay)
        t, z = schur(a, output="complex")
        zh = z.conj().T
        c = zh @ rho0 @ z
        y, scale, info = ztrsyl(t, t, c, trana="N", tranb="C", isgn=1)
        if info != 0 or not np.all(np.isfinite(y)):
            raise MagretinaError(
                f"radical pair: the Liouville resolvent is singular at field {f.tolist()} T: "
                f"some spin states never recombine (k_s = {pair.k_s:g}, k_t = {pair.k_t:g} "
                f"s^-1). Use k_t > 0 (a small value such as 1e-6 * k_s changes the yield "
                f"negligibly).")
        y = y / scale
        ps_schur = zh @ p_s @ z
        tr_ps_x = np.einsum("ij,ji->", ps_schur, y).real
        tr_x = np.trace(y).real
        phi_s[i] = pair.k_s * tr_ps_x
        phi_t[i] = pair.k_t * (tr_x - tr_ps_x)
        if progress is not None:
            progress(1)
    return phi_s, phi_t
