"""Spin tables at cluster scale: the directions of many tables solved on one Dask cluster.

Parameter studies over hyperfine sets, rates or field strengths need many full-sphere
tables (:func:`renderer.response.spin_table.compute_spin_table`).
:func:`compute_spin_tables` takes a list of them, prints a plan first (per table: the
solver, directions to solve, memory per worker, time estimate from
:func:`renderer.spin.planner.plan`), then sends the directions of every table not in the
cache to the same kind of Dask cluster the study runner uses (a LocalCluster of worker
processes, or a scheduler address; :class:`renderer.cluster.DaskStart`) in batches, with
each radical pair scattered once to every worker.  Each table is fitted and cached
atomically as soon as its last direction is back, with the same arithmetic as a local
run, so its arrays are bitwise those of :func:`compute_spin_table`.  This module does no
physics.
"""

from __future__ import annotations

import math
import sys
import uuid

import numpy as np
from threadpoolctl import threadpool_limits

from ..cluster import DaskStart
from ..errors import MagretinaError
from ..spin import singlet_yield
from ..spin.planner import _fmt_b, _fmt_s, plan
from .spin_table import cached_table, finish_table, prepare_table

#: Dask tasks per worker (over all tables): enough to balance uneven directions, few
#: enough that Dask's own cost per task stays small beside a direction's solve.
TASKS_PER_WORKER = 8


def _solve(pair, fields_T, method):
    """Dask task: singlet yields of one batch of directions (threaded BLAS off, as the
    local solvers do on busy machines)."""
    with threadpool_limits(1, user_api="blas"):
        return np.asarray(singlet_yield(pair, fields_T, method=method), dtype=np.float64)


def table_plan(jobs, n_workers) -> list[dict]:
    """Per table: solver, directions to solve, memory per worker (bytes), estimated
    seconds on ``n_workers`` workers (from :func:`renderer.spin.planner.plan`)."""
    out = []
    for job in jobs:
        n = len(job.keep)
        try:
            p = plan(job.pair, n, field_T=job.field_T, method=job.method)
            mem, sec = p.memory_bytes, p.total_seconds / n_workers
        except MagretinaError:  # a solver the planner does not model: no estimate
            mem, sec = float("nan"), float("nan")
        out.append({"key": job.key, "method": job.method, "field_T": job.field_T,
                    "lmax": job.lmax, "directions": n, "memory_bytes": mem, "seconds": sec,
                    "dim": int(job.pair.dim)})
    return out


def format_plan(rows, n_workers, cached) -> str:
    """The plan as text (one line per table, then the totals)."""
    lines = [f"spin tables: {len(rows) + cached} ({cached} in the cache), on {n_workers} "
             f"Dask worker(s)"]
    for r in rows:
        mem = "?" if not math.isfinite(r["memory_bytes"]) else _fmt_b(r["memory_bytes"])
        sec = "?" if not math.isfinite(r["seconds"]) else _fmt_s(r["seconds"])
        lines.append(f"  |B| = {r['field_T'] * 1e6:g} uT, l_max {r['lmax']}, dimension "
                     f"{r['dim']}, solver '{r['method']}': {r['directions']} directions, "
                     f"~{mem} per worker, ~{sec}  [{r['key'][:12]}]")
    mems = [r["memory_bytes"] for r in rows if math.isfinite(r["memory_bytes"])]
    secs = [r["seconds"] for r in rows]
    total = sum(secs) if all(math.isfinite(s) for s in secs) else float("nan")
    lines.append(f"  total: {sum(r['directions'] for r in rows)} directions, peak "
                 f"~{_fmt_b(max(mems)) if mems else '?'} per worker, "
                 f"~{_fmt_s(total) if math.isfinite(total) else '?'}")
    return "\n".join(lines)


