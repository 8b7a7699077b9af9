"""Spin-coherent-state Monte Carlo singlet yields (statistically exact, with a standard error).

Lewis, Fay & Manolopoulos (2016, J. Chem. Phys. 145:084102; citation from memory)
replace the trace over nuclear states by an average over spin coherent states: with
|Ω⟩ = |θ, φ⟩ for every nucleus and directions drawn uniformly on the sphere,
E[|Ω⟩⟨Ω|] = 1/(2I + 1), so ρ₀ = P_S/M = E[|S⟩⟨S| ⊗ |Ω⟩⟨Ω|] and each sample is one
pure state ψ₀ = |S⟩ ⊗ |Ω₁⟩ ⊗ ... propagated under H_eff = H − (i/2)(k_S P_S + k_T P_T).
Φ_S = k_S ∫ ‖P_S ψ(t)‖² dt is unbiased for every sample, so the mean over samples
converges to the exact yield with standard error σ/√n, for any couplings and rates.

Propagation: with the step propagator exp(−iH_eff dt) (dense, for pair dimensions up
to :data:`DENSE_LIMIT`) or ``scipy.sparse.linalg.expm_multiply`` on a sparse H
(larger), on a uniform grid with dt set from a bound on the spectral range so that
the composite Simpson rule errs by ≲ (ω_max dt)⁴/180 ≈ 2·10⁻⁵ relative; this bias is
far below the statistical error of any practical sample count.  Cost per sample grows
with dim·nnz·t_max·‖H‖, so the planner (:mod:`renderer.spin.planner`) estimates it
first.  Not the tool for huge separable pairs with equal rates: use
:mod:`renderer.spin.large` there.
"""

from __future__ import annotations

import math

import numpy as np
import scipy.sparse as sp
from scipy.linalg import expm
from scipy.sparse.linalg import eigsh, expm_multiply
from scipy.special import comb
from threadpoolctl import threadpool_limits

from ..errors import MagretinaError
from .hamiltonian import GAMMA_E, RAD_S_PER_MT
from .operators import spin_matrices
from .system import G_FREE, RadicalPair

#: Pair dimension up to which a dense step propagator is used.
DENSE_LIMIT = 2048
#: ω_max·dt used to choose the time step (Simpson error ≲ 0.25⁴/180 ≈ 2e-5 relative).
OMEGA_DT = 0.25


def _kron_list(mats):
    out = sp.identity(1, dtype=np.complex128, format="csr")
    for m in mats:
        out = sp.kron(out, m, format="csr")
    return out


def sparse_pair_hamiltonian(pair: RadicalPair, field_T):
    """The pair Hamiltonian (rad/s) as a sparse CSR matrix, same basis as the dense one.

    Kronecker order (electron A, nuclei of A, electron B, nuclei of B), conventions of
    :mod:`renderer.spin.hamiltonian` (electron Zeeman +(γ_e/g_e) B·g·S, hyperfine
    γ_e S·A·I, exchange −2γ_e J S_A·S_B, dipolar γ_e S_A·D·S_B, nuclear Zeeman −γ_n B·I).
    """
    b = np.asarray(field_T, dtype=np.float64).reshape(3)
    dims = [2] + [n.multiplicity for n in pair.a.nuclei] + [2] + [n.multiplicity for n in pair.b.nuclei]
    spins = [0.5] + [n.spin for n in pair.a.nuclei] + [0.5] + [n.spin for n in pair.b.nuclei]
    eyes = [sp.identity(d, dtype=np.complex128, format="csr") for d in dims]
    ops = [[sp.csr_matrix(m) for m in spin_matrices(s)] for s in spins]

    def op(pos, comp):
        mats = list(eyes)
        mats[pos] = ops[pos][comp]
        return _kron_list(mats)

    def op2(p1, c1, p2, c2):
        mats = list(eyes)
        mats[p1] = ops[p1][c1]
        mats[p2] = ops[p2][c2]
        return _kron_list(mats)

    n = int(np.prod(dims))
    h = sp.csr_matrix((n, n), dtype=np.complex128)
    ea, eb = 0, 1 + len(pair.a.nuclei)
    for e_pos, rad, first in ((ea, pair.a, 1), (eb, pair.b, eb + 1)):
        w = (GAMMA_E / G_FREE) * (rad.g_tensor.T @ b)
        for j in range(3):
            if w[j] != 0:
                h = h + w[j] * op(e_pos, j)
        for k, nuc in enumerate(rad.nuclei):
            a = nuc.hyperfine_mT * RAD_S_PER_MT
            for i in range(3):
                for j in range(3):
                    if a[i, j] != 0:
                        h = h + a[i, j] * op2(e_pos, i, first + k, j)
            if nuc.gamma_rad_s_T != 0:
                for j in range(3):
                    if b[j] != 0:
                        h = h - nuc.gamma_rad_s_T * b[j] * op(first + k, j)
    if pair.exchange_mT != 0:
        jj = -2.0 * pair.exchange_mT * RAD_S_PER_MT
        for i in range(3):
            h = h + jj * op2(ea, i, eb, i)
    if pair.dipolar_mT is not None:
        d = pair.dipolar_mT * RAD_S_PER_MT
        for i in range(3):
            for j in range(3):
                if d[i, j] != 0:
                    h = h + d[i, j] * op2(ea, i, eb, j)
    return h.tocsr()


