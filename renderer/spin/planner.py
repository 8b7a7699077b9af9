"""Before a long spin run: which method, how much memory, roughly how long; then run it resumably.

:func:`plan` estimates, from the dimensions alone (nothing large is allocated), the
memory and time per field direction of every method that applies to a radical pair
(dense eigenbasis, Liouville, direct separable sum, binned spectral convolution,
spin-coherent-state Monte Carlo, Floquet under RF), picks one and says why.  The time
model is operation counts times machine rates measured on the development machine
(2 cores; see ``docs``/the bench scripts); it is meant to be right within a factor of
a few, which is what a user needs to decide whether to start.

:func:`run_directions` evaluates a yield function direction by direction, caching
every result in its own small file (written atomically), so an interrupted run
resumes where it stopped (:func:`renderer.response.spin_table.compute_table` fits the
results into a table).  :func:`estimate_memory_bytes` and :func:`check_memory` guard
every solver call.  This module does no physics.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from threadpoolctl import threadpool_limits

from ..errors import MagretinaError
from ..io import atomic_write_text
from .hamiltonian import GAMMA_E, RAD_S_PER_MT
from .large import radical_blocks, spacing_for_tolerance
from .montecarlo import DENSE_LIMIT, n_time_steps
from .system import RadicalPair

#: Default memory ceiling for one solver call (bytes); override with the environment
#: variable MAGRETINA_SPIN_MEMORY_GIB.
DEFAULT_MEMORY_LIMIT = 4 * 2**30

# Machine rates measured here (2 cores, numpy/OpenBLAS, numba); see bench/spin_large.py.
#: seconds per n³ of a complex Hermitian eigen-decomposition
EIGH_S_PER_N3 = 5e-10
#: terms per second of the direct separable double sum (numba, 2 cores)
DIRECT_TERMS_PER_S = 9e8
#: seconds per spectral line built and binned
LINE_S = 2.5e-8
#: seconds per complex multiply-add in sparse/dense propagation
PROP_S_PER_OP = 2e-9
#: seconds per complex multiply-add in dense matrix products (BLAS, one thread)
MATMUL_S_PER_OP = 5e-10


@dataclass(frozen=True)
class MethodEstimate:
    """Cost of one method for one field direction."""

    method: str
    seconds_per_direction: float
    memory_bytes: int
    exact: str          # "exact", "bounded error <tol>", "statistical", "approximation"
    applicable: bool
    why_not: str = ""


@dataclass(frozen=True)
class Plan:
    """What will run: the chosen method, its cost, and the alternatives."""

    method: str
    n_directions: int
    seconds_per_direction: float
    memory_bytes: int
    reason: str
    estimates: tuple = field(default_factory=tuple)

    @property
    def total_seconds(self) -> float:
        return self.seconds_per_direction * self.n_directions

    def summary(self, methods=None) -> str:
        """Chosen method, its cost, and a table of the alternatives.

        ``methods`` limits the table to the methods a caller accepts (the choices of
        its ``--method``), so it never offers one that is then refused.
        """
        ests = [e for e in self.estimates if methods is None or e.method in methods]
        lines = [f"method: {self.method} ({self.reason})",
                 f"estimated: {_fmt_s(self.seconds_per_direction)} per direction, "
                 f"{_fmt_s(self.total_seconds)} for {self.n_directions} directions, "
                 f"peak memory ~{_fmt_b(self.memory_bytes)}"]
        if not ests:
            return "\n".join(lines)
        rows = [(e.method, _fmt_s(e.seconds_per_direction) + "/direction", _fmt_b(e.memory_bytes),
                 e.exact + ("" if e.applicable else f" [not applicable: {e.why_not}]"))
                for e in ests]
        head = ("method", "time", "memory", "accuracy")
        w = [max(len(r[i]) for r in rows + [head]) for i in range(3)]
        lines.append("alternatives:")
        lines.append(f"  {head[0]:<{w[0]}}  {head[1]:>{w[1]}}  {head[2]:>{w[2]}}  {head[3]}")
        for r in rows:
            lines.append(f"  {r[0]:<{w[0]}}  {r[1]:>{w[1]}}  {r[2]:>{w[2]}}  {r[3]}")
        return "\n".join(lines)


def _fmt_s(s):
    if not math.isfinite(s):
        return "inf"
    if s < 1:
        return f"{s * 1e3:.3g} ms"
    if s < 120:
        return f"{s:.3g} s"
    if s < 7200:
        return f"{s / 60:.3g} min"
    if s < 2 * 86400:
        return f"{s / 3600:.3g} h"
    return f"{s / 86400:.3g} days"


def _fmt_b(b):
    for unit, f in (("TiB", 2**40), ("GiB", 2**30), ("MiB", 2**20), ("KiB", 2**10)):
        if b >= f:
            return f"{b / f:.3g} {unit}"
    return f"{int(b)} B"


def _block_dims(radical):
    return [sub.dim for _, sub in radical_blocks(radical)]


def spectral_span_estimate(pair: RadicalPair, field_T: float) -> float:
    """Upper estimate (rad/s) of a radical's line span: Zeeman + Σ |A| I, worst radical."""
    spans = []
    for rad in (pair.a, pair.b):
        w = GAMMA_E * field_T
        for n in rad.nuclei:
            w += RAD_S_PER_MT * float(np.linalg.norm(n.hyperfine_mT, 2)) * n.spin
        spans.append(w)
    return max(spans)


