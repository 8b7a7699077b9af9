"""Equal-rate singlet yields from the eigenbasis of the full pair Hamiltonian.

For k_S = k_T = k the trace of ρ decays at the same rate everywhere and

    Φ_S = (1/M) Σ_mn |⟨m|P_S|n⟩|² k² / (k² + ω_mn²)                    (singlet-born)

(Timmel, Till, Brocklehurst, McLauchlan & Hore 1998, Mol. Phys. 95:71), M the nuclear
multiplicity, ω_mn = E_m − E_n of H (rad/s).  Degenerate levels need no special care.
A triplet-born pair (ρ0 = P_T/3M) gives Φ_S = (1 − Φ_S^singlet)/3 with the same sum
(write ρ0 = (1 − P_S)/3M in Σ Re[P_nm ρ0_mn] k²/(k²+ω²) and use Σ_m P_mm = M), and a
mixed start is the linear combination.  Any couplings are allowed (exchange, dipolar,
g-anisotropy); the cost is one dense Hermitian eigendecomposition of dimension
N = 4M per field vector, O(N³).  Not for unequal rates (see :mod:`.liouville`).

⟨m|P_S|n⟩ is formed as U U† with U = V† Q, Q the N×M singlet isometry, which costs
N²M instead of the 2N³ of V† P_S V.
"""

from __future__ import annotations

import numpy as np

from .hamiltonian import pair_operators, singlet_isometry
from .system import RadicalPair

NAME = "eigenbasis"


def applicable(pair: RadicalPair):
    """(ok, reason): this solver needs k_S = k_T."""
    if not pair.equal_rates:
        return False, f"needs equal rates, got k_s = {pair.k_s:g}, k_t = {pair.k_t:g} s^-1"
    return True, ""


def batch_size(pair: RadicalPair, budget_bytes=512 * 2**20) -> int:
    n = pair.dim
    return int(max(1, min(64, budget_bytes // (16 * 6 * n * n))))


def _singlet_born(energies, vectors, q, k):
    u = np.swapaxes(vectors.conj(), -1, -2) @ q            # (B, N, M)
    p = u @ np.swapaxes(u.conj(), -1, -2)                  # (B, N, N) = V† P_S V
    w = energies[:, :, None] - energies[:, None, :]
    lor = k * k / (k * k + w * w)
    m = q.shape[1]
    return np.einsum("bmn,bmn->b", (p.real**2 + p.imag**2), lor) / m


def yields(pair: RadicalPair, fields_T, progress=None):
    """Singlet and triplet yields for field vectors.

    Parameters
    ----------
    pair : RadicalPair
        With k_s == k_t.
    fields_T : ndarray, shape (K, 3)
        Field vectors in the molecular frame (T).
    progress : callable, optional
        Called with the number of field vectors finished in each batch.

    Returns
    -------
    (phi_s, phi_t) : two ndarrays of shape (K,)
    """
    ops = pair_operators(pair)
    q = singlet_isometry(pair)
    k = pair.k_s
    fields_T = np.asarray(fields_T, dtype=np.float64).reshape(-1, 3)
    out = np.empty(len(fields_T))
    bs = batch_size(pair)
    for i in range(0, len(fields_T), bs):
        h = ops.hamiltonian(fields_T[i:i + bs])
        e, v = np.linalg.eigh(h)
        out[i:i + bs] = _singlet_born(e, v, q, k)
        if progress is not None:
            progress(len(h))
    p = pair.singlet_fraction
    phi_s = p * out + (1.0 - p) * (1.0 - out) / 3.0
    # equal rates: Tr ρ(t) = e^{-kt} exactly, so the yields add up to one
    return phi_s, 1.0 - phi_s
