"""Quantum limit of compass precision: Fisher information about the field direction.

For a radical pair under continuous photo-excitation with equal recombination rates
k_S = k_T = k, the time-averaged spin density operator is

    ρ̄ = k ∫ e^{−kt} e^{−iHt} ρ0 e^{iHt} dt,    ⟨m|ρ̄|n⟩ = ⟨m|ρ0|n⟩ · k / (k + i ω_mn)

in the eigenbasis of H (ω_mn = E_m − E_n), trace one, with ρ0 = P_S/M for a singlet-born
pair (Smith, Glatthard, Chowdhury & Kattnig 2024, arXiv:2401.02923, compare the
precision of the yield readout with the quantum Fisher information of this state).
This module computes, as a function of the field direction in the molecular frame,

* the quantum Fisher information (symmetric-logarithmic-derivative form, Braunstein &
  Caves 1994, PRL 72:3439) F_ij = 2 Σ_{a,b: λa+λb>0} Re(⟨a|∂iρ̄|b⟩⟨b|∂jρ̄|a⟩)/(λa+λb)
  in the eigenbasis of ρ̄, rank-deficient states included;
* the classical Fisher information of one singlet/triplet product per pair (one
  Bernoulli trial with success probability Φ_S = Tr P_S ρ̄): ∂iΦ ∂jΦ / (Φ(1 − Φ)).

The derivatives of ρ̄ are exact: ρ̄ solves k ρ̄ + i[H, ρ̄] = k ρ0, so ∂ρ̄ solves
k ∂ρ̄ + i[H, ∂ρ̄] = −i[∂H, ρ̄], elementwise in the eigenbasis of H.  Both informations
are model predictions of a hypothesis, not measurements.  Not for unequal rates (ρ̄
then needs the full Liouvillian) and not for relaxation; full-sphere tables of these
informations (cached) are :mod:`renderer.response.information_table`, the yield tables
:mod:`renderer.response.spin_table`.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import MagretinaError
from .hamiltonian import pair_operators, singlet_isometry
from .system import RadicalPair

#: Relative eigenvalue tolerance of ρ̄: pairs (a, b) with λa + λb below RANK_RTOL·λmax are
#: treated as outside the support (their SLD terms are dropped).
RANK_RTOL = 1e-10
#: Largest allowed |⟨a|∂ρ|b⟩| on the kernel-kernel block, relative to max |∂ρ|.  A smooth
#: family of density operators has exactly zero there (it would turn negative otherwise).
SUPPORT_RTOL = 1e-6
KINDS = ("quantum", "yield")


def check_pair(pair):
    """Raise MagretinaError unless ``pair`` is a RadicalPair with equal rates (k_S = k_T)."""
    if not isinstance(pair, RadicalPair):
        raise MagretinaError(f"pair must be a renderer.spin.RadicalPair, got {type(pair).__name__}")
    if not pair.equal_rates:
        raise MagretinaError(f"the time-averaged density operator is implemented for equal rates "
                             f"only; got k_s = {pair.k_s:g}, k_t = {pair.k_t:g} s^-1")


def _field(field_T):
    b = np.asarray(field_T, dtype=np.float64)
    if b.shape != (3,) or not np.all(np.isfinite(b)):
        raise MagretinaError(f"field_T must be a finite 3-vector in tesla, got {field_T!r}")
    r = float(np.linalg.norm(b))
    if r == 0.0:
        raise MagretinaError("field_T = 0: the field direction is undefined at zero field")
    return b, r


def tangent_frame(n):
    """Unit tangent vectors (e_θ, e_φ) at unit vector(s) n, shape (..., 2, 3).

    θ is the polar angle from +z and φ = atan2(n_y, n_x); at the poles φ = 0 is used,
    so e_φ = (0, 1, 0) there and the frame stays orthonormal.
    """
    n = np.asarray(n, dtype=np.float64)
    th = np.arccos(np.clip(n[..., 2], -1.0, 1.0))
    ph = np.arctan2(n[..., 1], n[..., 0])
    e_t = np.stack([np.cos(th) * np.cos(ph), np.cos(th) * np.sin(ph), -np.sin(th)], axis=-1)
    e_p = np.stack([-np.sin(ph), np.cos(ph), np.zeros_like(ph)], axis=-1)
    return np.stack([e_t, e_p], axis=-2)


def sld_fisher(rho, drhos, rtol=RANK_RTOL, support_rtol=SUPPORT_RTOL):
    """Quantum (SLD) Fisher information matrix of a density operator family.

    Parameters
    ----------
    rho : ndarray (N, N)
        Hermitian, positive semidefinite density operator (any trace).
    drhos : sequence of P ndarrays (N, N)
        Hermitian derivatives ∂ρ/∂x_i.
    rtol : float
        Terms with λa + λb ≤ rtol · λmax are outside the support and dropped.
    support_rtol : float
        The kernel-kernel block of each ∂ρ must vanish to this relative size, else
        MagretinaError (the family is not a smooth family of states).

    Returns
    -------
    ndarray (P, P)
        F_ij = 2 Σ Re(⟨a|∂iρ|b⟩⟨b|∂jρ|a⟩)/(λa + λb), in the inverse square of x's unit.
    """
    rho = np.asarray(rho)
    lam, w = np.linalg.eigh(rho)
    lmax = float(np.max(np.abs(lam)))
    if lmax == 0.0:
        raise MagretinaError("density operator is zero")
    if lam.min() < -1e-8 * lmax:
        raise MagretinaError(f"density operator is not positive semidefinite (smallest eigenvalue "
                             f"{lam.min():.3g}, largest {lmax:.3g})")
    lam = np.clip(lam, 0.0, None)
    den = lam[:, None] + lam[None, :]
    mask = den > rtol * lmax
    kern = lam <= 0.5 * rtol * lmax
    ds = [w.conj().T @ np.asarray(d) @ w for d in drhos]
    for d in ds:
        scale = float(np.max(np.abs(d))) if d.size else 0.0
        if scale > 0 and kern.any():
            leak = float(np.max(np.abs(d[np.ix_(kern, kern)])))
            if leak > support_rtol * scale:
                raise MagretinaError(f"derivative leaves the support of the state (kernel block "
                                     f"{leak:.3g} against {scale:.3g}); not a family of states")
    inv = np.where(mask, 1.0 / np.where(mask, den, 1.0), 0.0)
    p = len(ds)
    f = np.empty((p, p))
    for i in range(p):
        for j in range(i, p):
            f[i, j] = f[j, i] = 2.0 * float(np.sum((ds[i] * ds[j].conj()).real * inv))
    return f


def _initial_eigen(pair, u):
    """ρ0 in the eigenbasis of H from U = V†Q: p·UU†/M + (1 − p)(1 − UU†)/(3M)."""
    m = u.shape[1]
    ps = u @ u.conj().T
    p = pair.singlet_fraction
    if p == 1.0:
        return ps / m, ps
    eye = np.eye(ps.shape[0])
    return p * ps / m + (1.0 - p) * (eye - ps) / (3.0 * m), ps


def _one_direction(pair, ops, q, b_vec, tangents):
    """ρ̄ (in H's eigenbasis), its tangent derivatives, P_S there, for one field vector."""
    k = pair.k_s
    h = ops.hamiltonian(b_vec)
    e, v = np.linalg.eigh(h)
    u = v.conj().T @ q
    r0, ps = _initial_eigen(pair, u)
    den = k + 1j * (e[:, None] - e[None, :])
    rb = r0 * (k / den)
    b = float(np.linalg.norm(b_vec))
    drs = []
    for t in tangents:
        dh = v.conj().T @ (b * np.tensordot(t, ops.zeeman, axes=(0, 0))) @ v
        drs.append(-1j * (dh @ rb - rb @ dh) / den)
    return rb, drs, ps


def _informations(pair, ops, q, b_vec, tangents):
    rb, drs, ps = _one_direction(pair, ops, q, b_vec, tangents)
    rb = 0.5 * (rb + rb.conj().T)
    drs = [0.5 * (d + d.conj().T) for d in drs]
    fq = sld_fisher(rb, drs)
    phi = float(np.real(np.sum(ps.T * rb)))
    g = np.array([float(np.real(np.sum(ps.T * d))) for d in drs])
    var = phi * (1.0 - phi)
    fc = np.outer(g, g) / var if var > 0 else np.zeros((len(g), len(g)))
    return fq, fc, phi, g


def time_averaged_state(pair, field_T):
    """Time-averaged spin density operator ρ̄ of an equal-rate pair, in the pair basis.

    Parameters
    ----------
    pair : RadicalPair
        With k_s == k_t.
    field_T : array_like (3,)
        Field in the molecular frame, tesla.

    Returns
    -------
    ndarray (N, N), complex Hermitian, trace 1
        ρ̄ = k ∫ e^{−kt} e^{−iHt} ρ0 e^{iHt} dt, ρ0 the pair's initial state
        (Tr ρ0 = 1); Tr(P_S ρ̄) is the singlet yield.
    """
    check_pair(pair)
    b = np.asarray(field_T, dtype=np.float64).reshape(3)
    ops = pair_operators(pair)
    q = singlet_isometry(pair)
    e, v = np.linalg.eigh(ops.hamiltonian(b))
    r0, _ = _initial_eigen(pair, v.conj().T @ q)
    rb = r0 * (pair.k_s / (pair.k_s + 1j * (e[:, None] - e[None, :])))
    return v @ rb @ v.conj().T


def direction_information(pair, field_T, kind="quantum"):
    """Fisher information about the field direction for one radical pair.

    Parameters
    ----------
    pair : RadicalPair
        Equal rates k_s = k_t = k (else MagretinaError).
    field_T : array_like (3,)
        Field vector in the molecular frame, tesla (non-zero).
    kind : {"quantum", "yield"}
        "quantum": SLD quantum Fisher information of the time-averaged spin density
        operator ρ̄ = k ∫ e^{−kt} ρ(t) dt, ρ(0) = singlet projector / M (or the pair's
        stated initial state); "yield": classical Fisher information of the
        singlet/triplet product readout of the same pair (one Bernoulli trial).

    Returns
    -------
    ndarray (2, 2)
        Fisher information matrix about the polar and azimuthal angles (θ, φ) of the
        field vector in the molecular frame, rad⁻², for one radical pair.  Near the
        poles the φ row and column vanish like sin θ (the coordinate degenerates).
    """
    if kind not in KINDS:
        raise MagretinaError(f"kind = {kind!r} is not known; allowed: {', '.join(KINDS)}")
    check_pair(pair)
    b, r = _field(field_T)
    n = b / r
    th = math.acos(max(-1.0, min(1.0, n[2])))
    ph = math.atan2(n[1], n[0])
    # ∂n/∂θ and ∂n/∂φ directly (the latter vanishes at the poles, as it should)
    tangents = [np.array([math.cos(th) * math.cos(ph), math.cos(th) * math.sin(ph), -math.sin(th)]),
                np.array([-math.sin(th) * math.sin(ph), math.sin(th) * math.cos(ph), 0.0])]
    fq, fc, _, _ = _informations(pair, pair_operators(pair), singlet_isometry(pair), b, tangents)
    return fq if kind == "quantum" else fc


def information_on_directions(pair, field_T, dirs, progress=None):
    """Quantum and yield Fisher information in the local orthonormal tangent frame.

    Parameters
    ----------
    pair : RadicalPair (equal rates)
    field_T : float
        Field magnitude, tesla (> 0).
    dirs : ndarray (K, 3)
        Unit field directions in the molecular frame.
    progress : callable, optional
        Called with 1 after each direction.

    Returns
    -------
    dict of ndarrays
        ``quantum`` and ``yield`` (K, 2, 2): information about small rotations of the
        field direction along (e_θ, e_φ) of :func:`tangent_frame`, rad⁻²;
        ``phi_s`` (K,) singlet yields; ``grad`` (K, 2) yield gradient (rad⁻¹).
    """
    check_pair(pair)
    b = float(field_T)
    if not math.isfinite(b) or b <= 0:
        raise MagretinaError(f"field magnitude = {field_T!r} T is out of range; allowed (0, inf)")
    dirs = np.asarray(dirs, dtype=np.float64).reshape(-1, 3)
    frames = tangent_frame(dirs)
    ops, q = pair_operators(pair), singlet_isometry(pair)
    kq = np.empty((len(dirs), 2, 2))
    kc = np.empty_like(kq)
    phi = np.empty(len(dirs))
    grad = np.empty((len(dirs), 2))
    for i, d in enumerate(dirs):
        kq[i], kc[i], phi[i], grad[i] = _informations(pair, ops, q, b * d, frames[i])
        if progress is not None:
            progress(1)
    return {"quantum": kq, "yield": kc, "phi_s": phi, "grad": grad}


def antipode_transform(n):
    """T (2, 2) with F_C(−n) = T F_C(n) Tᵀ for the yield information, tangent frames at −n, n.

    Time reversal gives Φ_S(B) = Φ_S(−B), so the yield information about a displacement
    δ at −B equals that about −δ at B.  The quantum information has no such symmetry:
    time reversal maps ρ̄(B) to ρ̄(−B) only up to a transpose in the eigenbasis of H(B)
    (the dispersive part of k/(k + iω) changes sign), so it is computed at every node.
    """
    return -tangent_frame(-n) @ tangent_frame(n).T