def montecarlo_seconds(pair: RadicalPair, field_T=50e-6, n_samples=256) -> float:
    """Per-direction cost of :func:`renderer.spin.montecarlo.singlet_yield_montecarlo`.

    Follows what the code does: the same step count (:func:`n_time_steps` with
    t_max = ln(10⁹)/k_min and ω_max = 1.05 × twice the span bound of
    :func:`spectral_span_estimate`); for dimensions up to ``DENSE_LIMIT`` one
    eigenvalue range (n³), one dense step propagator (≈ 12 n³ products) and then per
    step one product of the n × n propagator with all samples at once (n²·samples
    multiply-adds, BLAS); above it a sparse Krylov propagation (≈ 6 nnz per sample
    and step).
    """
    n = pair.dim
    kmin = min(pair.k_s, pair.k_t) if pair.k_t > 0 else pair.k_s
    steps = n_time_steps(math.log(1e9) / kmin, 1.05 * 2 * spectral_span_estimate(pair, field_T))
    if n <= DENSE_LIMIT:
        setup = EIGH_S_PER_N3 * n**3 + 12 * MATMUL_S_PER_OP * n**3
        return setup + steps * n * n * n_samples * MATMUL_S_PER_OP
    nnz = n * (1 + 4 * (len(pair.a.nuclei) + len(pair.b.nuclei)))
    return steps * 6 * nnz * n_samples * PROP_S_PER_OP