def coherent_state(spin, theta, phi):
    """Spin coherent state |θ, φ⟩ of spin I in the basis m = I, ..., −I, shape (2I+1,).

    c_m = √C(2I, I+m) cos(θ/2)^(I+m) sin(θ/2)^(I−m) e^{i(I−m)φ}; ⟨S⟩ points along
    (θ, φ) and (2I+1)/(4π) ∫ |Ω⟩⟨Ω| dΩ = 1 (common practice).
    """
    two_i = int(round(2 * spin))
    p = two_i - np.arange(two_i + 1)  # I + m
    c, s = math.cos(theta / 2), math.sin(theta / 2)
    return np.sqrt(comb(two_i, p)) * c ** p * s ** (two_i - p) * np.exp(1j * (two_i - p) * phi)


def _sample_states(pair, n, rng, electron):
    za, zb = pair.a.nuclear_multiplicity, pair.b.nuclear_multiplicity
    out = np.empty((2 * za * 2 * zb, n), dtype=np.complex128)
    for j in range(n):
        def nuc_vec(rad):
            v = np.ones(1, dtype=np.complex128)
            for nuc in rad.nuclei:
                th = math.acos(1.0 - 2.0 * rng.random())
                ph = 2 * math.pi * rng.random()
                v = np.kron(v, coherent_state(nuc.spin, th, ph))
            return v
        na, nb = nuc_vec(pair.a), nuc_vec(pair.b)
        psi = np.einsum("ab,i,j->aibj", electron, na, nb)
        out[:, j] = psi.ravel()
    # powers of sin/cos can underflow to subnormal numbers, which make BLAS crawl
    out[np.abs(out) < 1e-150] = 0.0
    return out


_S = np.array([[0, 1], [-1, 0]], dtype=np.complex128) / math.sqrt(2)
_TRIPLETS = (np.array([[1, 0], [0, 0]], dtype=np.complex128),
             np.array([[0, 1], [1, 0]], dtype=np.complex128) / math.sqrt(2),
             np.array([[0, 0], [0, 1]], dtype=np.complex128))


def _singlet_pop(psi, za, zb):
    v = psi.reshape(2, za, 2, zb, -1)
    s = (v[0, :, 1] - v[1, :, 0]) / math.sqrt(2)
    return np.sum(np.abs(s) ** 2, axis=(0, 1))


def spectral_span(h) -> float:
    """λ_max − λ_min of a Hermitian (sparse) matrix: the highest frequency of populations.

    Re λ of H_eff = H − iK (K ≥ 0) lies in the numerical range of H, so this span also
    bounds the oscillation frequencies for unequal rates.
    """
    n = h.shape[0]
    if n <= DENSE_LIMIT:
        e = np.linalg.eigvalsh(h.toarray())
        return float(e[-1] - e[0])
    hi = eigsh(h, k=1, which="LA", tol=1e-4, return_eigenvectors=False)[0]
    lo = eigsh(h, k=1, which="SA", tol=1e-4, return_eigenvectors=False)[0]
    return float(hi - lo)


def n_time_steps(t_max_s, omega_max_rad_s, omega_dt=OMEGA_DT) -> int:
    """Number of (even) Simpson intervals on [0, t_max] for ω_max·dt ≤ ``omega_dt``.

    Shared by the propagation and the planner's cost estimate, so both count the
    same steps.
    """
    n = int(math.ceil(t_max_s * omega_max_rad_s / omega_dt))
    return n + n % 2


def _simpson_weights(n_intervals, dt):
    w = np.ones(n_intervals + 1)
    w[1:-1:2] = 4.0
    w[2:-1:2] = 2.0
    return w * dt / 3.0


def _decay_operator(pair, za, zb):
    """k_S P_S + k_T P_T as a sparse matrix (for unequal rates)."""
    n = 4 * za * zb
    idx = np.arange(za * zb)
    ia, ib = idx // zb, idx % zb

    def pos(ea, eb):
        return ((ea * za + ia) * 2 + eb) * zb + ib

    rows = np.concatenate([pos(0, 1), pos(1, 0), pos(0, 1), pos(1, 0)])
    cols = np.concatenate([pos(0, 1), pos(1, 0), pos(1, 0), pos(0, 1)])
    vals = np.concatenate([np.full(za * zb, 0.5), np.full(za * zb, 0.5),
                           np.full(za * zb, -0.5), np.full(za * zb, -0.5)])
    p_s = sp.csr_matrix((vals, (rows, cols)), shape=(n, n), dtype=np.complex128)
    return pair.k_s * p_s + pair.k_t * (sp.identity(n, format="csr") - p_s)


