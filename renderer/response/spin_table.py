"""Full-sphere response tables of a radical pair's singlet yield at a given |B|.

A table is Φ_S(|B| d) for unit field directions d in the molecular frame, sampled on
a Lebedev grid (``scipy.integrate.lebedev_rule``) and projected onto real even
spherical harmonics up to degree L (:mod:`.harmonic`).  Time reversal gives
Φ_S(B) = Φ_S(−B), and Lebedev grids are inversion-symmetric, so only one node of
each antipodal pair is solved.  The fit residual at the nodes (rms and max) is kept
so a user can see whether L is enough.  Results are cached on disk by a hash of every
parameter (:mod:`.cache`).  :func:`compute_table` builds the same kind of table from
any per-direction yield function (RF fields, Monte Carlo, large pairs), resumably
through :func:`renderer.spin.planner.run_directions`.  Tables are model predictions,
not measurements.  This module is the adapter from spin dynamics to responses: it
calls :mod:`renderer.spin` and does no spin dynamics itself.
"""

from __future__ import annotations

import datetime as _dt
import math
from dataclasses import dataclass

import numpy as np

from ..errors import MagretinaError
from ..spin import choose_method, singlet_yield
from ..spin.hamiltonian import GAMMA_E
from ..spin.planner import run_directions, run_key
from . import cache
from .harmonic import (SphericalHarmonic, degrees, dirs_to_angles, fit_quadrature,
                       lebedev_grid, lebedev_order_for, real_sph_harm)

#: Bump when the table contents for identical parameters would change.
TABLE_VERSION = 1
CACHE_KIND = "spin-tables"
DEFAULT_LMAX = 16


def antipodal_pairs(nodes, tol=1e-10):
    """Indices (keep, partner) with nodes[partner] = −nodes[keep], covering every node once.

    Raises if the grid is not inversion-symmetric.
    """
    n = len(nodes)
    key = np.round(nodes / tol).astype(np.int64)
    where = {tuple(k): i for i, k in enumerate(key)}
    partner = np.empty(n, dtype=np.int64)
    for i, k in enumerate(key):
        j = where.get(tuple(-k))
        if j is None:  # round-off may land on a neighbouring integer; fall back to search
            j = int(np.argmin(np.linalg.norm(nodes + nodes[i], axis=1)))
            if np.linalg.norm(nodes[j] + nodes[i]) > 1e3 * tol:
                raise ValueError("grid is not inversion-symmetric")
        partner[i] = j
    keep = np.array([i for i in range(n) if i <= partner[i]], dtype=np.int64)
    return keep, partner[keep]


def _fit_even(lmax, nodes, weights, keep, partner, vals_keep):
    """Fill every node from the solved ones and fit even real harmonics up to ``lmax``.

    Parameters
    ----------
    lmax : int
        Even harmonic degree.
    nodes, weights : ndarray (N, 3), (N,)
        Lebedev rule (unit directions, molecular frame).
    keep, partner : ndarray (M,) of int
        Solved node indices and the nodes that take the same value (Φ(B) = Φ(−B)).
    vals_keep : ndarray (M,)
        Φ at ``nodes[keep]``.

    Returns
    -------
    values : ndarray (N,)
    coeffs : ndarray ((lmax+1)²,)
        Odd degrees set to zero (zero by symmetry; this removes round-off).
    fit : dict
        residual_rms, residual_max at the nodes, n_directions, n_solved.
    """
    values = np.empty(len(nodes))
    values[keep] = vals_keep
    values[partner] = vals_keep
    coeffs = fit_quadrature(lmax, nodes, weights, values)
    coeffs[degrees(lmax) % 2 == 1] = 0.0
    resid = real_sph_harm(lmax, nodes) @ coeffs - values
    fit = {"residual_rms": float(np.sqrt(np.mean(resid**2))),
           "residual_max": float(np.max(np.abs(resid))), "n_directions": int(len(nodes)),
           "n_solved": int(len(keep))}
    return values, coeffs, fit


