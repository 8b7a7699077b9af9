"""RF response tables over the full relative geometry of a lab-fixed RF coil.

In an experiment the static field B₀ and the RF field B₁ cos(ωt + φ) point in fixed
laboratory directions; a receptor sees both from its own orientation, so its phase-
averaged singlet yield is a function Φ(b̂₀, b̂₁) of two directions in the molecular
frame (at fixed |B₀|, B₁ and ν).  This module tabulates that function as a
bi-spherical-harmonic expansion

    Φ(b̂₀, b̂₁) = Σ_{a,b} C_ab Y_a(b̂₀) Y_b(b̂₁)      (real orthonormal Y, flat index l² + l + m)

fitted by quadrature on a product of Lebedev rules, and evaluates it for any pair of
molecular-frame directions (:meth:`RFLabTable.evaluate`) or from world-frame
directions and each receptor's rotation (:meth:`RFLabTable.evaluate_world`).  The
expansion is frame-free: no azimuth reference about B₀ is needed, which would be
singular somewhere on the sphere.  It does not render and does not parse study files.

Symmetries used (each halves the number of Floquet solves; all are exact for the
phase-averaged Floquet yield of :mod:`renderer.spin.rf`):

* B₁ → −B₁: the sign of the RF amplitude is a shift of the formation phase by π, and
  the yield is averaged uniformly over that phase, so Φ(b̂₀, −b̂₁) = Φ(b̂₀, b̂₁).
* (B₀, B₁) → (−B₀, −B₁): time reversal Θ (Θ S Θ⁻¹ = −S) maps H(B(t)) to H(−B(t)) and
  leaves P_S, P_T and ρ(0) invariant; it turns the yield under B(s) into the yield under
  −B(t − s), and B₀ + B₁cos(ω(t − s) + φ) is again a single-frequency field whose phase is
  averaged, so the phase-averaged yields agree (Haberkorn decay included; the static
  case Φ(−B) = Φ(B) is the well-known special case, common practice).
* Together: Φ is even in b̂₀ and in b̂₁ separately, so only even degrees appear and one
  node of every antipodal pair of each (inversion-symmetric) Lebedev rule is solved:
  a quarter of the product grid.
* An axially symmetric pair (all tensors about one axis) would reduce the table to
  three angles; this is not exploited in the computation (the table stays general) but
  is what :func:`azimuth_averaged` is checked against in the tests.

Outputs are model predictions of the radical-pair hypothesis, not measurements.
"""

from __future__ import annotations

import io
import json
import math
import os
import time
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field

import numpy as np

from ..budget import Estimate, fmt_bytes
from ..errors import MagretinaError
from ..io import atomic_write_bytes
from ..spin.planner import plan
from ..spin.rf import RFField, rf_directions, rf_singlet_yield
from ..spin.system import RadicalPair
from .harmonic import lebedev_grid, lebedev_order_for, n_coeffs, real_sph_harm

#: Highest harmonic degrees accepted for the static and the RF direction.
MAX_LMAX_STATIC = 32
MAX_LMAX_RF = 16


def _check_lmax(name, v, hi):
    if not isinstance(v, (int, np.integer)) or v < 0 or v % 2 or v > hi:
        raise MagretinaError(f"{name} = {v!r} is not allowed; use an even degree in [0, {hi}]")
    return int(v)


def antipodal_half(nodes):
    """Indices of one node of each antipodal pair, and each node's representative.

    Parameters
    ----------
    nodes : ndarray (N, 3)
        Unit vectors of an inversion-symmetric rule (every Lebedev rule is).

    Returns
    -------
    keep : ndarray (K,) int
        Nodes to solve (K = N/2).
    rep : ndarray (N,) int
        For each node, the position in ``keep`` of itself or of its antipode.
    """
    x = np.asarray(nodes, dtype=np.float64)
    d = np.linalg.norm(x[:, None, :] + x[None, :, :], axis=-1)
    partner = np.argmin(d, axis=1)
    if np.max(d[np.arange(len(x)), partner]) > 1e-9:
        raise MagretinaError("direction rule is not inversion symmetric")
    keep = [i for i in range(len(x)) if i <= partner[i]]
    pos = {k: j for j, k in enumerate(keep)}
    rep = np.array([pos[i] if i in pos else pos[partner[i]] for i in range(len(x))])
    return np.array(keep), rep