def sample_yields(pair: RadicalPair, field_T, n_samples, *, seed=0, electron="singlet",
                  tail_tol=1e-9, omega_dt=OMEGA_DT, progress=None):
    """Per-sample singlet yields for spin-coherent initial states.

    Parameters
    ----------
    pair : RadicalPair
    field_T : array_like (3,)
        Static field (T), molecular frame.
    n_samples : int
    seed : int or sequence of int
        Seed of ``numpy.random.default_rng``.
    electron : "singlet" or int 0..2
        Electron part of the initial state (singlet, or triplet T+, T0, T−).
    tail_tol : float
        Propagation stops when the remaining population is below this.

    Returns
    -------
    ndarray (n_samples,)
    """
    # many small products: threaded BLAS only adds contention here
    with threadpool_limits(1, user_api="blas"):
        return _sample_yields(pair, field_T, int(n_samples), seed, electron, tail_tol, omega_dt,
                              progress)


def _sample_yields(pair, field_T, n_samples, seed, electron, tail_tol, omega_dt, progress):
    rng = np.random.default_rng(seed)
    za, zb = pair.a.nuclear_multiplicity, pair.b.nuclear_multiplicity
    el = _S if electron == "singlet" else _TRIPLETS[int(electron)]
    h = sparse_pair_hamiltonian(pair, field_T)
    n = h.shape[0]
    kmin = min(pair.k_s, pair.k_t) if pair.k_t > 0 else pair.k_s
    equal = pair.equal_rates
    t_max = math.log(1.0 / tail_tol) / kmin
    omega_max = max(1.05 * spectral_span(h), pair.k_s, 1.0)
    n_int = n_time_steps(t_max, omega_max, omega_dt)
    dt = t_max / n_int
    gen = h if equal else (h - 0.5j * _decay_operator(pair, za, zb))
    use_dense = n <= DENSE_LIMIT
    if use_dense:
        step = expm(-1j * dt * gen.toarray())
    out = np.empty(int(n_samples))
    batch = int(max(1, min(n_samples, 2**27 // (16 * n))))
    done = 0
    while done < n_samples:
        m = min(batch, n_samples - done)
        psi = _sample_states(pair, m, rng, el)
        acc = np.zeros(m)
        # expm_multiply returns every grid point of a chunk: keep that below ~256 MiB
        chunk = int(max(1, min(256, 2**28 // (16 * n * m))))
        j = 0
        w_all = _simpson_weights(n_int, dt)
        pop = _singlet_pop(psi, za, zb)
        acc += w_all[0] * pop
        while j < n_int:
            c = min(chunk, n_int - j)
            if use_dense:
                for i in range(c):
                    psi = step @ psi
                    t = (j + i + 1) * dt
                    pop = _singlet_pop(psi, za, zb)
                    acc += w_all[j + i + 1] * pop * (math.exp(-pair.k_s * t) if equal else 1.0)
            else:
                traj = expm_multiply(-1j * gen, psi, start=dt, stop=c * dt, num=c, endpoint=True)
                for i in range(c):
                    t = (j + i + 1) * dt
                    pop = _singlet_pop(traj[i], za, zb)
                    acc += w_all[j + i + 1] * pop * (math.exp(-pair.k_s * t) if equal else 1.0)
                psi = traj[-1]
            j += c
        out[done:done + m] = pair.k_s * acc
        done += m
        if progress is not None:
            progress(m)
    return out


def singlet_yield_montecarlo(pair: RadicalPair, field_T, *, n_samples=256, seed=0,
                             return_error=True, **kwargs):
    """Spin-coherent-state Monte Carlo singlet yield with its standard error.

    Parameters
    ----------
    pair : RadicalPair
        Any couplings and rates; initial state singlet, triplet or a mixture.
    field_T : array_like (3,)
        Static field (T), molecular frame.
    n_samples : int
        Number of coherent-state samples (per electron start state).
    seed : int
    return_error : bool
        Return (mean, standard error) if True (default), else the mean.

    Returns
    -------
    (float, float) or float
    """
    if int(n_samples) < 2:
        raise MagretinaError(f"n_samples = {n_samples!r} must be >= 2 for a standard error")
    p = pair.singlet_fraction
    parts = []
    if p > 0:
        parts.append((p, sample_yields(pair, field_T, int(n_samples), seed=[seed, 0], **kwargs)))
    if p < 1:
        # triplet start: ρ0 = P_T/(3M) = (1/3) Σ_j E[|T_j⟩⟨T_j| ⊗ |Ω⟩⟨Ω|]
        for j in range(3):
            parts.append(((1 - p) / 3, sample_yields(pair, field_T, int(n_samples),
                                                     seed=[seed, j + 1], electron=j, **kwargs)))
    mean = sum(w * v.mean() for w, v in parts)
    se = math.sqrt(sum((w * v.std(ddof=1)) ** 2 / len(v) for w, v in parts))
    return (float(mean), float(se)) if return_error else float(mean)