def compute_spin_tables(specs, *, jobs=2, scheduler=None, started=None, use_cache=True,
                        stream=None, progress=None, tasks_per_worker=TASKS_PER_WORKER):
    """Compute (or fetch from the cache) several spin tables on a Dask cluster.

    Parameters
    ----------
    specs : list of dict
        One per table, keywords of :func:`~renderer.response.spin_table.compute_spin_table`:
        ``pair`` (RadicalPair), ``field_T`` (T), optional ``lmax``, ``order``, ``method``,
        ``meta``.  A sweep is a list of these.
    jobs : int
        Worker processes of a new LocalCluster (ignored with ``scheduler``).
    scheduler : str, optional
        Address of an existing Dask scheduler (``tcp://HOST:PORT``).
    started : renderer.cluster.DaskStart, optional
        A client already being started (it is not closed here).
    use_cache : bool
        Read and write the disk cache (one file per table, written atomically).
    stream : file, optional
        Where the plan is printed (default stdout; it is printed before any solve).
    progress : callable, optional
        Receives the number of directions finished.

    Returns
    -------
    list of SpinTable, in the order of ``specs`` (arrays bitwise equal to a local run)
    """
    stream = stream or sys.stdout
    if jobs < 1:
        raise MagretinaError(f"--jobs {jobs}: must be >= 1")
    specs = list(specs)
    tables, jobs_todo = [None] * len(specs), []
    prepared = []
    for k, sp in enumerate(specs):
        if "pair" not in sp or "field_T" not in sp:
            raise MagretinaError(f"spin table {k}: needs 'pair' and 'field_T'")
        job = prepare_table(sp["pair"], sp["field_T"], sp.get("lmax", 16), sp.get("order"),
                            sp.get("method", "auto"))
        prepared.append(job)
        hit = cached_table(job, sp.get("meta")) if use_cache else None
        if hit is not None:
            tables[k] = hit
            if progress is not None:
                progress(len(job.nodes))
        else:
            jobs_todo.append(k)
    own = started is None
    if jobs_todo and own:
        started = DaskStart(jobs, scheduler, warm=None)
    try:
        n_workers = started.n_workers() if jobs_todo else max(1, int(jobs))
        rows = table_plan([prepared[k] for k in jobs_todo], n_workers)
        print(format_plan(rows, n_workers, len(specs) - len(jobs_todo)), file=stream,
              flush=True)
        if not jobs_todo:
            return tables
        _run(started, specs, prepared, jobs_todo, tables, n_workers, use_cache, progress,
             tasks_per_worker)
    finally:
        if own and started is not None:
            started.close()
    return tables


def _run(started, specs, prepared, todo, tables, n_workers, use_cache, progress,
         tasks_per_worker):
    from dask.distributed import as_completed  # deferred: the optional [scale] extra


    client, _ = started.wait()
    total = sum(len(prepared[k].keep) for k in todo)
    size = max(1, math.ceil(total / (n_workers * max(1, int(tasks_per_worker)))))
    vals, left, futs = {}, {}, {}
    for k in todo:
        job = prepared[k]
        fields = job.fields_T
        if progress is not None:  # the partner nodes cost nothing
            progress(len(job.nodes) - len(job.keep))
        # the pair once per worker, not once per batch
        pair_f = client.scatter(job.pair, broadcast=True, hash=False)
        vals[k] = np.empty(len(fields))
        left[k] = 0
        for a in range(0, len(fields), size):
            b = min(len(fields), a + size)
            f = client.submit(_solve, pair_f, fields[a:b], job.method, pure=False,
                              key=f"magretina-spin-{job.key[:12]}-{a}-{uuid.uuid4().hex[:8]}")
            futs[f] = (k, a, b)
            left[k] += 1
    try:
        for f in as_completed(list(futs)):
            k, a, b = futs.pop(f)
            vals[k][a:b] = f.result()
            if progress is not None:
                progress(b - a)
            left[k] -= 1
            if left[k] == 0:  # fitted and cached as soon as its last direction is back
                tables[k] = finish_table(prepared[k], vals.pop(k), use_cache,
                                         specs[k].get("meta"))
    except BaseException:
        client.cancel(list(futs))
        raise
