"""Radical-pair singlet yields under an added oscillating (radio-frequency) field.

The field is B(t) = B₀ + B₁ n̂ cos(2πνt + φ₀).  Radical pairs form at random moments,
so the physical yield is the average over the phase at formation; it is computed

* exactly for one frequency by Floquet theory (:func:`floquet_singlet_yield`): the
  time-periodic Hamiltonian becomes a time-independent one in the extended space
  (Hilbert space) ⊗ (photon number n = −N..N) (Shirley 1965, Phys. Rev. 138:B979),
  U(t₀+τ, t₀) = Σ_n e^{inω(t₀+τ)} ⟨n|e^{−iH_F τ}|0⟩; averaging over t₀ keeps only
  diagonal photon terms, and with the eigen-decomposition H_F = Σ ε_α |α⟩⟨α|

      Φ_S = k_S Σ_αβ X_βα Y_αβ / (i(ε_α − ε_β*)),
      X = R†(1 ⊗ P_S)R,  Y = L₀† ρ₀ L₀  (R, L right/left eigenvectors, L₀ their n = 0 block)

  which for equal rates is a Timmel-like sum with k/(k + i(ε_α − ε_β)).  N grows (1, 2, 3, ...) until
  Φ_S changes by less than a tolerance;
* for several frequencies (broadband noise as a seeded sum of random-phase components)
  by direct propagation (:func:`propagated_singlet_yield`): piecewise-constant
  Hamiltonians on a fine time grid with the decay integral taken exactly within
  each step, averaged over realisations.

Frames: ``RFField.direction`` is in the same frame as the static field it is combined
with (the molecular frame in this module).  Only the electron Zeeman terms (and
nuclear Zeeman terms if a nucleus has γ_n ≠ 0) feel the RF field.  Floquet here works
in the full pair space, so it is meant for small and medium nuclear sets (the
planner estimates the cost).  Outputs are model predictions, not measurements.
This module computes only: the spectrum plot is drawn by :mod:`renderer.plots` and
study-file RF tables are parsed by :mod:`renderer.study.rfconfig`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

import scipy.fft as sfft
from threadpoolctl import ThreadpoolController

from ..errors import MagretinaError
from .hamiltonian import larmor_frequency_Hz, pair_operators, radical_operators, singlet_projector
from .large import BINNING_BOUND_CONST, _check_separable, _lagrange4, from_singlet_born
from .solvers import singlet_yield
from .system import RadicalPair


_BLAS = []


def _single_blas():
    """Context limiting BLAS to one thread (small dense eigenproblems: threads only contend).

    The controller is built once: scanning the loaded libraries costs more than a small
    Floquet solve, and tables call the solver thousands of times.
    """
    if not _BLAS:
        _BLAS.append(ThreadpoolController())
    return _BLAS[0].limit(limits=1, user_api="blas")


# --------------------------------------------------------------------------------------
# plain-data description (also used by study timelines)
# --------------------------------------------------------------------------------------

def _unit(v, name):
    a = np.asarray(v, dtype=np.float64)
    if a.shape != (3,) or not np.all(np.isfinite(a)) or np.linalg.norm(a) == 0:
        raise MagretinaError(f"{name} must be a non-zero finite 3-vector, got {v!r}")
    return tuple((a / np.linalg.norm(a)).tolist())


@dataclass(frozen=True)
class RFField:
    """One oscillating field component B₁ n̂ cos(2πνt + φ₀).

    Parameters
    ----------
    amplitude_T : float
        Peak amplitude B₁ (T), ≥ 0 (the rms value is B₁/√2).
    frequency_Hz : float
        ν (Hz), > 0.
    direction : sequence of 3 float
        Direction n̂ (normalised here), in the frame of the static field it is added to.
    phase : float
        φ₀ (rad).  Yields are averaged over the phase at formation, so φ₀ matters only
        for fixed-phase propagation and for the relative phases of several components.
    """

    amplitude_T: float
    frequency_Hz: float
    direction: tuple = (1.0, 0.0, 0.0)
    phase: float = 0.0

    def __post_init__(self):
        try:
            a = float(self.amplitude_T)
            f = float(self.frequency_Hz)
            p = float(self.phase)
        except (TypeError, ValueError):
            raise MagretinaError(f"RF field: amplitude_T, frequency_Hz and phase must be numbers, "
                                 f"got {self.amplitude_T!r}, {self.frequency_Hz!r}, {self.phase!r}"
                                 ) from None
        if not math.isfinite(a) or a < 0:
            raise MagretinaError(f"RF field amplitude_T = {self.amplitude_T!r} is out of range; "
                                 f"allowed [0, static field) T")
        if not math.isfinite(f) or f <= 0:
            raise MagretinaError(f"RF field frequency_Hz = {self.frequency_Hz!r} is out of range; "
                                 f"allowed (0, inf) Hz")
        if not math.isfinite(p):
            raise MagretinaError(f"RF field phase = {self.phase!r} must be finite (rad)")
        object.__setattr__(self, "amplitude_T", a)
        object.__setattr__(self, "frequency_Hz", f)
        object.__setattr__(self, "phase", p)
        object.__setattr__(self, "direction", _unit(self.direction, "RF field direction"))

    @classmethod
    def from_trade_units(cls, amplitude_nT, frequency_MHz, direction=(1.0, 0.0, 0.0), phase=0.0):
        """Constructor in the trade's units: amplitude in nT, frequency in MHz."""
        return cls(float(amplitude_nT) * 1e-9, float(frequency_MHz) * 1e6, direction, phase)

    @property
    def omega_rad_s(self) -> float:
        return 2.0 * math.pi * self.frequency_Hz

    @property
    def vector_T(self) -> np.ndarray:
        """B₁ n̂ (T), shape (3,)."""
        return self.amplitude_T * np.asarray(self.direction)

    def field_T(self, t_s):
        """The oscillating field at times ``t_s`` (s), shape t.shape + (3,)."""
        t = np.asarray(t_s, dtype=np.float64)
        return np.cos(self.omega_rad_s * t + self.phase)[..., None] * self.vector_T

    def check_against(self, static_field_T):
        """Raise unless B₁ < |B₀| (the weak-perturbation regime these models assume)."""
        b0 = float(np.linalg.norm(np.asarray(static_field_T, dtype=np.float64)))
        if self.amplitude_T >= b0:
            raise MagretinaError(
                f"RF field amplitude_T = {self.amplitude_T:g} T is not below the static field "
                f"|B0| = {b0:g} T: this leaves the weak-perturbation regime the RF models assume; "
                f"allowed [0, {b0:g}) T")

    def with_direction(self, direction) -> "RFField":
        return RFField(self.amplitude_T, self.frequency_Hz, direction, self.phase)

    def describe(self) -> dict:
        return {"amplitude_T": self.amplitude_T, "frequency_Hz": self.frequency_Hz,
                "direction": list(self.direction), "phase": self.phase}


