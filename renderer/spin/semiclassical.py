"""Schulten–Wolynes semiclassical singlet yields: an APPROXIMATION, labelled as such.

Schulten & Wolynes (1978, J. Chem. Phys. 68:3292; citation from memory) replace each radical's nuclear spins
by one static classical hyperfine field: the electron of radical r precesses about
ω_r = (γ_e/g_e) gᵀB₀ + h_r with h_r = γ_e Σ_k A_k I_k, and for many nuclei h_r is
Gaussian with covariance γ_e² Σ_k A_k A_kᵀ I_k(I_k + 1)/3 (the isotropic case gives the
paper's τ⁻² = (1/6)Σ a_k² I_k(I_k + 1) per radical).  Each sample is a bare electron,
whose correlation lines are known in closed form (0 with u = n̂/√2, ±|ω| with
u = (e₁ ± i e₂)/2); the ensemble is therefore a line spectrum and the pair yield is
the same separable double sum as the exact theory (:mod:`renderer.spin.large`).
Samples are scrambled Sobol points (``scipy.stats.qmc``) mapped to the Gaussian; the
spread over independent scramblings gives a standard error.

Known failure, documented by a test: for slow recombination the semiclassical yield
misses the low-field effect (Manolopoulos & Hore 2013, J. Chem. Phys. 139:124106; citation from memory).
Use it for quick estimates with many nuclei, never as the exact answer.  Equal rates,
no inter-radical coupling.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.stats import norm, qmc

from ..errors import MagretinaError
from .hamiltonian import GAMMA_E, RAD_S_PER_MT
from .large import LineSpectrum, _check_separable, from_singlet_born, separable_binned
from .system import G_FREE, Radical, RadicalPair

#: Label carried by every result of this module.
LABEL = "Schulten-Wolynes semiclassical approximation (not exact)"


def hyperfine_covariance(radical: Radical) -> np.ndarray:
    """Covariance (rad²/s²) of the classical hyperfine field h of one radical, (3, 3)."""
    c = np.zeros((3, 3))
    for nuc in radical.nuclei:
        a = nuc.hyperfine_mT * RAD_S_PER_MT
        c += a @ a.T * nuc.spin * (nuc.spin + 1.0) / 3.0
    return c


def precession_lines(omega_vec, weight) -> LineSpectrum:
    """Correlation lines of bare electron spins precessing about ω (rad/s), vectorised.

    Parameters
    ----------
    omega_vec : ndarray (S, 3)
        Precession vectors, one per sample (H = ω·S).
    weight : float
        Weight of every sample (1/S for an ensemble average).

    Returns
    -------
    LineSpectrum with 3 lines per sample.
    """
    w = np.asarray(omega_vec, dtype=np.float64).reshape(-1, 3)
    mag = np.linalg.norm(w, axis=1)
    n = np.where(mag[:, None] > 0, w / np.where(mag > 0, mag, 1.0)[:, None],
                 np.array([0.0, 0.0, 1.0]))
    helper = np.where(np.abs(n[:, :1]) < 0.9, np.array([[1.0, 0.0, 0.0]]), np.array([[0.0, 1.0, 0.0]]))
    e1 = np.cross(helper, n)
    e1 /= np.linalg.norm(e1, axis=1)[:, None]
    e2 = np.cross(n, e1)
    # lines: (ω = 0, u = n/√2) combines the two diagonal lines ±n/2; (−|ω|, (e1 − i e2)/2),
    # (+|ω|, (e1 + i e2)/2)
    omega = np.concatenate([np.zeros_like(mag), -mag, mag])
    u = np.concatenate([n / math.sqrt(2.0) + 0j, 0.5 * (e1 - 1j * e2), 0.5 * (e1 + 1j * e2)])
    return LineSpectrum(omega=omega, u=np.ascontiguousarray(u),
                        weight=np.full(omega.shape[0], float(weight)))


def _gaussian_samples(n_samples, seed, cov):
    m = int(math.log2(max(2, int(n_samples))))
    pts = qmc.Sobol(d=3, scramble=True, seed=np.random.default_rng(seed)).random_base2(m)
    z = norm.ppf(np.clip(pts, 1e-12, 1 - 1e-12))
    # cov may be singular (no nuclei, or planar tensors): use its symmetric square root
    e, v = np.linalg.eigh(cov)
    root = v @ np.diag(np.sqrt(np.clip(e, 0.0, None))) @ v.T
    return z @ root.T


def semiclassical_spectrum(radical: Radical, field_T, n_samples=4096, seed=0) -> LineSpectrum:
    """Line spectrum of one radical in the Schulten–Wolynes approximation.

    Parameters
    ----------
    radical : Radical
    field_T : array_like (3,)
        Static field (T), molecular frame.
    n_samples : int
        Number of hyperfine-field samples (rounded down to a power of 2, Sobol).
    seed : int
        Scrambling seed.
    """
    b = np.asarray(field_T, dtype=np.float64).reshape(3)
    zeeman = (GAMMA_E / G_FREE) * (radical.g_tensor.T @ b)
    if not radical.nuclei:
        return precession_lines(zeeman[None, :], 1.0)
    h = _gaussian_samples(n_samples, seed, hyperfine_covariance(radical))
    return precession_lines(zeeman[None, :] + h, 1.0 / h.shape[0])


def singlet_yield_semiclassical(pair: RadicalPair, field_T, *, n_samples=4096, n_repeats=4,
                                seed=0, tol=1e-6, return_error=False):
    """Schulten–Wolynes singlet yield (approximation), with a sampling standard error.

    Parameters
    ----------
    pair : RadicalPair
        Equal rates, no exchange or dipolar coupling.
    field_T : array_like (3,) or (N, 3)
        Static field(s) (T), molecular frame.
    n_samples : int
        Sobol samples of each radical's hyperfine field per repeat (power of 2).
    n_repeats : int
        Independent scramblings; the mean is returned and their spread gives the
        standard error of the sampling (not of the approximation itself).
    tol : float
        Binning tolerance of the spectral sum (see :mod:`renderer.spin.large`).
    return_error : bool
        Also return the standard error.

    Returns
    -------
    float or ndarray [, standard error of the same shape]
    """
    _check_separable(pair, "the Schulten-Wolynes approximation")
    if int(n_repeats) < 1 or int(n_samples) < 2:
        raise MagretinaError(f"n_samples = {n_samples!r} (>= 2) and n_repeats = {n_repeats!r} "
                             f"(>= 1) are required")
    b = np.asarray(field_T, dtype=np.float64)
    single = b.ndim == 1
    b = b.reshape(-1, 3)
    out = np.empty(len(b))
    err = np.empty(len(b))
    for i, bi in enumerate(b):
        vals = []
        for r in range(int(n_repeats)):
            sa = semiclassical_spectrum(pair.a, bi, n_samples, seed=[seed, r, 0])
            sb = semiclassical_spectrum(pair.b, bi, n_samples, seed=[seed, r, 1])
            phi, _, _ = separable_binned(sa, sb, pair.k_s, tol=tol)
            vals.append(from_singlet_born(phi, pair.singlet_fraction))
        vals = np.array(vals)
        out[i] = vals.mean()
        err[i] = vals.std(ddof=1) / math.sqrt(len(vals)) if len(vals) > 1 else float("nan")
    if single:
        return (float(out[0]), float(err[0])) if return_error else float(out[0])
    return (out, err) if return_error else out
