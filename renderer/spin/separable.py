"""Equal-rate singlet yields for radicals without inter-radical coupling, per radical.

With k_S = k_T = k and no exchange or dipolar coupling, H = H_A ⊗ 1 + 1 ⊗ H_B, so the
pair's eigenstates are products |a⟩|c⟩ of each radical's eigenstates and
ω_(ac),(bd) = ω_ab + ω_cd.  The singlet-born yield

    Φ_S = 1/4 + (1/M) Re Σ_pq Σ_abcd A^p_ab A^q_ba B^p_cd B^q_dc k/(k − i(ω_ab + ω_cd))

(the Laplace transform of p_S(t) = 1/4 + Σ_pq R^A_pq(t) R^B_pq(t), R_pq(t) =
(1/Z) Tr[S_p e^{−iHt} S_q e^{iHt}] per radical; Lee et al. 2014, J. R. Soc. Interface,
supplementary §1) needs only the electron spin operators A^p = V_A† S_Ap V_A and
B^p in each radical's own eigenbasis.  Summing p and q first, Σ_pq A^p_ab B^p_cd
A^q_ba B^q_dc = |G_ab,cd|² with G_ab,cd = Σ_p A^p_ab B^p_cd (because A^q_ba =
conj(A^q_ab)), so the complex factor's real part k²/(k² + ω²) is taken exactly, term
by term, and the sum is the Timmel et al. (1998) formula in the product eigenbasis
with ⟨ac|P_S|bd⟩ = δ_ab δ_cd/4 − G_ab,cd.  Cost: two small eigendecompositions and
(dim A)²(dim B)² terms per field vector, never (dim A · dim B)³.  The (ab, cd) and
(ba, dc) terms are equal, so only a ≤ b is visited.  Not for unequal rates or coupled
radicals (see :mod:`.eigenbasis`, :mod:`.liouville`).
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from .hamiltonian import radical_operators
from .system import RadicalPair

NAME = "separable"


def applicable(pair: RadicalPair):
    """(ok, reason): this solver needs k_S = k_T and no exchange or dipolar coupling."""
    if not pair.equal_rates:
        return False, f"needs equal rates, got k_s = {pair.k_s:g}, k_t = {pair.k_t:g} s^-1"
    if pair.coupled:
        return False, "needs uncoupled radicals (exchange_mT = 0 and no dipolar_mT)"
    return True, ""


def _sum_py(sa, ea, sb, eb, k):
    """Σ_{ab,cd} |δ_ab δ_cd/4 − G_ab,cd|² k²/(k² + (ω_ab + ω_cd)²), G = Σ_p sa[a,b,p] sb[c,d,p].

    sa : (nA, nA, 3) complex, sb : (nB, nB, 3) complex, ea/eb energies (rad/s).
    """
    na = ea.shape[0]
    nb = eb.shape[0]
    k2 = k * k
    part = np.zeros(na)
    for a in prange(na):
        acc = 0.0
        for b in range(a, na):
            wab = ea[a] - ea[b]
            a0 = sa[a, b, 0]
            a1 = sa[a, b, 1]
            a2 = sa[a, b, 2]
            sub = 0.0
            for c in range(nb):
                for d in range(nb):
                    g = a0 * sb[c, d, 0] + a1 * sb[c, d, 1] + a2 * sb[c, d, 2]
                    if a == b and c == d:
                        g -= 0.25
                    w = wab + eb[c] - eb[d]
                    sub += (g.real * g.real + g.imag * g.imag) * (k2 / (k2 + w * w))
            acc += sub if a == b else 2.0 * sub
        part[a] = acc
    return part.sum()


# the same loop compiled twice: threads pay off only for large sums (their start-up and
# barrier cost dominates small systems, badly so on a busy machine)
_sum_serial = njit(cache=True)(_sum_py)
_sum_parallel = njit(parallel=True, cache=True)(_sum_py)
PARALLEL_MIN_TERMS = 1 << 20


def _sum_kernel(sa, ea, sb, eb, k):
    """Σ |P|² k²/(k²+ω²) over the product eigenbasis; see :func:`_sum_py`."""
    n = ea.shape[0] ** 2 * eb.shape[0] ** 2
    return (_sum_parallel if n >= PARALLEL_MIN_TERMS else _sum_serial)(sa, ea, sb, eb, k)


def eigen_spin_operators(radical, fields_T):
    """Energies and electron spin operators in a radical's eigenbasis, for many fields.

    Parameters
    ----------
    radical : Radical
    fields_T : ndarray, shape (K, 3)
        Field vectors (T), molecular frame.

    Returns
    -------
    energies : ndarray (K, n), rad/s
    s_eig : ndarray (K, n, n, 3), complex
        (V† S_p V)_ab with p last, n = 2Z.
    """
    ops = radical_operators(radical)
    e, v = np.linalg.eigh(ops.hamiltonian(fields_T))
    vh = np.swapaxes(v.conj(), -1, -2)
    s = np.stack([vh @ ops.s[p] @ v for p in range(3)], axis=-1)
    return e, np.ascontiguousarray(s)


def batch_size(pair: RadicalPair, budget_bytes=256 * 2**20) -> int:
    n = max(pair.a.dim, pair.b.dim)
    return int(max(1, min(256, budget_bytes // (16 * 8 * n * n))))


def yields(pair: RadicalPair, fields_T, progress=None):
    """Singlet and triplet yields for field vectors (K, 3) in T → two arrays (K,).

    See :func:`renderer.spin.eigenbasis.yields` for the parameters.
    """
    fields_T = np.asarray(fields_T, dtype=np.float64).reshape(-1, 3)
    ra, rb = pair.a, pair.b
    if rb.dim > ra.dim:  # the larger radical in the outer (parallel) loop
        ra, rb = rb, ra
    m = pair.nuclear_multiplicity
    out = np.empty(len(fields_T))
    bs = batch_size(pair)
    for i in range(0, len(fields_T), bs):
        f = fields_T[i:i + bs]
        ea, sa = eigen_spin_operators(ra, f)
        eb, sb = eigen_spin_operators(rb, f)
        for j in range(len(f)):
            out[i + j] = _sum_kernel(sa[j], ea[j], sb[j], eb[j], pair.k_s) / m
        if progress is not None:
            progress(len(f))
    p = pair.singlet_fraction
    phi_s = p * out + (1.0 - p) * (1.0 - out) / 3.0
    return phi_s, 1.0 - phi_s