@dataclass(frozen=True)
class RFNoise:
    """Broadband noise as a seeded sum of equal-amplitude random-phase components.

    Parameters
    ----------
    rms_T : float
        Root-mean-square amplitude of the whole noise field (T).
    f_min_Hz, f_max_Hz : float
        Band edges (Hz), 0 < f_min < f_max.
    n_components : int
        Number of components, at the centres of n equal sub-bands; each has peak
        amplitude rms·√(2/n), so the total rms is ``rms_T``.
    direction : sequence of 3 float
        Polarisation (linear, common to all components).
    seed : int
        Seed of the phases (``numpy.random.default_rng``).
    """

    rms_T: float
    f_min_Hz: float
    f_max_Hz: float
    n_components: int = 16
    direction: tuple = (1.0, 0.0, 0.0)
    seed: int = 0

    def __post_init__(self):
        if not (math.isfinite(float(self.rms_T)) and float(self.rms_T) >= 0):
            raise MagretinaError(f"RF noise rms_T = {self.rms_T!r} is out of range; allowed [0, |B0|)")
        lo, hi = float(self.f_min_Hz), float(self.f_max_Hz)
        if not (math.isfinite(lo) and math.isfinite(hi) and 0 < lo < hi):
            raise MagretinaError(f"RF noise band f_min_Hz = {self.f_min_Hz!r}, f_max_Hz = "
                                 f"{self.f_max_Hz!r} is not allowed; need 0 < f_min < f_max")
        n = int(self.n_components)
        if n < 1 or n != self.n_components:
            raise MagretinaError(f"RF noise n_components = {self.n_components!r} must be a "
                                 f"positive integer")
        object.__setattr__(self, "direction", _unit(self.direction, "RF noise direction"))

    def components(self, realisation=0):
        """The components of one realisation: tuple of RFField (seeded by seed, realisation)."""
        rng = np.random.default_rng([int(self.seed), int(realisation)])
        n = int(self.n_components)
        df = (self.f_max_Hz - self.f_min_Hz) / n
        freqs = self.f_min_Hz + (np.arange(n) + 0.5) * df
        phases = rng.uniform(0.0, 2 * np.pi, n)
        amp = float(self.rms_T) * math.sqrt(2.0 / n)
        return tuple(RFField(amp, f, self.direction, p) for f, p in zip(freqs, phases))