def montecarlo_memory(pair: RadicalPair, n_samples=256) -> int:
    """Peak bytes of the Monte Carlo path: propagator (dense) or sparse H, sample states."""
    n = pair.dim
    states = 16 * 4 * n * min(n_samples, max(1, 2**27 // (16 * n)))
    if n <= DENSE_LIMIT:
        return 16 * 3 * n * n + states
    nnz = n * (1 + 4 * (len(pair.a.nuclei) + len(pair.b.nuclei)))
    return 16 * 2 * nnz + 8 * states


def estimate(pair: RadicalPair, field_T=50e-6, *, tol=1e-6, n_samples=256, rf_harmonics=2):
    """Per-direction cost of every method for this pair (nothing is allocated).

    Returns
    -------
    list of MethodEstimate
    """
    n = pair.dim
    da, db = pair.a.dim, pair.b.dim
    sep_ok = pair.equal_rates and not pair.coupled
    why_sep = "" if sep_ok else "needs equal rates and no exchange/dipolar coupling"
    out = []
    out.append(MethodEstimate("eigenbasis", EIGH_S_PER_N3 * n**3 + 3 * EIGH_S_PER_N3 * n**3,
                              16 * 6 * n * n, "exact", pair.equal_rates,
                              "" if pair.equal_rates else "needs equal rates"))
    out.append(MethodEstimate("liouville", 12 * EIGH_S_PER_N3 * n**3, 16 * 8 * n * n, "exact", True))
    sep_terms = 0.5 * da * da * db * db
    out.append(MethodEstimate("separable", sep_terms / DIRECT_TERMS_PER_S
                              + EIGH_S_PER_N3 * (da**3 + db**3),
                              16 * 8 * (da * da + db * db), "exact", sep_ok, why_sep))
    bl_a, bl_b = _block_dims(pair.a), _block_dims(pair.b)
    lines = sum(d * d for d in bl_a) + sum(d * d for d in bl_b)
    h = spacing_for_tolerance(tol, pair.k_s)
    grid = 4 * spectral_span_estimate(pair, field_T) / h + 8
    t_spec = (2 * EIGH_S_PER_N3 * sum(d**3 for d in bl_a + bl_b) + LINE_S * lines
              + 6 * 5e-9 * grid * math.log2(max(grid, 2)) * 3)
    mem_spec = 16 * 4 * lines + 16 * 24 * int(grid) + 16 * 4 * max(bl_a + bl_b) ** 2
    out.append(MethodEstimate("spectral", t_spec, int(mem_spec), f"bounded error <= {tol:g}",
                              sep_ok, why_sep))
    out.append(MethodEstimate("montecarlo", montecarlo_seconds(pair, field_T, n_samples),
                              int(montecarlo_memory(pair, n_samples)),
                              f"statistical ({n_samples} samples)", True))
    nb = 2 * rf_harmonics + 1
    nf = n * nb
    out.append(MethodEstimate("floquet", 2 * EIGH_S_PER_N3 * nf**3 + 4 * EIGH_S_PER_N3 * n * nf**2,
                              16 * 5 * nf * nf, "exact (RF on, per RF azimuth)", True))
    # per radical: two harmonic cut-offs, each an eigh of nb·d plus (2nb−1)·3 products
    # Σ_n U_n† S U_n+j of cost nb·(nb d)²·d, and 9 line weights per (α, β)
    t_fs = 0.0
    mem_fs = 0
    for d in (da, db):
        f = nb * d
        t_fs += 2 * (EIGH_S_PER_N3 * f**3 + MATMUL_S_PER_OP * (2 * nb - 1) * 3 * nb * f * f * d
                     + LINE_S * (2 * nb - 1) * 9 * f * f)
        mem_fs += 16 * (3 * (2 * nb - 1) + 12) * f * f
    out.append(MethodEstimate("floquet-separable", t_fs, int(mem_fs),
                              f"bounded error <= {tol:g} (RF on, per RF azimuth)", sep_ok, why_sep))
    return out


def plan(pair: RadicalPair, n_directions=1, *, field_T=50e-6, method="auto", tol=1e-6,
         rf=False, n_samples=256, memory_limit=None) -> Plan:
    """Choose a method for ``n_directions`` field directions and estimate its cost.

    Parameters
    ----------
    pair : RadicalPair
    n_directions : int
    field_T : float
        Field magnitude (T), used for the spectral span.
    method : str
        'auto' or one of the estimate names.
    rf : bool
        An RF field is on (only 'floquet' applies; 'propagate' for noise).
    memory_limit : int, optional
        Bytes (default MAGRETINA_SPIN_MEMORY_GIB or 4 GiB).

    Returns
    -------
    Plan
    """
    lim = memory_limit_bytes() if memory_limit is None else int(memory_limit)
    ests = estimate(pair, field_T, tol=tol, n_samples=n_samples)
    by = {e.method: e for e in ests}
    if rf:
        cands = ["floquet", "floquet-separable"]
    elif method == "auto":
        cands = ["separable", "spectral", "eigenbasis", "liouville", "montecarlo"]
    else:
        if method not in by:
            raise MagretinaError(f"method = {method!r} is unknown; allowed 'auto', "
                                 + ", ".join(repr(k) for k in by))
        cands = [method]
    ok = [by[c] for c in cands if by[c].applicable and by[c].memory_bytes <= lim]
    if not ok:
        appl = [by[c] for c in cands if by[c].applicable] or [by[cands[0]]]
        e = min(appl, key=lambda x: x.memory_bytes)
        raise MagretinaError(
            f"no method fits: '{e.method}' would need about {_fmt_b(e.memory_bytes)} "
            f"(limit {_fmt_b(lim)}){'; ' + e.why_not if e.why_not else ''}. Hilbert dimension "
            f"{pair.dim}; combine equivalent nuclei, drop weak couplings, or use 'montecarlo'")
    if method == "auto" and not rf:
        # prefer exact methods; the spectral one only when it is clearly cheaper
        exact = [e for e in ok if e.method in ("separable", "eigenbasis", "liouville")]
        best_exact = min(exact, key=lambda e: e.seconds_per_direction) if exact else None
        spec = by["spectral"] if by["spectral"] in ok else None
        if spec and (best_exact is None or spec.seconds_per_direction * 5 < best_exact.seconds_per_direction):
            choice, why = spec, f"separable pair; binned spectral sum with error <= {tol:g} is " \
                                f"cheaper than the exact sums"
        elif best_exact is not None:
            choice, why = best_exact, "cheapest exact method that fits in memory"
        else:
            choice, why = by["montecarlo"], "only the statistically exact Monte Carlo fits in memory"
    elif rf:
        choice = min(ok, key=lambda e: e.seconds_per_direction)
        why = ("RF on: Floquet in the pair space (exact)" if choice.method == "floquet" else
               f"RF on: per-radical Floquet spectra, binned (error <= {tol:g})")
    else:
        choice, why = ok[0], "requested"
    return Plan(choice.method, int(n_directions), choice.seconds_per_direction,
                choice.memory_bytes, why, tuple(ests))


# --------------------------------------------------------------------------------------
# resumable per-direction runs
# --------------------------------------------------------------------------------------

def run_key(params: dict) -> str:
    """SHA-256 (24 hex digits) of a JSON-serialisable parameter dict."""
    blob = json.dumps(params, sort_keys=True, default=lambda o: np.asarray(o).tolist())
    return hashlib.sha256(blob.encode()).hexdigest()[:24]


def default_run_dir() -> Path:
    """Where per-direction results are kept: $MAGRETINA_CACHE/spin-runs or ~/.cache/magretina/spin-runs."""
    root = os.environ.get("MAGRETINA_CACHE") or os.path.join(os.path.expanduser("~"), ".cache",
                                                             "magretina")
    return Path(root) / "spin-runs"


def run_directions(fn, fields_T, key, *, run_dir=None, progress=None, n_workers=1):
    """Evaluate ``fn(field_T (3,)) -> float`` per direction, caching each result.

    Parameters
    ----------
    fn : callable
        Yield for one field vector (T).
    fields_T : ndarray (N, 3)
    key : str
        Run identity (see :func:`run_key`); results live in ``run_dir/key/``.
    run_dir : path, optional
        Default :func:`default_run_dir`.
    progress : callable, optional
        Called with the number of directions finished (cached ones first).
    n_workers : int
        Threads evaluating directions at once (``fn`` must be thread-safe and release
        the GIL in its heavy parts, as NumPy's LAPACK calls do).

    Returns
    -------
    ndarray (N,)
        Interrupting (Ctrl-C) loses at most the direction in flight; calling again
        with the same key resumes.
    """
    b = np.asarray(fields_T, dtype=np.float64).reshape(-1, 3)
    folder = Path(run_dir or default_run_dir()) / key
    folder.mkdir(parents=True, exist_ok=True)
    out = np.full(len(b), np.nan)
    todo = []
    for i, bi in enumerate(b):
        f = folder / f"{i:06d}.json"
        if f.exists():
            try:
                rec = json.loads(f.read_text())
                if np.allclose(rec["field_T"], bi, rtol=0, atol=1e-18):
                    out[i] = float(rec["value"])
                    continue
            except (ValueError, KeyError, OSError):
                pass
        todo.append(i)
    if progress is not None and len(b) - len(todo):
        progress(len(b) - len(todo))
    def one(i):
        v = float(fn(b[i]))
        atomic_write_text(folder / f"{i:06d}.json",
                          json.dumps({"field_T": b[i].tolist(), "value": v}))
        return i, v

    if int(n_workers) <= 1:
        for i, v in map(one, todo):
            out[i] = v
            if progress is not None:
                progress(1)
        return out
    # one BLAS thread per worker for the whole pool (nested limits inside fn then agree)
    with threadpool_limits(1, user_api="blas"):
        pool = ThreadPoolExecutor(max_workers=int(n_workers))
        try:
            for i, v in pool.map(one, todo):
                out[i] = v
                if progress is not None:
                    progress(1)
        finally:
            pool.shutdown(wait=True, cancel_futures=True)
    return out


# --------------------------------------------------------------------------------------
# memory estimates
# --------------------------------------------------------------------------------------

def memory_limit_bytes() -> int:
    """The memory ceiling for one solver call (env MAGRETINA_SPIN_MEMORY_GIB, default 4 GiB)."""
    v = os.environ.get("MAGRETINA_SPIN_MEMORY_GIB")
    if v is None:
        return DEFAULT_MEMORY_LIMIT
    try:
        return int(float(v) * 2**30)
    except ValueError:
        raise MagretinaError(f"environment variable MAGRETINA_SPIN_MEMORY_GIB = {v!r} must be a "
                             f"number of GiB") from None


def estimate_memory_bytes(pair: RadicalPair, method: str) -> int:
    """Peak working memory (bytes) of one direction for a solver, estimated before allocating.

    The counts are the dense complex128 arrays each solver holds at once (16 bytes
    per entry): eigenbasis ≈ 6 N² (H, eigenvectors, projected P, weights), liouville
    ≈ 8 N² (H_eff, Schur form and vectors, right-hand side, solution, LAPACK work),
    separable ≈ 8 (n_A² + n_B²) + per-radical operators; N = dim A · dim B.
    """
    n = pair.dim
    if method == "eigenbasis":
        return 16 * 6 * n * n
    if method == "liouville":
        return 16 * 8 * n * n
    if method == "separable":
        na, nb = pair.a.dim, pair.b.dim
        return 16 * 8 * (na * na + nb * nb)
    if method == "spectral":
        return {e.method: e for e in estimate(pair)}["spectral"].memory_bytes
    raise ValueError(method)


def check_memory(pair: RadicalPair, method: str, limit=None) -> int:
    """Raise MagretinaError if ``method`` would need more than ``limit`` bytes; return the estimate."""
    need = estimate_memory_bytes(pair, method)
    lim = memory_limit_bytes() if limit is None else int(limit)
    if need > lim:
        raise MagretinaError(
            f"radical pair of Hilbert dimension {pair.dim} (nuclear multiplicity "
            f"{pair.nuclear_multiplicity}) is too large: solver '{method}' would need about "
            f"{need / 2**30:.3g} GiB, above the limit of {lim / 2**30:.3g} GiB "
            f"(MAGRETINA_SPIN_MEMORY_GIB). Use fewer nuclei, combine equivalent nuclei, "
            f"or equal rates without inter-radical coupling (solver 'separable').")
    return need
