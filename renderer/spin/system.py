"""Radical-pair descriptions: nuclei, radicals and pairs as small frozen dataclasses.

This module states *what* is simulated, in the trade's units (hyperfine couplings and
exchange/dipolar couplings in mT, rates in s⁻¹), and validates it at construction:
tensors must be finite, 3×3 and symmetric, rates non-negative, spin quantum numbers
multiples of 1/2.  It does not build Hamiltonians (:mod:`.hamiltonian`), solve
anything (:mod:`.solvers`) or estimate costs (:mod:`.planner`).

Frames: every tensor is given in one common *molecular frame* (the receptor frame;
its z axis is the receptor axis that axial responses refer to).  Kronecker order of
a radical's space: the electron first, then its nuclei in list order; the pair's
space is (space of A) ⊗ (space of B).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
import scipy.constants as sc

from ..errors import MagretinaError
from .operators import check_spin, multiplicity

#: Free-electron g-factor |g_e| (CODATA, from scipy.constants).
G_FREE = abs(sc.physical_constants["electron g factor"][0])


def _freeze(a):
    a = np.array(a, dtype=np.float64, copy=True)
    a.setflags(write=False)
    return a


def check_tensor(t, name, *, rtol=1e-9, atol=1e-12):
    """Validate a 3×3 real symmetric finite tensor; return it as a read-only float array.

    Parameters
    ----------
    t : array_like
        Candidate tensor (mT).
    name : str
        How it is called in error messages (e.g. ``"radical a nucleus 'N5' hyperfine_mT"``).
    """
    try:
        a = np.asarray(t, dtype=np.float64)
    except (TypeError, ValueError):
        raise MagretinaError(f"{name} must be a 3x3 array of numbers, got {t!r}") from None
    if a.shape == ():
        raise MagretinaError(f"{name} must be a 3x3 tensor; for an isotropic coupling use "
                             f"Nucleus.isotropic(spin, a_mT), got the scalar {float(a)!r}")
    if a.shape != (3, 3):
        raise MagretinaError(f"{name} must have shape (3, 3), got {a.shape}")
    if not np.all(np.isfinite(a)):
        raise MagretinaError(f"{name} must be finite, got {a.tolist()}")
    asym = float(np.max(np.abs(a - a.T)))
    if asym > atol + rtol * float(np.max(np.abs(a))):
        raise MagretinaError(f"{name} must be symmetric; |A - A^T| reaches {asym:.3g} mT "
                             f"in {a.tolist()}")
    return _freeze(0.5 * (a + a.T))


def _check_rotation(rotation, name):
    if hasattr(rotation, "as_matrix"):
        r = np.asarray(rotation.as_matrix(), dtype=np.float64)
    else:
        r = np.asarray(rotation, dtype=np.float64)
    if r.shape != (3, 3) or not np.all(np.isfinite(r)):
        raise MagretinaError(f"{name} must be a 3x3 rotation matrix or a scipy Rotation")
    if np.max(np.abs(r @ r.T - np.eye(3))) > 1e-9 or np.linalg.det(r) < 0:
        raise MagretinaError(f"{name} is not a proper rotation matrix (R R^T != I or det < 0)")
    return r


@dataclass(frozen=True, eq=False)
class Nucleus:
    """One magnetic nucleus with its hyperfine tensor.

    Parameters
    ----------
    spin : float
        Nuclear spin quantum number I (0.5 for 1H, 1 for 14N, ...).
    hyperfine_mT : array_like, shape (3, 3)
        Hyperfine tensor A in mT in the molecular frame, H = γ_e S·A·I (converted to
        rad/s with the free-electron γ_e, the trade's convention for couplings in mT).
    name : str
        Label (e.g. ``"N5"``).
    gamma_rad_s_T : float
        Nuclear gyromagnetic ratio (rad s⁻¹ T⁻¹) for the nuclear Zeeman term
        H = −γ_n B·I.  0 (default) neglects it, as is common practice for Earth-strength
        fields.
    """

    spin: float
    hyperfine_mT: np.ndarray
    name: str = ""
    gamma_rad_s_T: float = 0.0

    def __post_init__(self):
        label = f"nucleus {self.name!r}" if self.name else "nucleus"
        object.__setattr__(self, "spin", check_spin(self.spin, f"{label} spin"))
        object.__setattr__(self, "hyperfine_mT", check_tensor(self.hyperfine_mT,
                                                              f"{label} hyperfine_mT"))
        g = float(self.gamma_rad_s_T)
        if not math.isfinite(g):
            raise MagretinaError(f"{label} gamma_rad_s_T must be finite, got {self.gamma_rad_s_T!r}")
        object.__setattr__(self, "gamma_rad_s_T", g)

    @classmethod
    def isotropic(cls, spin, a_mT, name="", gamma_rad_s_T=0.0) -> "Nucleus":
        """A nucleus with isotropic coupling a (mT): A = a·1."""
        a = float(a_mT)
        return cls(spin, a * np.eye(3), name=name, gamma_rad_s_T=gamma_rad_s_T)

    @classmethod
    def from_principal(cls, spin, principal_mT, rotation=None, name="", gamma_rad_s_T=0.0) -> "Nucleus":
        """A nucleus from principal values and the orientation of its principal axes.

        Parameters
        ----------
        principal_mT : sequence of 3 float
            Principal values (A_xx, A_yy, A_zz) in mT along the tensor's own axes.
        rotation : (3, 3) array or scipy.spatial.transform.Rotation, optional
            R_mol_tensor: its columns are the principal axes written in the molecular
            frame, so A_mol = R diag(principal) Rᵀ.  Identity if omitted.
        """
        p = np.asarray(principal_mT, dtype=np.float64)
        label = f"nucleus {name!r}" if name else "nucleus"
        if p.shape != (3,) or not np.all(np.isfinite(p)):
            raise MagretinaError(f"{label} principal_mT must be three finite numbers, got {principal_mT!r}")
        r = np.eye(3) if rotation is None else _check_rotation(rotation, f"{label} rotation")
        return cls(spin, r @ np.diag(p) @ r.T, name=name, gamma_rad_s_T=gamma_rad_s_T)

    @property
    def multiplicity(self) -> int:
        """2I + 1."""
        return multiplicity(self.spin)

    @property
    def isotropic_mT(self) -> float:
        """Isotropic part tr(A)/3 in mT."""
        return float(np.trace(self.hyperfine_mT)) / 3.0

    def rotated(self, R) -> "Nucleus":
        """The same nucleus with its tensor rotated: A → R A Rᵀ (R: (3, 3) rotation)."""
        r = _check_rotation(R, "rotation")
        return replace(self, hyperfine_mT=r @ self.hyperfine_mT @ r.T)

    def describe(self) -> dict:
        """JSON-serialisable description (also the basis of cache keys)."""
        return {"name": self.name, "spin": self.spin, "hyperfine_mT": self.hyperfine_mT.tolist(),
                "gamma_rad_s_T": self.gamma_rad_s_T}


def _check_g(g, name):
    a = np.asarray(g, dtype=np.float64)
    if a.shape == ():
        v = float(a)
        if not math.isfinite(v) or v <= 0:
            raise MagretinaError(f"{name} = {g!r} must be a positive finite g-value (free electron "
                                 f"{G_FREE:.6f})")
        return v
    return check_tensor(a, f"{name} (g-tensor)")


@dataclass(frozen=True, eq=False)
class Radical:
    """One radical: an electron spin (g-value) and its magnetic nuclei.

    Parameters
    ----------
    nuclei : sequence of Nucleus
        The nuclei, in Kronecker order after the electron.
    g : float or (3, 3) array
        g-value (default: free electron, |g_e| from CODATA ≈ 2.0023) or g-tensor in the
        molecular frame.  Electron Zeeman H = +(γ_e/g_e) B·g·S.
    name : str
        Label (e.g. ``"FAD"``).
    """

    nuclei: tuple = ()
    g: object = G_FREE
    name: str = ""

    def __post_init__(self):
        nuc = tuple(self.nuclei)
        for i, n in enumerate(nuc):
            if not isinstance(n, Nucleus):
                raise MagretinaError(f"radical {self.name!r}: nuclei[{i}] must be a Nucleus, got "
                                     f"{type(n).__name__}")
        object.__setattr__(self, "nuclei", nuc)
        object.__setattr__(self, "g", _check_g(self.g, f"radical {self.name!r} g"))

    @property
    def nuclear_dims(self) -> tuple:
        """Multiplicities (2I+1) of the nuclei in Kronecker order."""
        return tuple(n.multiplicity for n in self.nuclei)

    @property
    def nuclear_multiplicity(self) -> int:
        """Z = Π (2I+1) over the radical's nuclei."""
        return int(np.prod(self.nuclear_dims, dtype=np.int64))

    @property
    def dim(self) -> int:
        """Hilbert dimension of the radical: 2·Z."""
        return 2 * self.nuclear_multiplicity

    @property
    def g_tensor(self) -> np.ndarray:
        """g as a (3, 3) array."""
        return self.g * np.eye(3) if np.ndim(self.g) == 0 else np.asarray(self.g)

    @property
    def is_g_isotropic(self) -> bool:
        return np.ndim(self.g) == 0

    def rotated(self, R) -> "Radical":
        """All tensors rotated by R (A → R A Rᵀ, g likewise)."""
        r = _check_rotation(R, "rotation")
        g = self.g if np.ndim(self.g) == 0 else r @ self.g @ r.T
        return replace(self, nuclei=tuple(n.rotated(r) for n in self.nuclei), g=g)

    def describe(self) -> dict:
        g = self.g if np.ndim(self.g) == 0 else np.asarray(self.g).tolist()
        return {"name": self.name, "g": g, "nuclei": [n.describe() for n in self.nuclei]}


def point_dipolar_mT(distance_nm, direction=(0.0, 0.0, 1.0), g_a=G_FREE, g_b=G_FREE):
    """Electron–electron point-dipole tensor D (mT) for H = γ_e S_A·D·S_B.

    D = (μ0/4π) g_a g_b μ_B² / (ħ γ_e r³) · (1 − 3 n nᵀ), converted to mT with the
    free-electron γ_e like every coupling here.  For r = 1 nm the prefactor is
    ≈ 1.857 mT, so the secular coupling (3/2)·prefactor ≈ 2.785 mT nm³ / r³.

    Parameters
    ----------
    distance_nm : float
        Inter-radical distance (nm), > 0.
    direction : sequence of 3 float
        Inter-radical vector in the molecular frame (normalised here).
    """
    r = float(distance_nm)
    if not math.isfinite(r) or r <= 0:
        raise MagretinaError(f"dipolar distance_nm = {distance_nm!r} must be a positive distance in nm")
    n = np.asarray(direction, dtype=np.float64)
    if n.shape != (3,) or not np.all(np.isfinite(n)) or np.linalg.norm(n) == 0:
        raise MagretinaError(f"dipolar direction must be a non-zero 3-vector, got {direction!r}")
    n = n / np.linalg.norm(n)
    gamma_e = sc.physical_constants["electron gyromag. ratio"][0]
    mu_b = sc.physical_constants["Bohr magneton"][0]
    pref_T = sc.mu_0 / (4 * np.pi) * g_a * g_b * mu_b**2 / (sc.hbar * gamma_e * (r * 1e-9) ** 3)
    return pref_T * 1e3 * (np.eye(3) - 3.0 * np.outer(n, n))


_INITIAL_NAMES = ("singlet", "triplet")


@dataclass(frozen=True, eq=False)
class RadicalPair:
    """Two radicals with recombination rates and inter-radical couplings.

    Parameters
    ----------
    a, b : Radical
        Radicals A and B (order matters only for the Kronecker order A ⊗ B).
    k_s, k_t : float
        Haberkorn singlet and triplet recombination rate constants (s⁻¹), ≥ 0, k_s > 0.
    exchange_mT : float
        Exchange coupling J (mT) in H = −2J S_A·S_B (γ_e-converted).
    dipolar_mT : (3, 3) array or None
        Electron–electron dipolar tensor D (mT) in H = S_A·D·S_B (γ_e-converted); see
        :func:`point_dipolar_mT` for the point-dipole form.
    g_a, g_b : float or (3, 3) array, optional
        If given, replace the g-value of radical A / B (the override is folded into
        ``a``/``b`` and the field reset to None; read ``pair.a.g``).
    initial : {"singlet", "triplet"} or float
        Initial spin state: singlet ρ0 = P_S/M, triplet ρ0 = P_T/(3M), or a number p in
        [0, 1], the singlet fraction of ρ0 = p P_S/M + (1 − p) P_T/(3M).  M is the
        nuclear multiplicity of the pair.
    """

    a: Radical
    b: Radical
    k_s: float
    k_t: float
    exchange_mT: float = 0.0
    dipolar_mT: object = None
    g_a: object = None
    g_b: object = None
    initial: object = "singlet"

    def __post_init__(self):
        for nm in ("a", "b"):
            if not isinstance(getattr(self, nm), Radical):
                raise MagretinaError(f"radical pair: {nm} must be a Radical, got "
                                     f"{type(getattr(self, nm)).__name__}")
        for nm in ("g_a", "g_b"):
            g = getattr(self, nm)
            rad = self.a if nm == "g_a" else self.b
            if g is not None:
                # folded into the radical and then cleared, so dataclasses.replace(pair, a=...)
                # never re-applies a stale override
                object.__setattr__(self, nm[-1], replace(rad, g=g))
                object.__setattr__(self, nm, None)
        for nm in ("k_s", "k_t"):
            v = getattr(self, nm)
            try:
                f = float(v)
            except (TypeError, ValueError):
                raise MagretinaError(f"radical pair: {nm} must be a rate in s^-1, got {v!r}") from None
            if not math.isfinite(f) or f < 0:
                raise MagretinaError(f"radical pair: {nm} = {v!r} is out of range; allowed [0, inf) s^-1")
            object.__setattr__(self, nm, f)
        if self.k_s == 0:
            raise MagretinaError("radical pair: k_s = 0 gives no singlet yield to compute; "
                                 "allowed (0, inf) s^-1")
        j = float(self.exchange_mT)
        if not math.isfinite(j):
            raise MagretinaError(f"radical pair: exchange_mT must be finite, got {self.exchange_mT!r}")
        object.__setattr__(self, "exchange_mT", j)
        if self.dipolar_mT is not None:
            d = check_tensor(self.dipolar_mT, "radical pair dipolar_mT")
            object.__setattr__(self, "dipolar_mT", None if not np.any(d) else d)
        ini = self.initial
        if isinstance(ini, str):
            if ini not in _INITIAL_NAMES:
                raise MagretinaError(f"radical pair: initial = {ini!r}; allowed 'singlet', 'triplet' "
                                     f"or a singlet fraction in [0, 1]")
        else:
            try:
                p = float(ini)
            except (TypeError, ValueError):
                raise MagretinaError(f"radical pair: initial = {ini!r}; allowed 'singlet', 'triplet' "
                                     f"or a singlet fraction in [0, 1]") from None
            if not (0.0 <= p <= 1.0):
                raise MagretinaError(f"radical pair: initial singlet fraction = {ini!r} is out of "
                                     f"range; allowed [0, 1]")
            object.__setattr__(self, "initial", p)

    # --- derived quantities -------------------------------------------------------
    @property
    def singlet_fraction(self) -> float:
        """Singlet fraction p of the initial state (1 singlet-born, 0 triplet-born)."""
        if self.initial == "singlet":
            return 1.0
        if self.initial == "triplet":
            return 0.0
        return float(self.initial)

    @property
    def nuclear_multiplicity(self) -> int:
        """M = Z_A · Z_B."""
        return self.a.nuclear_multiplicity * self.b.nuclear_multiplicity

    @property
    def dim(self) -> int:
        """Hilbert dimension 4·M of the pair."""
        return self.a.dim * self.b.dim

    @property
    def equal_rates(self) -> bool:
        return self.k_s == self.k_t

    @property
    def coupled(self) -> bool:
        """True if exchange or dipolar coupling links the radicals."""
        return self.exchange_mT != 0.0 or self.dipolar_mT is not None

    def with_rates(self, k_s, k_t=None) -> "RadicalPair":
        """Copy with new rates (k_t defaults to k_s)."""
        return replace(self, k_s=k_s, k_t=k_s if k_t is None else k_t)

    def rotated(self, R) -> "RadicalPair":
        """Copy with every tensor rotated by R (A → R A Rᵀ); Φ_S(R B) is then Φ_S(B) of self."""
        r = _check_rotation(R, "rotation")
        d = None if self.dipolar_mT is None else r @ self.dipolar_mT @ r.T
        return replace(self, a=self.a.rotated(r), b=self.b.rotated(r), dipolar_mT=d)

    def describe(self) -> dict:
        """JSON-serialisable description of every parameter (basis of cache keys)."""
        return {"a": self.a.describe(), "b": self.b.describe(), "k_s": self.k_s, "k_t": self.k_t,
                "exchange_mT": self.exchange_mT,
                "dipolar_mT": None if self.dipolar_mT is None else self.dipolar_mT.tolist(),
                "initial": self.initial}