def check_single_frequency(components, method="floquet"):
    """Return the single RFField of ``components`` or raise for several frequencies."""
    if isinstance(components, RFField):
        return components
    comps = tuple(components)
    freqs = sorted({c.frequency_Hz for c in comps})
    if len(freqs) > 1:
        raise MagretinaError(
            f"method '{method}' handles one RF frequency; got {len(freqs)} "
            f"({freqs[0]:g} .. {freqs[-1]:g} Hz). Use method 'propagate' for several "
            f"frequencies (broadband noise)")
    if not comps:
        raise MagretinaError("no RF component given")
    total = sum(c.vector_T * np.exp(1j * c.phase) for c in comps)
    # components at one frequency add up to one (possibly elliptical) field; only a
    # common linear polarisation is supported here
    re, im = total.real, total.imag
    if np.linalg.norm(np.cross(re, im)) > 1e-12 * (np.linalg.norm(re) + np.linalg.norm(im)) ** 2:
        raise MagretinaError(f"method '{method}' supports linearly polarised RF only; the "
                             f"components at {freqs[0]:g} Hz combine to an elliptical field")
    vec = re if np.linalg.norm(re) >= np.linalg.norm(im) else im
    amp = float(np.linalg.norm(total))
    if amp == 0:
        return RFField(0.0, freqs[0], comps[0].direction, 0.0)
    return RFField(amp, freqs[0], vec, float(np.angle(np.dot(total, vec) / np.linalg.norm(vec))))


# --------------------------------------------------------------------------------------
# Floquet (one frequency, phase-averaged)
# --------------------------------------------------------------------------------------

def _rho0(pair: RadicalPair, p_s):
    m = pair.nuclear_multiplicity
    p = pair.singlet_fraction
    eye = np.eye(p_s.shape[0])
    return p * p_s / m + (1.0 - p) * (eye - p_s) / (3.0 * m)


def _floquet_once(h0, v, p_s, rho0, omega, n_h, k_s, k_t, equal):
    d = h0.shape[0]
    nb = 2 * n_h + 1
    big = np.zeros((nb * d, nb * d), dtype=np.complex128)
    for j in range(nb):
        n = j - n_h
        sl = slice(j * d, (j + 1) * d)
        big[sl, sl] = h0 + n * omega * np.eye(d)
        if j + 1 < nb:
            nx = slice((j + 1) * d, (j + 2) * d)
            big[sl, nx] = 0.5 * v
            big[nx, sl] = 0.5 * v
    z0 = slice(n_h * d, (n_h + 1) * d)
    if equal:
        eps, r = np.linalg.eigh(big)
        rb = r.reshape(nb, d, nb * d)
        x = np.einsum("nia,ij,njb->ab", rb.conj(), p_s, rb, optimize=True)
        r0 = r[z0]
        y = r0.conj().T @ rho0 @ r0
        den = k_s + 1j * (eps[:, None] - eps[None, :])  # [α, β]
        return float(np.real(np.sum(x.T * y * (k_s / den))))
    # unequal rates: H_eff = H − (i/2)(k_S P_S + k_T P_T) on every photon block
    keff = 0.5 * (k_s * p_s + k_t * (np.eye(d) - p_s))
    for j in range(nb):
        sl = slice(j * d, (j + 1) * d)
        big[sl, sl] -= 1j * keff
    eps, r = np.linalg.eig(big)
    linv = np.linalg.inv(r)           # rows are left eigenvectors L_α† (L† R = 1)
    rb = r.reshape(nb, d, nb * d)
    x = np.einsum("nia,ij,njb->ab", rb.conj(), p_s, rb, optimize=True)
    l0h = linv[:, z0]                 # (α, i) = L_α†[n=0 block]
    y = l0h @ rho0 @ l0h.conj().T     # Y_αβ = L_α^0† ρ0 L_β^0
    den = 1j * (eps[:, None] - eps[None, :].conj())
    return float(np.real(k_s * np.sum(x.T * y / den)))