class SpinTable(SphericalHarmonic):
    """Singlet-yield table Φ_S(d) at fixed |B|, as real even spherical harmonics.

    Construct with :func:`compute_spin_table` or :meth:`load` (``SpinTable(path=...)``
    is the same as ``SpinTable.load(path)``, for configuration files).

    Attributes
    ----------
    coeffs : ndarray ((L+1)²,)
    nodes : ndarray (N, 3)
        Lebedev directions where Φ_S was solved (molecular frame).
    values : ndarray (N,)
        Φ_S at the nodes.
    meta : dict
        Parameters and provenance: field_T, pair description, method, lmax,
        lebedev_order, residual_rms, residual_max, cache key, source text.
    """

    def __init__(self, coeffs=None, *, nodes=None, values=None, meta=None, path=None):
        if path is not None:
            other = SpinTable.load(path)
            coeffs, nodes, values, meta = other.coeffs, other.nodes, other.values, other.meta
        if coeffs is None:
            raise MagretinaError("SpinTable needs coefficients or path=")
        super().__init__(coeffs)
        self.nodes = None if nodes is None else np.asarray(nodes, dtype=np.float64)
        self.values = None if values is None else np.asarray(values, dtype=np.float64)
        self.meta = dict(meta or {})

    @property
    def field_T(self) -> float:
        return float(self.meta.get("field_T", float("nan")))

    def summary(self) -> dict:
        """Anisotropy (max − min), directions of the extremes, mean, fit residual."""
        lo, d_lo, hi, d_hi = self.extremes()
        th_lo, ph_lo = dirs_to_angles(d_lo[None])
        th_hi, ph_hi = dirs_to_angles(d_hi[None])
        out = {
            "field_uT": self.field_T * 1e6,
            "lmax": self.lmax,
            "mean": self.mean(),
            "min": lo, "max": hi, "anisotropy": hi - lo,
            "argmin_theta_deg": float(np.degrees(th_lo[0])), "argmin_phi_deg": float(np.degrees(ph_lo[0])),
            "argmax_theta_deg": float(np.degrees(th_hi[0])), "argmax_phi_deg": float(np.degrees(ph_hi[0])),
            "residual_rms": self.meta.get("residual_rms"),
            "residual_max": self.meta.get("residual_max"),
        }
        if self.values is not None:
            out["samples_min"] = float(self.values.min())
            out["samples_max"] = float(self.values.max())
            out["samples_anisotropy"] = float(self.values.max() - self.values.min())
        return out

    def save(self, path):
        """Write the table (.npz: coeffs, nodes, values, meta JSON) atomically."""
        arrays = {"coeffs": self.coeffs}
        if self.nodes is not None:
            arrays["nodes"] = self.nodes
            arrays["values"] = self.values
        return cache.save_npz_atomic(path, arrays, {"format": "magretina-spin-table/1", **self.meta})

    @classmethod
    def load(cls, path) -> "SpinTable":
        """Read a table written by :meth:`save`."""
        try:
            arrays, meta = cache.load_npz(path)
        except MagretinaError:
            raise  # already one line naming the file (the input layer's checks)
        except OSError as exc:
            raise MagretinaError(f"spin table {path}: cannot read ({exc.strerror or exc})") from None
        except Exception:  # numpy's messages (pickles, zip headers) say nothing useful here
            raise MagretinaError(f"spin table {path}: not a response table; expected a .npz file "
                                 f"written by 'magretina response compute' or 'spin-plan'") from None
        if meta.get("format") != "magretina-spin-table/1" or "coeffs" not in arrays:
            raise MagretinaError(f"spin table {path}: not a magretina spin table "
                                 f"(format {meta.get('format')!r})")
        return cls(arrays["coeffs"], nodes=arrays.get("nodes"), values=arrays.get("values"), meta=meta)

    def describe(self) -> dict:
        d = {k: v for k, v in self.meta.items() if k != "pair"}
        return {"kind": "spin-table", "lmax": self.lmax, **d}

    def __repr__(self):
        return (f"SpinTable(|B| = {self.field_T * 1e6:g} uT, lmax={self.lmax}, mean={self.mean():.6g}, "
                f"residual_max={self.meta.get('residual_max')})")


def table_params(pair, field_T, lmax, order, method) -> dict:
    """Everything the table depends on (the cache key is the hash of this)."""
    return {"table_version": TABLE_VERSION, "gamma_e": GAMMA_E, "pair": pair.describe(),
            "field_T": float(field_T), "lmax": int(lmax), "lebedev_order": int(order),
            "method": method}


@dataclass(frozen=True)
class TableJob:
    """One table to compute: the validated parameters and the directions to solve.

    ``fields_T`` (n_solved, 3) are the field vectors (T, molecular frame) of the Lebedev
    nodes kept after inversion symmetry; :func:`finish_table` turns their singlet yields
    into the :class:`SpinTable` (the same arithmetic wherever the yields were solved).
    """

    pair: object
    field_T: float
    lmax: int
    order: int
    method: str
    params: dict
    key: str
    nodes: np.ndarray
    weights: np.ndarray
    keep: np.ndarray
    partner: np.ndarray

    @property
    def fields_T(self) -> np.ndarray:
        return self.field_T * self.nodes[self.keep]


def prepare_table(pair, field_T, lmax=DEFAULT_LMAX, order=None, method="auto") -> TableJob:
    """Check a table's parameters and list its directions (see :func:`compute_spin_table`)."""
    b = float(field_T)
    if not math.isfinite(b) or b < 0:
        raise MagretinaError(f"field magnitude = {field_T!r} T is out of range; allowed [0, inf)")
    lmax = int(lmax)
    if lmax < 0 or lmax % 2:
        raise MagretinaError(f"l_max = {lmax} must be an even degree >= 0 (singlet yields are even "
                             f"in the field direction)")
    order = lebedev_order_for(2 * lmax + 5) if order is None else int(order)
    if lebedev_order_for(order) != order or order < 2 * lmax:
        raise MagretinaError(f"Lebedev order {order} must be an available order >= 2*l_max = "
                             f"{2 * lmax}")
    resolved = choose_method(pair, method)
    params = table_params(pair, b, lmax, order, resolved)
    nodes, weights = lebedev_grid(order)
    keep, partner = antipodal_pairs(nodes)
    return TableJob(pair, b, lmax, order, resolved, params, cache.cache_key(params), nodes,
                    weights, keep, partner)


