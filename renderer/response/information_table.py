"""Full-sphere tables of the quantum and yield Fisher information about the field direction.

:func:`compute_information_table` evaluates :func:`renderer.spin.quantum.
information_on_directions` on a Lebedev grid (every node solved; the quantum
information has no B → −B symmetry) and caches the result beside the yield tables
(:mod:`.cache`, kind ``information-tables``).  Like :mod:`.spin_table` this is the
adapter from spin dynamics to tables over the sphere; the physics is in
:mod:`renderer.spin.quantum`.  Tables are model predictions of a hypothesis, not
measurements.
"""

from __future__ import annotations

import datetime as _dt
import math

import numpy as np

from ..errors import MagretinaError
from ..spin.hamiltonian import GAMMA_E
from ..spin.quantum import check_pair, information_on_directions
from . import cache
from .harmonic import lebedev_grid, lebedev_order_for

INFO_TABLE_VERSION = 1
CACHE_KIND = "information-tables"


class InformationTable:
    """Full-sphere table of quantum and yield Fisher information at fixed |B|.

    Attributes
    ----------
    nodes : ndarray (K, 3)      Lebedev directions in the molecular frame (unit vectors)
    weights : ndarray (K,)      quadrature weights (sum 1)
    quantum, yield_ : ndarray (K, 2, 2)   information in the tangent frame (e_θ, e_φ), rad⁻²
    phi_s : ndarray (K,)        singlet yield at each node
    meta : dict                 parameters and provenance (field_T, pair, cache key...)
    """

    def __init__(self, nodes, weights, quantum, yield_, phi_s, meta):
        self.nodes, self.weights = nodes, weights
        self.quantum, self.yield_, self.phi_s = quantum, yield_, phi_s
        self.meta = meta

    @property
    def trace_quantum(self):
        """Tr F_Q per node (rad⁻²): total information about a small rotation, both axes."""
        return np.trace(self.quantum, axis1=1, axis2=2)

    @property
    def trace_yield(self):
        """Tr F_C per node (rad⁻²); the yield information is rank one."""
        return np.trace(self.yield_, axis1=1, axis2=2)

    def ratio(self):
        """Quantum over yield information along the yield gradient, per node, ≥ 1 by the
        quantum Cramér–Rao bound (NaN where the yield information is below 1 % of its
        peak)."""
        tc = self.trace_yield
        # the yield information's eigenvector is the gradient direction
        lam, vec = np.linalg.eigh(self.yield_)
        g = vec[:, :, 1]
        along = np.einsum("ki,kij,kj->k", g, self.quantum, g)
        # near stationary points of the yield the ratio diverges and says nothing about
        # the compass: report it only where the yield carries >= 1 % of its peak information
        ok = tc >= 1e-2 * tc.max() if tc.size and tc.max() > 0 else np.zeros(tc.shape, bool)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(ok, along / np.where(ok, tc, 1.0), np.nan)

    def summary(self) -> dict:
        """Sphere means and extremes of both informations and of their ratio."""
        r = self.ratio()
        ok = np.isfinite(r)
        w = self.weights
        return {"field_uT": self.meta["field_T"] * 1e6,
                "mean_trace_quantum_rad-2": float(np.sum(w * self.trace_quantum)),
                "mean_trace_yield_rad-2": float(np.sum(w * self.trace_yield)),
                "max_trace_quantum_rad-2": float(self.trace_quantum.max()),
                "max_trace_yield_rad-2": float(self.trace_yield.max()),
                "ratio_along_gradient_min": float(r[ok].min()) if ok.any() else float("nan"),
                "ratio_along_gradient_median": float(np.median(r[ok])) if ok.any() else float("nan"),
                "ratio_along_gradient_max": float(r[ok].max()) if ok.any() else float("nan"),
                "n_directions": int(len(self.nodes))}

    def arrays(self) -> dict:
        return {"nodes": self.nodes, "weights": self.weights, "quantum": self.quantum,
                "yield": self.yield_, "phi_s": self.phi_s}

    def save(self, path):
        """Write the table as .npz (atomically) with its metadata as JSON."""
        return cache.save_npz_atomic(path, self.arrays(), self.meta)


def information_params(pair, field_T, order) -> dict:
    """Everything an information table depends on (the cache key is the hash of this)."""
    return {"info_table_version": INFO_TABLE_VERSION, "gamma_e": GAMMA_E,
            "pair": pair.describe(), "field_T": float(field_T), "lebedev_order": int(order)}


def estimate_information_cost(pair, order):
    """(bytes, flops) of an information table: two dense eigendecompositions and about
    a dozen N×N complex products per Lebedev node."""
    n = pair.dim
    k = len(lebedev_grid(order)[0])
    return 16 * 12 * n * n, k * (2 * 10 + 12 * 8) * n**3


def compute_information_table(pair, field_T, order=17, use_cache=True, progress=None,
                              meta=None) -> InformationTable:
    """Full-sphere table of quantum and yield Fisher information (cached on disk).

    Parameters
    ----------
    pair : RadicalPair (equal rates)
    field_T : float
        Field magnitude, tesla (> 0).
    order : int
        Lebedev order of the direction grid; every node is solved (the quantum
        information is not symmetric under B → −B, see
        :func:`renderer.spin.quantum.antipode_transform`).
    use_cache : bool
        Read and write the disk cache (kind "information-tables", beside the
        "spin-tables" of the yield).
    progress : callable, optional
        Receives numbers of directions finished.
    meta : dict, optional
        Extra provenance stored with the table (preset name, source).

    Returns
    -------
    InformationTable
    """
    check_pair(pair)
    b = float(field_T)
    if not math.isfinite(b) or b <= 0:
        raise MagretinaError(f"field magnitude = {field_T!r} T is out of range; allowed (0, inf)")
    order = int(order)
    if lebedev_order_for(order) != order:
        raise MagretinaError(f"Lebedev order {order} is not an available order")
    params = information_params(pair, b, order)
    key = cache.cache_key(params)
    extra = dict(meta or {})
    nodes, weights = lebedev_grid(order)
    if use_cache:
        hit = cache.lookup(CACHE_KIND, key)
        if hit is not None:
            a, m = hit
            if progress is not None:
                progress(len(a["nodes"]))
            return InformationTable(a["nodes"], a["weights"], a["quantum"], a["yield"], a["phi_s"],
                                    {**m, **extra, "from_cache": True})
    res = information_on_directions(pair, b, nodes, progress=progress)
    quantum, yield_, phi = res["quantum"], res["yield"], res["phi_s"]
    m = {**params, "cache_key": key, "n_directions": int(len(nodes)), 
         "dim": int(pair.dim), "frame": "tangent (e_theta, e_phi) at each node, rad^-2",
         "created_utc": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
         "note": "model prediction of a radical-pair hypothesis, not a measurement"}
    table = InformationTable(nodes, weights, quantum, yield_, phi, m)
    if use_cache:
        cache.store(CACHE_KIND, key, table.arrays(), m)
    table.meta = {**m, **extra}
    return table