def floquet_singlet_yield(pair: RadicalPair, field_T, rf: RFField, *, n_harmonics=None,
                          tol=1e-9, max_harmonics=60, return_info=False):
    """Phase-averaged singlet yield under B₀ + B₁ cos(ωt + φ) by Floquet theory (exact).

    Parameters
    ----------
    pair : RadicalPair
        Any rates and couplings; the full pair space (dimension 4M) times 2N+1 photon
        blocks is diagonalised, so keep M modest (see :mod:`renderer.spin.planner`).
    field_T : array_like (3,)
        Static field in the molecular frame (T).
    rf : RFField (or a sequence of components at one frequency)
        Direction in the molecular frame.
    n_harmonics : int, optional
        Fixed photon cut-off N.  By default N = 1, 2, 3, ... until two successive
        values differ by less than ``tol``.
    tol : float
        Convergence tolerance in Φ_S for the automatic cut-off.
    return_info : bool
        Also return {"n_harmonics": N, "change": last change}.

    Returns
    -------
    float [, dict]
    """
    rf = check_single_frequency(rf, "floquet")
    b0 = np.asarray(field_T, dtype=np.float64).reshape(3)
    rf.check_against(b0)
    # small dense eigenproblems: threaded BLAS only adds contention
    with _single_blas():
        return _floquet_auto(pair, b0, rf, n_harmonics, tol, max_harmonics, return_info)


def _floquet_auto(pair, b0, rf, n_harmonics, tol, max_harmonics, return_info):
    ops = pair_operators(pair)
    h0 = ops.hamiltonian(b0)
    v = np.tensordot(rf.vector_T, ops.zeeman, axes=([0], [0]))
    p_s = singlet_projector(pair)
    rho0 = _rho0(pair, p_s)
    equal = pair.equal_rates
    omega = rf.omega_rad_s
    args = (h0, v, p_s, rho0, omega)
    if rf.amplitude_T == 0.0:
        phi = _floquet_once(*args, 0, pair.k_s, pair.k_t, equal)
        return (phi, {"n_harmonics": 0, "change": 0.0}) if return_info else phi
    if n_harmonics is not None:
        n = int(n_harmonics)
        if n < 0:
            raise MagretinaError(f"n_harmonics = {n_harmonics!r} must be >= 0")
        phi = _floquet_once(*args, n, pair.k_s, pair.k_t, equal)
        return (phi, {"n_harmonics": n, "change": float("nan")}) if return_info else phi
    n = 1
    prev = _floquet_once(*args, n, pair.k_s, pair.k_t, equal)
    while True:
        n += 1
        phi = _floquet_once(*args, n, pair.k_s, pair.k_t, equal)
        change = abs(phi - prev)
        if change < tol:
            break
        if n >= max_harmonics:
            raise MagretinaError(
                f"Floquet expansion did not converge to {tol:g} with {n} photon blocks "
                f"(last change {change:.2g}); the RF field is too strong for this method "
                f"(amplitude {rf.amplitude_T:g} T at {rf.frequency_Hz:g} Hz)")
        prev = phi
    return (phi, {"n_harmonics": n, "change": change}) if return_info else phi


def rf_singlet_yield(pair: RadicalPair, field_T, rf, *, method="auto", **kwargs):
    """Phase-averaged RF singlet yield, choosing the Floquet variant.

    ``method``: ``"floquet"`` (whole pair space, any rates and couplings),
    ``"floquet-separable"`` (per radical; equal rates, uncoupled radicals; error bound
    ``tol``), or ``"auto"``: the pair-space form up to pair dimension 256 or when the
    radicals are coupled or rates differ, the per-radical form otherwise.
    """
    if method == "auto":
        sep = pair.equal_rates and not pair.coupled
        method = "floquet-separable" if (sep and pair.dim > 256) else "floquet"
    if method == "floquet":
        kwargs.pop("tol", None)
        return floquet_singlet_yield(pair, field_T, rf, **kwargs)
    if method == "floquet-separable":
        return floquet_separable_yield(pair, field_T, rf, **kwargs)
    raise MagretinaError(f"RF method = {method!r}; allowed 'auto', 'floquet', 'floquet-separable' "
                         f"(several frequencies: propagated_singlet_yield / noise_singlet_yield)")