def lab_grids(lmax_static, lmax_rf):
    """Lebedev rules for the static and the RF direction (order 2L + 5, as for static tables).

    Returns
    -------
    (nodes0 (N0, 3), w0 (N0,)), (nodes1 (N1, 3), w1 (N1,))
    """
    g0 = lebedev_grid(lebedev_order_for(2 * lmax_static + 5))
    g1 = lebedev_grid(lebedev_order_for(2 * lmax_rf + 5))
    return g0, g1


@dataclass
class LabCost:
    """What a lab-fixed RF table will cost, shown before it runs.

    Attributes
    ----------
    n_static, n_rf : int
        Nodes of each Lebedev rule; ``n_solve`` Floquet solves after the symmetries.
    method : str
        Floquet variant chosen by the spin planner.
    seconds : float
        Estimated wall time (s), not divided by ``n_workers``: these small solves are
        bound by Python overhead under the GIL, so threads overlap only the LAPACK part.
    estimate : renderer.budget.Estimate
        Memory figure (per-solve working memory per worker, the value grid, the table).
    """

    n_static: int
    n_rf: int
    n_solve: int
    method: str
    seconds: float
    n_workers: int
    estimate: Estimate = field(repr=False)

    def describe(self) -> str:
        return (f"{self.n_static} static x {self.n_rf} RF directions, {self.n_solve} Floquet "
                f"solves after the symmetries (B1 sign, joint inversion), method "
                f"'{self.method}': about {_fmt_s(self.seconds)} ({self.n_workers} thread(s)), "
                f"{self.estimate.describe()}")


def _fmt_s(s):
    if s < 120:
        return f"{s:.3g} s"
    if s < 7200:
        return f"{s / 60:.3g} min"
    return f"{s / 3600:.3g} h"