def cached_table(job: TableJob, meta=None):
    """The job's table from the disk cache, or None."""
    hit = cache.lookup(CACHE_KIND, job.key)
    if hit is None:
        return None
    arrays, m = hit
    m.update(dict(meta or {}))
    return SpinTable(arrays["coeffs"], nodes=arrays["nodes"], values=arrays["values"],
                     meta={**m, "from_cache": True})


def finish_table(job: TableJob, vals_keep, use_cache=True, meta=None) -> SpinTable:
    """Fit the singlet yields at ``job.fields_T`` into the table; cache it atomically."""
    values, coeffs, fit = _fit_even(job.lmax, job.nodes, job.weights, job.keep, job.partner,
                                    vals_keep)
    m = {**job.params, "cache_key": job.key, **fit, "dim": int(job.pair.dim),
         "created_utc": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
         "note": "model prediction of a radical-pair hypothesis, not a measurement"}
    if use_cache:
        cache.store(CACHE_KIND, job.key, {"coeffs": coeffs, "nodes": job.nodes,
                                          "values": values}, m)
    m.update(dict(meta or {}))
    return SpinTable(coeffs, nodes=job.nodes, values=values, meta=m)


def compute_spin_table(pair, field_T, lmax=DEFAULT_LMAX, order=None, method="auto",
                       use_cache=True, progress=None, meta=None) -> SpinTable:
    """Compute (or fetch from the cache) the full-sphere singlet-yield table of a pair.

    Parameters
    ----------
    pair : renderer.spin.RadicalPair
    field_T : float
        Field magnitude |B| in tesla (> 0; at 0 the table is a constant).
    lmax : int, even
        Highest harmonic degree L.
    order : int, optional
        Lebedev order; default the smallest ≥ 2L + 5 (exact projection needs ≥ 2L;
        the margin gives extra nodes for the residual).
    method : str
        Spin solver ('auto', 'separable', 'eigenbasis', 'liouville').
    use_cache : bool
        Read and write the disk cache.
    progress : callable, optional
        Receives the number of directions finished.
    meta : dict, optional
        Extra provenance (e.g. preset name and literature source) stored with the table.

    Returns
    -------
    SpinTable

    See Also
    --------
    renderer.response.cluster.compute_spin_tables : the same tables (bitwise) with their
        directions solved on a Dask cluster.
    """
    job = prepare_table(pair, field_T, lmax, order, method)
    if use_cache:
        hit = cached_table(job, meta)
        if hit is not None:
            if progress is not None:
                progress(len(hit.nodes))
            return hit
    if progress is not None:  # the partner nodes cost nothing
        progress(len(job.nodes) - len(job.keep))
    vals_keep = np.asarray(singlet_yield(pair, job.fields_T, method=job.method,
                                         progress=progress))
    return finish_table(job, vals_keep, use_cache, meta)


def compute_table(fn, field_T, params, *, lmax=16, order=None, run_dir=None, progress=None,
                  meta=None, inversion_symmetric=True, n_workers=1):
    """A full-sphere SpinTable from a per-direction yield function, resumably.

    Parameters
    ----------
    fn : callable
        Φ for one field vector (T, molecular frame).
    field_T : float
        |B| (T).
    params : dict
        Everything ``fn`` depends on (the run key is its hash).
    lmax, order : int
        Harmonic degree and Lebedev order (as in ``compute_spin_table``).
    inversion_symmetric : bool
        Solve only one node of each antipodal pair (Φ(B) = Φ(−B)).
    n_workers : int
        Directions evaluated at once (threads); see
        :func:`renderer.spin.planner.run_directions`.

    Returns
    -------
    SpinTable
    """
    lmax = int(lmax)
    if lmax < 0 or lmax % 2:
        raise MagretinaError(f"l_max = {lmax} must be an even degree >= 0")
    order = lebedev_order_for(2 * lmax + 5) if order is None else int(order)
    nodes, weights = lebedev_grid(order)
    b = float(field_T)
    if inversion_symmetric:
        keep, partner = antipodal_pairs(nodes)
    else:
        keep, partner = np.arange(len(nodes)), np.arange(len(nodes))
    full = {**params, "field_T": b, "lmax": lmax, "lebedev_order": order,
            "inversion_symmetric": bool(inversion_symmetric)}
    key = run_key(full)
    vals = run_directions(fn, b * nodes[keep], key, run_dir=run_dir, progress=progress,
                          n_workers=n_workers)
    values, coeffs, fit = _fit_even(lmax, nodes, weights, keep, partner, vals)
    m = {**full, "run_key": key, **fit,
         "note": "model prediction of a radical-pair hypothesis, not a measurement", **(meta or {})}
    return SpinTable(coeffs, nodes=nodes, values=values, meta=m)