# --------------------------------------------------------------------------------------
# direct propagation (several frequencies, fixed phases)
# --------------------------------------------------------------------------------------

def propagated_singlet_yield(pair: RadicalPair, field_T, components, *, dt_s=None,
                             t_max_s=None, tail_tol=1e-10, steps_per_period=64):
    """Singlet yield for given RF components with fixed phases, by time propagation.

    The Hamiltonian is held constant on each step (its value at the step's midpoint,
    the exponential midpoint rule, second order in dt) and the Haberkorn decay integral
    k_S ∫ Tr[P_S ρ] dt is taken exactly within each step, so the static part of H needs
    no time resolution; only the RF needs ``steps_per_period`` steps per period of the
    highest frequency.

    Parameters
    ----------
    pair : RadicalPair
    field_T : array_like (3,)
        Static field (T), molecular frame.
    components : sequence of RFField
        Oscillating components (directions in the molecular frame).  Empty: static.
    dt_s, t_max_s : float, optional
        Step and end time (s).  Defaults: one period of the highest frequency divided by
        ``steps_per_period``; t_max such that the untreated remainder of the pair
        population is below ``tail_tol``.

    Returns
    -------
    float
        Φ_S for these phases (average over realisations/phases to get the physical value).
    """
    comps = (components,) if isinstance(components, RFField) else tuple(components)
    b0 = np.asarray(field_T, dtype=np.float64).reshape(3)
    for c in comps:
        c.check_against(b0)
    ops = pair_operators(pair)
    p_s = singlet_projector(pair)
    d = p_s.shape[0]
    rho = _rho0(pair, p_s).astype(np.complex128)
    kmin = min(pair.k_s, pair.k_t) if pair.k_t > 0 else pair.k_s
    if t_max_s is None:
        t_max_s = math.log(1.0 / tail_tol) / kmin
    if dt_s is None:
        fmax = max([c.frequency_Hz for c in comps], default=0.0)
        dt_s = (1.0 / fmax / steps_per_period) if fmax > 0 else t_max_s / 64
    n_steps = int(math.ceil(t_max_s / dt_s))
    dt = t_max_s / n_steps
    equal = pair.equal_rates
    k = pair.k_s
    keff = 0.5 * (pair.k_s * p_s + pair.k_t * (np.eye(d) - p_s))
    phi = 0.0
    for j in range(n_steps):
        tm = (j + 0.5) * dt
        b = b0 + sum((c.field_T(tm) for c in comps), np.zeros(3))
        h = ops.hamiltonian(b)
        if equal:
            # unitary part exactly; the common decay e^{-kt} factors out
            e, v = np.linalg.eigh(h)
            rt = v.conj().T @ rho @ v
            pt = v.conj().T @ p_s @ v
            lam = k + 1j * (e[:, None] - e[None, :])
            phi += float(np.real(np.sum(pt.T * rt * (k * (1 - np.exp(-lam * dt)) / lam))))
            ph = np.exp(-1j * e * dt)
            u = (v * ph) @ v.conj().T
            rho = math.exp(-k * dt) * (u @ rho @ u.conj().T)
        else:
            e, r = np.linalg.eig(h - 1j * keff)
            rinv = np.linalg.inv(r)
            rt = rinv @ rho @ rinv.conj().T
            pt = r.conj().T @ p_s @ r
            lam = 1j * (e[:, None] - e[None, :].conj())
            phi += float(np.real(pair.k_s * np.sum(pt.T * rt * ((1 - np.exp(-lam * dt)) / lam))))
            ph = np.exp(-1j * e * dt)
            u = (r * ph) @ rinv
            rho = u @ rho @ u.conj().T
    return phi