def estimate_lab_table(pair: RadicalPair, field_T: float, *, lmax_static=8, lmax_rf=4,
                       n_workers=1, rf=None) -> LabCost:
    """Memory and time of :func:`compute_lab_table` (nothing is tabulated).

    The spin planner's per-solve model counts one Floquet diagonalisation; the solver
    raises its photon cut-off until it converges and has per-call overhead, so when the
    RF field is given, two solves at one geometry are timed and the larger of the two
    figures is used.

    Parameters
    ----------
    pair : RadicalPair
    field_T : float
        |B₀| (T).
    lmax_static, lmax_rf : int
        Even harmonic degrees of the static and the RF direction.
    n_workers : int
        Parallel solves (threads).
    rf : RFField, optional
        The RF field (its direction is ignored); enables the timed probe.

    Returns
    -------
    LabCost
    """
    l0 = _check_lmax("lmax_static", lmax_static, MAX_LMAX_STATIC)
    l1 = _check_lmax("lmax_rf", lmax_rf, MAX_LMAX_RF)
    (x0, _), (x1, _) = lab_grids(l0, l1)
    n_solve = (len(x0) // 2) * (len(x1) // 2)
    pl = plan(pair, n_solve, field_T=float(field_T), rf=True)
    nw = max(1, int(n_workers))
    per_solve = pl.seconds_per_direction
    if rf is not None:
        b0 = float(field_T) * x0[1]
        rf_dir = rf.with_direction(x1[2])
        rf_singlet_yield(pair, b0, rf_dir, method=pl.method)
        t = time.perf_counter()
        rf_singlet_yield(pair, b0, rf_dir, method=pl.method)
        per_solve = max(per_solve, time.perf_counter() - t)
    est = Estimate("RF lab table")
    est.add("Floquet working memory per worker", pl.memory_bytes * nw, per_process=False)
    est.add("value grid", 8 * len(x0) * len(x1), per_process=False)
    est.add("coefficients", 8 * n_coeffs(l0) * n_coeffs(l1), per_process=False)
    return LabCost(len(x0), len(x1), n_solve, pl.method, per_solve * n_solve, nw, est)


@dataclass
class RFLabTable:
    """Φ_S(b̂₀, b̂₁) for one pair at fixed |B₀|, B₁ and ν, as bi-harmonic coefficients.

    Attributes
    ----------
    coeffs : ndarray ((L0+1)², (L1+1)²)
        C_ab of the expansion in the module docstring (odd degrees are zero by symmetry).
    field_T, amplitude_T, frequency_Hz : float
        |B₀| (T), peak B₁ (T), ν (Hz).
    residual_max : float
        Largest |fit − solved value| over the solved nodes (a measure of the truncation).
    meta : dict
        Pair description, method, node counts.
    """

    coeffs: np.ndarray
    field_T: float
    amplitude_T: float
    frequency_Hz: float
    residual_max: float
    meta: dict

    @property
    def lmax_static(self) -> int:
        return int(round(math.sqrt(self.coeffs.shape[0]))) - 1

    @property
    def lmax_rf(self) -> int:
        return int(round(math.sqrt(self.coeffs.shape[1]))) - 1

    def evaluate(self, static_dirs, rf_dirs):
        """Φ_S at pairs of molecular-frame directions.

        Parameters
        ----------
        static_dirs, rf_dirs : array_like (N, 3) or (3,)
            Directions of B₀ and B₁ in the molecular frame (need not be normalised;
            broadcast against each other).

        Returns
        -------
        ndarray (N,) (or float for single directions)
        """
        a = np.asarray(static_dirs, dtype=np.float64)
        b = np.asarray(rf_dirs, dtype=np.float64)
        single = a.ndim == 1 and b.ndim == 1
        a, b = np.broadcast_arrays(np.atleast_2d(a), np.atleast_2d(b))
        y0 = real_sph_harm(self.lmax_static, a)
        y1 = real_sph_harm(self.lmax_rf, b)
        out = np.einsum("na,ab,nb->n", y0, self.coeffs, y1, optimize=True)
        return float(out[0]) if single else out

    def evaluate_world(self, R_mol_from_world, static_world, rf_world):
        """Φ_S for receptors with rotations ``R`` from world-frame B₀ and B₁ directions.

        Parameters
        ----------
        R_mol_from_world : array_like (N, 3, 3) or (3, 3)
            Rotation taking world-frame vectors to each receptor's molecular frame.
        static_world, rf_world : array_like (3,) or (N, 3)
            B₀ and B₁ directions in the world frame (e.g. NED).

        Returns
        -------
        ndarray (N,)
        """
        r = np.asarray(R_mol_from_world, dtype=np.float64).reshape(-1, 3, 3)
        s = np.einsum("nij,...j->ni", r, np.asarray(static_world, dtype=np.float64))
        f = np.einsum("nij,...j->ni", r, np.asarray(rf_world, dtype=np.float64))
        return self.evaluate(s, f)

    def azimuth_averaged(self, static_dirs, angle_deg, n_psi=64):
        """Mean of Φ_S over the RF azimuth about B₀ at a fixed angle (what older tables hold).

        Parameters
        ----------
        static_dirs : array_like (N, 3)
        angle_deg : float
            Angle between B₁ and B₀.
        n_psi : int
            Equally spaced azimuths (exact for the expansion when n_psi > L1).

        Returns
        -------
        ndarray (N,)
        """
        s = np.atleast_2d(np.asarray(static_dirs, dtype=np.float64))
        out = np.empty(len(s))
        for i, si in enumerate(s):
            d = rf_directions(si, angle_deg, n_psi)
            out[i] = float(np.mean(self.evaluate(np.broadcast_to(si, d.shape), d)))
        return out

    def save(self, path):
        """Write the table (.npz) atomically; returns the path."""
        buf = io.BytesIO()
        np.savez(buf, coeffs=self.coeffs, field_T=self.field_T, amplitude_T=self.amplitude_T,
                 frequency_Hz=self.frequency_Hz, residual_max=self.residual_max,
                 meta=json.dumps(self.meta), kind="rf-lab")
        return atomic_write_bytes(path, buf.getvalue())

    @classmethod
    def load(cls, path) -> "RFLabTable":
        """Read a table written by :meth:`save` (raises MagretinaError naming the file)."""
        try:
            with np.load(os.fspath(path), allow_pickle=False) as z:
                if str(z["kind"]) != "rf-lab":
                    raise KeyError("kind")
                return cls(np.array(z["coeffs"]), float(z["field_T"]), float(z["amplitude_T"]),
                           float(z["frequency_Hz"]), float(z["residual_max"]),
                           json.loads(str(z["meta"])))
        except (OSError, KeyError, ValueError) as exc:
            raise MagretinaError(f"{path}: not an RF lab table written by magretina ({exc})") from None


def compute_lab_table(pair: RadicalPair, field_T: float, amplitude_T: float, frequency_Hz: float,
                      *, lmax_static=8, lmax_rf=4, n_workers=None, progress=None,
                      max_memory_gb=None, report=None) -> RFLabTable:
    """Tabulate the phase-averaged RF singlet yield over both field directions.

    The cost (:func:`estimate_lab_table`) is passed to ``report`` (e.g. ``print``) before
    anything runs, and the run is refused with that figure when it exceeds the memory
    limit of :mod:`renderer.budget`.

    Parameters
    ----------
    pair : RadicalPair
    field_T : float
        |B₀| (T).
    amplitude_T, frequency_Hz : float
        Peak B₁ (T, below |B₀|) and ν (Hz).
    lmax_static, lmax_rf : int
        Even harmonic degrees (the Lebedev rules have order 2L + 5).
    n_workers : int, optional
        Parallel Floquet solves (threads; the dense eigensolvers release the GIL).
        Default: the CPU count.
    progress : callable, optional
        Called with 1 after each solve.
    max_memory_gb : float, optional
        Memory limit (default as in :func:`renderer.budget.memory_limit_bytes`).
    report : callable, optional
        Receives the cost description before the run.

    Returns
    -------
    RFLabTable
    """
    b = float(field_T)
    rf0 = RFField(float(amplitude_T), float(frequency_Hz))
    rf0.check_against([0.0, 0.0, b])
    nw = int(n_workers) if n_workers is not None else (os.cpu_count() or 1)
    cost = estimate_lab_table(pair, b, lmax_static=lmax_static, lmax_rf=lmax_rf, n_workers=nw,
                              rf=rf0)
    if report is not None:
        report(cost.describe())
    cost.estimate.check(max_memory_gb, check_frames=False)
    l0, l1 = int(lmax_static), int(lmax_rf)
    (x0, w0), (x1, w1) = lab_grids(l0, l1)
    k0, rep0 = antipodal_half(x0)
    k1, rep1 = antipodal_half(x1)
    jobs = [(i, j) for i in range(len(k0)) for j in range(len(k1))]

    def one(ij):
        i, j = ij
        v = rf_singlet_yield(pair, b * x0[k0[i]], rf0.with_direction(x1[k1[j]]), method=cost.method)
        if progress is not None:
            progress(1)
        return v

    if nw > 1:
        with ThreadPoolExecutor(nw) as ex:
            vals = list(ex.map(one, jobs))
    else:
        vals = [one(ij) for ij in jobs]
    half = np.array(vals).reshape(len(k0), len(k1))
    full = half[rep0][:, rep1]                                 # (N0, N1) by the two symmetries
    y0 = real_sph_harm(l0, x0)
    y1 = real_sph_harm(l1, x1)
    coeffs = (4 * np.pi) ** 2 * (y0.T * w0) @ full @ (y1 * w1[:, None])
    fit = y0 @ coeffs @ y1.T
    residual = float(np.max(np.abs(fit - full)))
    meta = {"pair": pair.describe(), "method": cost.method, "n_static": len(x0), "n_rf": len(x1),
            "n_solved": len(jobs), "symmetries": ["B1 sign (phase average)",
                                                  "joint inversion (time reversal)"],
            "memory": fmt_bytes(cost.estimate.memory_bytes),
            "note": "model prediction of the radical-pair hypothesis, not a measurement"}
    return RFLabTable(coeffs, b, float(amplitude_T), float(frequency_Hz), residual, meta)
