"""Exact singlet yields for radical pairs with many nuclei (Hilbert dimension 10⁵ and more).

For equal recombination rates and no inter-radical coupling the singlet yield only
needs each radical's own eigen-decomposition (the separable form, Lee et al. 2014,
J. R. Soc. Interface, supplementary §1).  Written in the two eigenbases it is a
double sum over *lines*: every pair (m, n) of eigenstates of radical A gives a line
at ω = E_m − E_n with the vector u = ⟨n|S|m⟩, likewise (ω', v) for radical B, and

    Φ_S = 1/4 + (1/(Z_A Z_B)) Σ_lines Σ_lines' |u·v|² k² / (k² + (ω + ω')²)

(Z the nuclear multiplicities).  This module evaluates that sum two ways:

* :func:`separable_direct` — the sum term by term (numba, parallel): exact, cost
  (dim A)²(dim B)²; the reference;
* :func:`separable_binned` — both line spectra are spread onto a common frequency
  grid of spacing h with 4-point Lagrange weights, convolved by FFT, and summed
  against the Lorentzian.  This equals the exact sum with the kernel replaced by its
  tensor-product cubic interpolant, so the error is bounded a priori by
  (9/4)·(1 + 5/4)·(9/16)·(h/k)⁴ (see :func:`binning_error_bound`); h is chosen from
  the requested tolerance.  Cost: the eigen-decompositions plus O(N log N).

Symmetry-equivalent nuclei (identical spin and tensor, e.g. a methyl group) are
combined first into total-spin blocks, which makes each radical a weighted mixture
of smaller radicals (:func:`radical_blocks`).  Not for coupled radicals or unequal
rates: use the Liouville solver or :mod:`renderer.spin.montecarlo`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from itertools import product

import numba
import numpy as np
from scipy.signal import fftconvolve
from threadpoolctl import threadpool_limits

from ..errors import MagretinaError
from . import separable
from .hamiltonian import radical_operators
from .system import Nucleus, Radical, RadicalPair

#: Constant C in the a-priori binning bound |error| ≤ C (h/k)⁴ (derived in
#: :func:`binning_error_bound`).
BINNING_BOUND_CONST = (9.0 / 4.0) * (1.0 + 1.25) * (9.0 / 16.0)


# --------------------------------------------------------------------------------------
# equivalent nuclei
# --------------------------------------------------------------------------------------

def total_spin_multiplicities(spin, n):
    """Decomposition of n equivalent spins ``spin`` into total spins.

    Parameters
    ----------
    spin : float
        Spin quantum number of each nucleus (multiple of 1/2).
    n : int
        Number of nuclei.

    Returns
    -------
    dict
        {J: c_J}: the product space splits into c_J copies of total spin J, so that
        Σ_J c_J (2J + 1) = (2I + 1)ⁿ.
    """
    two_i = int(round(2 * spin))
    # count states by 2M: coefficients of (x^-2I + x^(-2I+2) + ... + x^2I)^n
    counts = np.array([1], dtype=object)
    single = np.ones(two_i + 1, dtype=object)
    for _ in range(n):
        counts = np.convolve(counts, single)
    two_m = np.arange(-n * two_i, n * two_i + 1, 2)
    by_m = dict(zip(two_m.tolist(), counts.tolist()))
    out = {}
    for tm in range(n * two_i, -1, -2):
        c = by_m.get(tm, 0) - by_m.get(tm + 2, 0)
        if c:
            out[tm / 2] = int(c)
    return out


def _nucleus_key(nuc: Nucleus):
    return (nuc.spin, nuc.gamma_rad_s_T, tuple(np.round(nuc.hyperfine_mT, 12).ravel().tolist()))


@lru_cache(maxsize=64)
def radical_blocks(radical: Radical):
    """Split a radical into total-spin blocks of its groups of equivalent nuclei.

    Nuclei with the same spin, gyromagnetic ratio and hyperfine tensor (to 1e-12 mT)
    form a group; H depends on the group only through its total spin J (the tensor is
    common), so the radical is a mixture of radicals in which each group is replaced by
    one nucleus of spin J (dropped when J = 0).

    Returns
    -------
    tuple of (float, Radical)
        (weight, block radical) with weight = (copies · block nuclear multiplicity) / Z,
        summing to 1.  A radical without equivalent nuclei returns ((1.0, radical),).
        Cached per Radical object, so the blocks' operators are built once.
    """
    groups = {}
    order = []
    for nuc in radical.nuclei:
        key = _nucleus_key(nuc)
        if key not in groups:
            groups[key] = []
            order.append(key)
        groups[key].append(nuc)
    if all(len(groups[k]) == 1 for k in order):
        return ((1.0, radical),)
    choices = []
    for key in order:
        members = groups[key]
        if len(members) == 1:
            choices.append([(1, members[0])])
            continue
        first = members[0]
        label = "+".join(m.name for m in members if m.name) or "group"
        opts = []
        for j, c in total_spin_multiplicities(first.spin, len(members)).items():
            nuc = None if j == 0 else Nucleus(j, first.hyperfine_mT, name=f"{label}(J={j:g})",
                                              gamma_rad_s_T=first.gamma_rad_s_T)
            opts.append((c, nuc))
        choices.append(opts)
    z = radical.nuclear_multiplicity
    blocks = []
    for combo in product(*choices):
        copies = 1
        nuclei = []
        for c, nuc in combo:
            copies *= c
            if nuc is not None:
                nuclei.append(nuc)
        sub = Radical(nuclei=tuple(nuclei), g=radical.g, name=radical.name)
        blocks.append((copies * sub.nuclear_multiplicity / z, sub))
    return tuple(blocks)


# --------------------------------------------------------------------------------------
# line spectra of one radical
# --------------------------------------------------------------------------------------

@dataclass(frozen=True)
class LineSpectrum:
    """Spin-correlation lines of one radical at one field.

    Attributes
    ----------
    omega : ndarray (L,)
        Line frequencies E_m − E_n (rad/s).
    u : ndarray (L, 3) complex
        ⟨n|S_p|m⟩ for p = x, y, z.
    weight : ndarray (L,)
        Per-line factor (block weight / block nuclear multiplicity); the radical's
        correlation function is R_pq(t) = Σ weight u_p ū_q e^{−iωt}.
    """

    omega: np.ndarray
    u: np.ndarray
    weight: np.ndarray

    @property
    def n_lines(self) -> int:
        return self.omega.shape[0]

    @property
    def span(self) -> float:
        """max |ω| (rad/s)."""
        return float(np.max(np.abs(self.omega))) if self.n_lines else 0.0

    def total_weight(self) -> float:
        """Σ weight·|u|²; equals 3/2 for a complete quantum spectrum (Σ_p Tr S_p² / Z)."""
        return float(np.sum(self.weight * np.sum(np.abs(self.u) ** 2, axis=1)))


def spectrum_from_eig(energies, vectors, factor, drop_below=0.0):
    """Lines of one (block) radical from its eigen-decomposition.

    Parameters
    ----------
    energies : ndarray (D,)
        Eigenvalues (rad/s).
    vectors : ndarray (D, D)
        Eigenvectors as columns, in a basis with the electron first in Kronecker order
        (rows 0..D/2−1 electron α, rows D/2.. electron β).
    factor : float
        Weight given to every line (block weight / block nuclear multiplicity).
    drop_below : float
        Lines with |u|² ≤ this are dropped (0 keeps all but exact zeros); the dropped
        weight is returned so that callers can bound its effect.

    Returns
    -------
    (LineSpectrum, float)
        The lines and the dropped weight factor·Σ|u|².
    """
    d = energies.shape[0]
    z = d // 2
    va, vb = vectors[:z], vectors[z:]
    # S = s ⊗ 1_N with the electron first, so V†S_pV needs only two products:
    # V†S_zV = (Va†Va − Vb†Vb)/2 = Va†Va − 1/2, V†S_xV = Re-part of Va†Vb, ...
    aa = va.conj().T @ va
    ab = va.conj().T @ vb
    sx = 0.5 * (ab + ab.conj().T)
    sy = -0.5j * (ab - ab.conj().T)
    sz = aa - 0.5 * np.eye(d)
    # line (n, m): frequency E_m − E_n, u_p = (S_p)_{nm}
    omega = (energies[None, :] - energies[:, None]).ravel()
    u = np.stack([sx.ravel(), sy.ravel(), sz.ravel()], axis=1)
    mag = np.sum(u.real ** 2 + u.imag ** 2, axis=1)
    keep = mag > drop_below
    dropped = float(factor * np.sum(mag[~keep]))
    if not np.all(keep):
        u = u[keep]
        omega = omega[keep]
    return LineSpectrum(omega=np.ascontiguousarray(omega), u=np.ascontiguousarray(u),
                        weight=np.full(u.shape[0], float(factor))), dropped


def radical_spectrum(radical: Radical, field_T, *, use_blocks=True):
    """The line spectrum of one radical in a static field.

    Parameters
    ----------
    radical : Radical
    field_T : array_like (3,)
        Field in the molecular frame (T).
    use_blocks : bool
        Combine equivalent nuclei into total-spin blocks first (exact; faster).

    Returns
    -------
    LineSpectrum
    """
    b = np.asarray(field_T, dtype=np.float64).reshape(3)
    blocks = radical_blocks(radical) if use_blocks else ((1.0, radical),)
    parts = []
    for w, sub in blocks:
        ops = radical_operators(sub)
        e, v = np.linalg.eigh(ops.hamiltonian(b))
        spec, _ = spectrum_from_eig(e, v, w / sub.nuclear_multiplicity)
        parts.append(spec)
    return concat_spectra(parts)


def concat_spectra(parts):
    """One LineSpectrum from several (a mixture of blocks or samples)."""
    return LineSpectrum(omega=np.concatenate([p.omega for p in parts]),
                        u=np.concatenate([p.u for p in parts]),
                        weight=np.concatenate([p.weight for p in parts]))


# --------------------------------------------------------------------------------------
# the double sum
# --------------------------------------------------------------------------------------

@numba.njit(parallel=True, cache=True, fastmath=False)
def _direct_kernel(wa, ua, wb, ub, ga, gb, k):  # pragma: no cover - compiled
    na = wa.shape[0]
    nb = wb.shape[0]
    k2 = k * k
    partial = np.zeros(na)
    for i in numba.prange(na):
        ux = ua[i, 0]
        uy = ua[i, 1]
        uz = ua[i, 2]
        w0 = wa[i]
        acc = 0.0
        for j in range(nb):
            dot = ux * ub[j, 0] + uy * ub[j, 1] + uz * ub[j, 2]
            om = w0 + wb[j]
            acc += gb[j] * (dot.real * dot.real + dot.imag * dot.imag) / (k2 + om * om)
        partial[i] = ga[i] * acc
    return k2 * partial.sum()


def separable_direct(spec_a: LineSpectrum, spec_b: LineSpectrum, k: float) -> float:
    """Singlet yield by the direct double sum over the lines of both radicals (exact).

    Parameters
    ----------
    spec_a, spec_b : LineSpectrum
    k : float
        Common recombination rate k_S = k_T (s⁻¹).

    Returns
    -------
    float
        Φ_S of a singlet-born pair.  Cost ∝ n_lines(A) · n_lines(B).
    """
    s = _direct_kernel(spec_a.omega, spec_a.u, spec_b.omega, spec_b.u,
                       spec_a.weight, spec_b.weight, float(k))
    return 0.25 + float(s)


def binning_error_bound(h, k, total_a=1.5, total_b=1.5):
    """A-priori bound on |Φ_binned − Φ_exact| for grid spacing h (rad/s) and rate k.

    Derivation: binning both spectra with 4-point Lagrange weights makes the sum exact
    for the tensor-product cubic interpolant P_x P_y f of f(x, y) = k²/(k² + (x+y)²).
    On the middle interval the cubic Lagrange remainder is ≤ (9/16) h⁴ max|f⁗|/4! and
    the Lebesgue constant is 5/4, so |f − P_x P_y f| ≤ (1 + 5/4)(9/16)(h/k)⁴ using
    |dⁿ/dωⁿ Re k/(k + iω)| ≤ n!/kⁿ.  The lines' weights satisfy
    Σ|u·v|² ≤ (Σ_A |u|²)(Σ_B |v|²) = (3/2)(3/2) for complete quantum spectra.
    """
    return float(total_a * total_b * (1.0 + 1.25) * (9.0 / 16.0) * (h / k) ** 4)


def spacing_for_tolerance(tol, k, total_a=1.5, total_b=1.5):
    """Largest grid spacing h (rad/s) whose :func:`binning_error_bound` is ≤ ``tol``."""
    c = total_a * total_b * (1.0 + 1.25) * (9.0 / 16.0)
    return float(k * (tol / c) ** 0.25)


def _lagrange4(t):
    """Cubic Lagrange weights for nodes −1, 0, 1, 2 at fractional position t ∈ [0, 1)."""
    return (-t * (t - 1) * (t - 2) / 6, (t + 1) * (t - 1) * (t - 2) / 2,
            -(t + 1) * t * (t - 2) / 2, (t + 1) * t * (t - 1) / 6)


def _bin(spec: LineSpectrum, h, lo_index, n):
    """Spread the 6 independent products u_p ū_q onto the grid; returns (6, n) complex."""
    x = spec.omega / h
    i0 = np.floor(x).astype(np.int64)
    t = x - i0
    ws = _lagrange4(t)
    u = spec.u
    g = spec.weight
    prods = [g * np.abs(u[:, 0]) ** 2, g * np.abs(u[:, 1]) ** 2, g * np.abs(u[:, 2]) ** 2,
             g * u[:, 0] * u[:, 1].conj(), g * u[:, 0] * u[:, 2].conj(), g * u[:, 1] * u[:, 2].conj()]
    out = np.zeros((6, n), dtype=np.complex128)
    for off, w in zip((-1, 0, 1, 2), ws):
        idx = i0 + off - lo_index
        for c, p in enumerate(prods):
            pw = p * w
            if c < 3:
                out[c] += np.bincount(idx, weights=pw.real, minlength=n)
            else:
                out[c] += np.bincount(idx, weights=pw.real, minlength=n)
                out[c] += 1j * np.bincount(idx, weights=pw.imag, minlength=n)
    return out


def separable_binned(spec_a: LineSpectrum, spec_b: LineSpectrum, k: float, tol=1e-6):
    """Singlet yield by binned spectral convolution, with an a-priori error bound.

    Parameters
    ----------
    spec_a, spec_b : LineSpectrum
    k : float
        Common recombination rate (s⁻¹).
    tol : float
        Requested bound on |Φ − Φ_exact|; sets the grid spacing.

    Returns
    -------
    (float, float, float)
        Φ_S (singlet-born), the error bound, the grid spacing h (rad/s).
    """
    if not tol > 0:
        raise MagretinaError(f"tol = {tol!r} must be > 0")
    ta, tb = max(spec_a.total_weight(), 1e-300), max(spec_b.total_weight(), 1e-300)
    h = spacing_for_tolerance(tol, k, ta, tb)
    lo_a = int(math.floor(-spec_a.span / h)) - 2
    lo_b = int(math.floor(-spec_b.span / h)) - 2
    na = 2 * (-lo_a) + 2
    nb = 2 * (-lo_b) + 2
    ga = _bin(spec_a, h, lo_a, na)
    gb = _bin(spec_b, h, lo_b, nb)
    z = (np.arange(na + nb - 1) + lo_a + lo_b) * h
    kern = k * k / (k * k + z * z)
    total = 0.0
    for c in range(6):
        if c < 3:
            conv = fftconvolve(ga[c].real, gb[c].real)
            total += float(np.dot(conv, kern))
        else:
            conv = fftconvolve(ga[c], gb[c])
            total += 2.0 * float(np.dot(conv.real, kern))
    return 0.25 + total, binning_error_bound(h, k, ta, tb), h


# --------------------------------------------------------------------------------------
# public entry point
# --------------------------------------------------------------------------------------

def _check_separable(pair: RadicalPair, what):
    if pair.coupled:
        raise MagretinaError(f"{what} needs radicals without exchange or dipolar coupling "
                             f"(exchange_mT = {pair.exchange_mT}, dipolar set: "
                             f"{pair.dipolar_mT is not None}); use method 'liouville' or "
                             f"'montecarlo' for coupled radicals")
    if not pair.equal_rates:
        raise MagretinaError(f"{what} needs equal rates k_s = k_t (got k_s = {pair.k_s:g}, "
                             f"k_t = {pair.k_t:g} s^-1); use method 'liouville' or 'montecarlo'")


def from_singlet_born(phi_singlet_born, singlet_fraction):
    """Φ_S for a mixed start from the singlet-born value (equal rates).

    With ρ0 = p P_S/M + (1 − p) P_T/(3M) and equal rates, Tr[P_S U P_T U†] =
    Tr[P_S] − Tr[P_S U P_S U†], hence Φ_S(triplet-born) = (1 − Φ_S(singlet-born))/3.
    """
    p = float(singlet_fraction)
    return p * phi_singlet_born + (1.0 - p) * (1.0 - phi_singlet_born) / 3.0


def singlet_yield_spectral(pair: RadicalPair, field_T, *, tol=1e-6, method="binned",
                           use_blocks=True, return_bound=False):
    """Exact (to ``tol``) singlet yield of a large separable radical pair.

    Parameters
    ----------
    pair : RadicalPair
        Equal rates, no exchange or dipolar coupling.
    field_T : array_like, shape (3,) or (N, 3)
        Field vectors in the molecular frame (T).
    tol : float
        Bound on the absolute error of Φ_S for ``method="binned"``.
    method : {"binned", "direct"}
        Binned spectral convolution (fast, bounded error) or the direct double sum.
    use_blocks : bool
        Combine equivalent nuclei into total-spin blocks (exact).
    return_bound : bool
        Also return the error bound per direction (0 for "direct").

    Returns
    -------
    float or ndarray (N,) [, bound of the same shape]
    """
    _check_separable(pair, "the spectral solver")
    if method not in ("binned", "direct"):
        raise MagretinaError(f"method = {method!r}; allowed 'binned' or 'direct'")
    b = np.asarray(field_T, dtype=np.float64)
    single = b.ndim == 1
    b = b.reshape(-1, 3)
    out = np.empty(b.shape[0])
    bound = np.zeros(b.shape[0])
    for i, bi in enumerate(b):
        # these eigenproblems are small: threaded BLAS only adds contention (measured 25x
        # slower on a loaded 2-core machine), so run them single-threaded
        with threadpool_limits(1, user_api="blas"):
            sa = radical_spectrum(pair.a, bi, use_blocks=use_blocks)
            sb = radical_spectrum(pair.b, bi, use_blocks=use_blocks)
            if method != "direct":
                phi, bound[i], _ = separable_binned(sa, sb, pair.k_s, tol=tol)
        if method == "direct":
            phi = separable_direct(sa, sb, pair.k_s)
        out[i] = from_singlet_born(phi, pair.singlet_fraction)
    if single:
        return (float(out[0]), float(bound[0])) if return_bound else float(out[0])
    return (out, bound) if return_bound else out


# --------------------------------------------------------------------------------------
# solver-module interface (as renderer.spin.solvers expects: applicable, yields)
# --------------------------------------------------------------------------------------

NAME = "spectral"
#: Error bound used when this module runs as a registered solver.
DEFAULT_TOL = 1e-6


def applicable(pair: RadicalPair):
    """(ok, reason): the separable solver's domain (equal rates, no inter-radical coupling)."""
    return separable.applicable(pair)


def yields(pair: RadicalPair, fields_T, progress=None):
    """Φ_S, Φ_T for field vectors (K, 3) (T), error ≤ DEFAULT_TOL each (solver interface)."""
    b = np.asarray(fields_T, dtype=np.float64).reshape(-1, 3)
    out = np.empty(len(b))
    for i, bi in enumerate(b):
        out[i] = singlet_yield_spectral(pair, bi, tol=DEFAULT_TOL)
        if progress is not None:
            progress(1)
    return out, 1.0 - out