def noise_singlet_yield(pair: RadicalPair, field_T, noise: RFNoise, *, n_realisations=8,
                        **kwargs):
    """Mean singlet yield over seeded realisations of broadband noise, with its standard error.

    Returns
    -------
    (float, float)
        Mean Φ_S and the standard error of the mean over realisations.
    """
    vals = np.array([propagated_singlet_yield(pair, field_T, noise.components(r), **kwargs)
                     for r in range(int(n_realisations))])
    se = float(vals.std(ddof=1) / math.sqrt(len(vals))) if len(vals) > 1 else float("nan")
    return float(vals.mean()), se


# --------------------------------------------------------------------------------------
# geometry helpers, spectra, tables
# --------------------------------------------------------------------------------------

def rf_directions(static_dir, angle_deg, n_psi):
    """Unit vectors at ``angle_deg`` from ``static_dir``, at n_psi equally spaced azimuths.

    Returns
    -------
    ndarray (n_psi, 3)
    """
    z = np.asarray(static_dir, dtype=np.float64)
    z = z / np.linalg.norm(z)
    helper = np.array([1.0, 0.0, 0.0]) if abs(z[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
    x = np.cross(helper, z)
    x /= np.linalg.norm(x)
    y = np.cross(z, x)
    a = math.radians(angle_deg)
    psi = 2 * np.pi * np.arange(int(n_psi)) / int(n_psi)
    return (math.cos(a) * z[None, :] + math.sin(a) * (np.cos(psi)[:, None] * x
                                                      + np.sin(psi)[:, None] * y))


def rf_yield_relative(pair: RadicalPair, field_T, amplitude_T, frequency_Hz, angle_deg,
                      *, n_psi=4, **kwargs):
    """Φ_S with an RF field at a fixed angle to the static field, averaged about B₀.

    In a response table the RF direction relative to the molecule changes with the
    receptor's orientation; fixing its angle to B₀ and averaging its azimuth about B₀
    (n_psi equally spaced values; exact for the B₁² term, which has azimuthal harmonics
    of order ≤ 2, when n_psi ≥ 3) gives a yield that depends on the B₀ direction only.

    Parameters
    ----------
    field_T : array_like (3,) or (N, 3)
        Static field(s), molecular frame (T).
    amplitude_T, frequency_Hz : float
        RF amplitude and frequency.
    angle_deg : float
        Angle between B₁ and B₀ (0 = parallel, 90 = perpendicular).

    Returns
    -------
    float or ndarray (N,)
    """
    b = np.asarray(field_T, dtype=np.float64)
    single = b.ndim == 1
    b = b.reshape(-1, 3)
    out = np.empty(len(b))
    n_eff = 1 if angle_deg % 180 == 0 else int(n_psi)
    for i, bi in enumerate(b):
        vals = [rf_singlet_yield(pair, bi, RFField(amplitude_T, frequency_Hz, d), **kwargs)
                for d in rf_directions(bi, angle_deg, n_eff)]
        out[i] = float(np.mean(vals))
    return float(out[0]) if single else out


@dataclass(frozen=True)
class ResonanceSpectrum:
    """ΔΦ_S against RF frequency at a fixed geometry.

    Attributes
    ----------
    frequency_Hz : ndarray (F,)
    phi_s : ndarray (F,)
        Singlet yield with the RF on.
    phi_static : float
        Singlet yield with the RF off.
    larmor_Hz : float
        Free-electron Larmor frequency γ_e|B₀|/2π, for reference.
    """

    frequency_Hz: np.ndarray
    phi_s: np.ndarray
    phi_static: float
    larmor_Hz: float
    meta: dict

    @property
    def delta(self) -> np.ndarray:
        return self.phi_s - self.phi_static

    def to_dict(self) -> dict:
        return {"frequency_Hz": self.frequency_Hz.tolist(), "phi_s": self.phi_s.tolist(),
                "delta_phi_s": self.delta.tolist(), "phi_static": self.phi_static,
                "larmor_Hz": self.larmor_Hz, **self.meta}


def resonance_spectrum(pair: RadicalPair, field_T, amplitude_T, frequencies_Hz, rf_direction,
                       *, progress=None, **kwargs):
    """Singlet yield against RF frequency at fixed field and RF direction (molecular frame).

    Parameters
    ----------
    field_T : array_like (3,)
    amplitude_T : float
    frequencies_Hz : array_like (F,)
    rf_direction : array_like (3,)
    progress : callable, optional
        Called with 1 after each frequency.

    Returns
    -------
    ResonanceSpectrum
    """
    b0 = np.asarray(field_T, dtype=np.float64).reshape(3)
    f = np.asarray(frequencies_Hz, dtype=np.float64).reshape(-1)
    vals = np.empty(len(f))
    for i, fi in enumerate(f):
        vals[i] = rf_singlet_yield(pair, b0, RFField(amplitude_T, fi, rf_direction), **kwargs)
        if progress is not None:
            progress(1)
    static = float(singlet_yield(pair, b0))
    meta = {"field_T": b0.tolist(), "amplitude_T": float(amplitude_T),
            "rf_direction": list(_unit(rf_direction, "rf_direction")),
            "note": "model prediction (phase-averaged Floquet), not a measurement"}
    return ResonanceSpectrum(f, vals, static, larmor_frequency_Hz(np.linalg.norm(b0)), meta)


# --------------------------------------------------------------------------------------
# Floquet per radical (equal rates, uncoupled radicals): larger nuclear sets
# --------------------------------------------------------------------------------------

def _radical_floquet(radical, b0, rf, n_h):
    """Extended-space eigen-decomposition of one radical: (ε, Y (3, F, F), X(j) (3, F, F), Z)."""
    ops = radical_operators(radical)
    h0 = ops.hamiltonian(b0)
    v = np.tensordot(rf.vector_T, ops.zeeman, axes=([0], [0]))
    d = h0.shape[0]
    nb = 2 * n_h + 1
    big = np.zeros((nb * d, nb * d), dtype=np.complex128)
    for j in range(nb):
        sl = slice(j * d, (j + 1) * d)
        big[sl, sl] = h0 + (j - n_h) * rf.omega_rad_s * np.eye(d)
        if j + 1 < nb:
            nx = slice((j + 1) * d, (j + 2) * d)
            big[sl, nx] = 0.5 * v
            big[nx, sl] = 0.5 * v
    eps, u = np.linalg.eigh(big)
    ub = u.reshape(nb, d, nb * d)
    u0 = ub[n_h]
    y = np.einsum("ia,qij,jb->qab", u0.conj(), ops.s, u0, optimize=True)

    def x(j):
        out = np.zeros((3, nb * d, nb * d), dtype=np.complex128)
        for n in range(max(0, -j), min(nb, nb - j)):
            out += np.einsum("ia,pij,jb->pab", ub[n].conj(), ops.s, ub[n + j], optimize=True)
        return out

    return eps, y, x, radical.nuclear_multiplicity


def floquet_separable_yield(pair: RadicalPair, field_T, rf: RFField, *, n_harmonics=None,
                            tol=1e-8, conv_tol=1e-9, max_harmonics=12, return_info=False):
    """Phase-averaged RF singlet yield from per-radical Floquet spectra (equal rates, uncoupled).

    Each radical's propagator is expanded as in :func:`floquet_singlet_yield`; its
    spin correlation R_pq(τ; t₀) = Σ_j e^{ijωt₀} R^{(j)}_pq(τ) has lines at
    ε_α − ε_β − jω with weights X^{(j)}_{p,βα} Y_{q,αβ}/Z, X^{(j)}_p = Σ_n U_n† S_p U_{n+j},
    Y_q = U₀† S_q U₀.  Averaging over the formation phase pairs harmonic j of A with −j
    of B, and the pair sum is done by the binned convolution of
    :mod:`renderer.spin.large` with complex weights; the returned bound covers the binning.
    Cost grows with (dim A)³ and (dim B)³ times (2N+1)³, not with the pair dimension.
    The default bound 1e-8 sits well below typical RF effects (ΔΦ_S ~ 1e-7..1e-4 for
    hundreds of nT) and costs no more than 1e-6 here.

    Returns
    -------
    float [, dict with "bound", "n_harmonics", "change"]
    """
    _check_separable(pair, "per-radical Floquet")
    rf = check_single_frequency(rf, "floquet")
    b0 = np.asarray(field_T, dtype=np.float64).reshape(3)
    rf.check_against(b0)
    k = pair.k_s
    with _single_blas():
        def once(n_h):
            fa = _radical_floquet(pair.a, b0, rf, n_h)
            fb = _radical_floquet(pair.b, b0, rf, n_h)
            js = range(-2 * n_h, 2 * n_h + 1)
            w = rf.omega_rad_s
            lines = {}
            tot = 0.0
            for j in js:
                for side, (eps, y, x, z), jj in (("a", fa, j), ("b", fb, -j)):
                    if (side, jj) in lines:
                        continue
                    xj = x(jj)
                    om = (eps[:, None] - eps[None, :] - jj * w).ravel()
                    wts = np.stack([(xj[p].T * y[q]).ravel() / z for p in range(3) for q in range(3)])
                    lines[(side, jj)] = (om, wts)
            # drop negligible lines (far photon blocks); their weight enters the bound
            dropped = {}
            for key, (om, wts) in list(lines.items()):
                mag = np.abs(wts).sum(axis=0)
                keep = mag > 1e-13 * max(float(mag.max()), 1e-300)
                dropped[key] = float(mag[~keep].sum())
                lines[key] = (om[keep], wts[:, keep])
            extra = 0.0
            for j in js:
                sa = np.abs(lines[("a", j)][1]).sum(axis=1)
                sb = np.abs(lines[("b", -j)][1]).sum(axis=1)
                tot += float(np.dot(sa, sb))
                extra += dropped[("a", j)] * float(sb.sum()) + dropped[("b", -j)] * float(sa.sum()) \
                    + dropped[("a", j)] * dropped[("b", -j)]
            c4 = BINNING_BOUND_CONST * 4.0 / 9.0
            budget = tol - extra if extra < 0.5 * tol else 0.5 * tol
            h = k * (budget / (c4 * max(tot, 1e-300))) ** 0.25
            span = max(float(np.max(np.abs(v[0]))) if v[0].size else 0.0 for v in lines.values())
            lo = int(np.floor(-span / h)) - 2
            n = 2 * (-lo) + 2
            m = sfft.next_fast_len(2 * n - 1)
            z = (np.arange(2 * n - 1) + 2 * lo) * h
            kern = k / (k + 1j * z)
            # Σ_j Σ_pq (A_jpq ⊛ B_-jpq) accumulated in the Fourier domain: one inverse FFT
            acc = np.zeros(m, dtype=np.complex128)
            for j in js:
                ga = sfft.fft(_bin_complex(*lines[("a", j)], h, lo, n), m, axis=1)
                gb = sfft.fft(_bin_complex(*lines[("b", -j)], h, lo, n), m, axis=1)
                acc += np.sum(ga * gb, axis=0)
            conv = sfft.ifft(acc)[: 2 * n - 1]
            total = float(np.real(np.dot(conv, kern)))
            bound = c4 * tot * (h / k) ** 4 + extra
            return 0.25 + total, bound

        if n_harmonics is not None:
            phi, bound = once(int(n_harmonics))
            info = {"bound": bound, "n_harmonics": int(n_harmonics), "change": float("nan")}
        else:
            n_h = 1
            prev, _ = once(n_h)
            while True:
                n_h += 1
                phi, bound = once(n_h)
                change = abs(phi - prev)
                if change < conv_tol + 2 * bound:
                    break
                if n_h >= max_harmonics:
                    raise MagretinaError(f"per-radical Floquet did not converge with {n_h} photon "
                                         f"blocks (last change {change:.2g}); RF too strong")
                prev = phi
            info = {"bound": bound, "n_harmonics": n_h, "change": change}
    phi = from_singlet_born(phi, pair.singlet_fraction)
    return (phi, info) if return_info else phi


def _bin_complex(omega, weights, h, lo_index, n):
    """Spread complex line weights (C, L) onto a grid with 4-point Lagrange weights → (C, n)."""
    x = omega / h
    i0 = np.floor(x).astype(np.int64)
    t = x - i0
    out = np.zeros((weights.shape[0], n), dtype=np.complex128)
    for off, lw in zip((-1, 0, 1, 2), _lagrange4(t)):
        idx = i0 + off - lo_index
        for c in range(weights.shape[0]):
            pw = weights[c] * lw
            out[c] += np.bincount(idx, weights=pw.real, minlength=n)
            out[c] += 1j * np.bincount(idx, weights=pw.imag, minlength=n)
    return out
