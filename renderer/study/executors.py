"""Where work units run: in this process, a local process pool, or a Dask cluster.

Every executor has ``submit(kind, task)`` (kind ``"render"`` or ``"finish"``, see
:mod:`.worker`) and ``next_result()``, which blocks until some unit has finished
and returns its result (or raises its exception), so the runner streams results
as they arrive.  Shared resources (layout, views with their precomputed direction
tables, responses, scene) are sent once per worker: pickled once to a private
file in the study folder's work area that each pool worker loads on its first unit (so the pool can be
started, and its workers import the library, while the runner is still planning;
large initializer arguments would also make the spawned workers start one after
the other, each blocking the parent until it has read them), or scattered to every
Dask worker (``broadcast=True``, once per run) and passed as futures.  Dask gets the
units in batches (:data:`DASK_BATCHES_PER_WORKER` per worker and round of submissions),
so a long list of one-frame shots costs a few dozen Dask tasks, not one per shot; its
cluster is started (and the library imported on the workers) while the runner plans,
like the local pool.  Dask tasks are submitted with ``pure=False`` so units with equal
arguments are never merged.  Ctrl-C terminates the pool's processes (their files
are written atomically, so nothing partial is left visible).  This module does not
decide what to render.
"""

from __future__ import annotations

import collections
import math
import os
import pickle
import tempfile
import uuid

from ..cluster import DaskStart
from ..errors import MagretinaError
from . import worker
from .pipepool import PipePool

EXECUTORS = ("local", "dask")
_FUNCS = worker.UNITS


class InlineExecutor:
    """Runs each unit in this process when it is collected (``--jobs 1``)."""

    name = "inline"

    def __init__(self, resources, numba_threads=None):
        self.resources = resources
        self.todo = []
        worker._set_threads(numba_threads)

    def submit(self, kind, task):
        self.todo.append((kind, task))

    def next_result(self):
        kind, task = self.todo.pop(0)
        return _FUNCS[kind](task, self.resources[task["res_key"]])

    def close(self, cancel=False):
        self.todo.clear()


class LocalExecutor:
    """A pool of ``jobs`` worker processes (:class:`.pipepool.PipePool`).

    ``resources`` may be given later with :meth:`set_resources` (before the first
    ``submit``): :func:`start_local` starts the pool early so that worker start-up
    overlaps the runner's planning.  The resources are pickled into ``work_dir``
    (the study folder's hidden work area), never into the system temporary folder,
    so a killed run cannot orphan the file outside its output folder.
    """

    name = "local"

    def __init__(self, resources, jobs, numba_threads=None, work_dir=None):
        # Fresh interpreters, not forks: forking a parent that already runs numba's
        # thread pool is unsafe; pipes, not multiprocessing queues, so that no named
        # semaphore is left in /dev/shm by a killed run.
        self.pool = PipePool(jobs, numba_threads)
        self.res_path = None
        self.closed = False
        if resources is not None:
            self.set_resources(resources, work_dir)

    def set_resources(self, resources, work_dir=None):
        folder = work_dir or tempfile.gettempdir()
        os.makedirs(folder, exist_ok=True)
        fd, path = tempfile.mkstemp(prefix="magretina-resources-", suffix=".pkl", dir=folder)
        self.res_path = path
        with os.fdopen(fd, "wb") as fh:
            pickle.dump(resources, fh, protocol=pickle.HIGHEST_PROTOCOL)

    def submit(self, kind, task):
        self.pool.submit(kind, dict(task, resources_path=self.res_path))

    def next_result(self):
        return self.pool.next_result()

    def close(self, cancel=False):
        if self.closed:
            return
        self.closed = True
        try:
            # The runner closes only after it has collected every unit's result, so the
            # workers are idle: ending them at once is safe (each file was written
            # atomically and reported before its unit returned).
            self.pool.close()
        finally:
            if self.res_path is not None:
                try:
                    os.remove(self.res_path)
                except OSError:
                    pass


# Dask tasks per worker for the units submitted before the runner next waits: enough
# for the workers to end within a few units of each other, few enough that Dask's own
# cost per task (scheduling, result transfer; several ms) stays small.
DASK_BATCHES_PER_WORKER = 8


def _run_batch(units, resources):
    """Run several units in a row on one Dask worker; their results in order."""
    return [_FUNCS[kind](task, resources[task["res_key"]]) for kind, task in units]


def _warm_worker():
    """Run on every Dask worker once it is up: unpickling this function imports this
    module and :mod:`.worker` (everything a unit needs) before the first unit arrives."""
    return os.getpid()


def start_dask(jobs, scheduler=None):
    """Start Dask before the resources are known (see :class:`renderer.cluster.DaskStart`);
    its workers import the library meanwhile."""
    return DaskStart(jobs, scheduler, warm=_warm_worker)


class DaskExecutor:
    """A Dask ``Client`` on a new LocalCluster (``jobs`` workers) or on ``scheduler``.

    Units are queued by ``submit`` and sent as batches (:func:`_run_batch`) when the
    runner next waits for a result; the shared resources are scattered once to every
    worker and stay there for the whole run.
    """

    name = "dask"

    def __init__(self, resources, jobs, scheduler=None, started=None):
        from dask.distributed import as_completed  # deferred: the optional [scale] extra

        started = started or start_dask(jobs, scheduler)
        self.client, self.cluster = started.wait()
        self.n_workers = started.n_workers()
        # One copy of each distinct geometry per worker, not one per task.
        self.res = {k: self.client.scatter(v, broadcast=True, hash=False)
                    for k, v in resources.items()}
        self.ac = as_completed()
        self.futures = []
        self.queued = []
        self.ready = collections.deque()

    def submit(self, kind, task):
        self.queued.append((kind, dict(task, numba_threads=1)))

    def _flush(self):
        q, self.queued = self.queued, []
        if not q:
            return
        size = max(1, math.ceil(len(q) / (self.n_workers * DASK_BATCHES_PER_WORKER)))
        for k in range(0, len(q), size):
            units = q[k:k + size]
            res = {key: self.res[key] for key in sorted({t["res_key"] for _, t in units})}
            fut = self.client.submit(_run_batch, units, res, pure=False,
                                     key=f"magretina-batch-{units[0][1]['shot_id']}-"
                                         f"{uuid.uuid4().hex[:8]}")
            self.futures.append(fut)
            self.ac.add(fut)

    def next_result(self):
        if not self.ready:
            self._flush()
            fut = next(self.ac)
            self.futures.remove(fut)
            self.ready.extend(fut.result())
        return self.ready.popleft()

    def close(self, cancel=False):
        try:
            if cancel and self.futures:
                self.client.cancel(self.futures)
            self.client.close()
        finally:
            if self.cluster is not None:
                self.cluster.close()


def _threads_per_worker(jobs):
    return max(1, (os.cpu_count() or 1) // jobs)


def start_local(jobs):
    """Start the local pool before its resources are known (see :class:`LocalExecutor`)."""
    return LocalExecutor(None, jobs, _threads_per_worker(jobs))


def make_executor(kind, resources, jobs, scheduler=None, started=None, work_dir=None):
    """The executor for ``kind``; ``started`` is a pool from :func:`start_local` to use;
    ``work_dir`` where a local pool's resource file goes (the study's work area)."""
    if kind not in EXECUTORS:
        raise MagretinaError(f"--executor {kind!r}: allowed {', '.join(EXECUTORS)}")
    if jobs < 1:
        raise MagretinaError(f"--jobs {jobs}: must be >= 1")
    if kind == "dask":
        return DaskExecutor(resources, jobs, scheduler,
                            started if isinstance(started, DaskStart) else None)
    if scheduler:
        raise MagretinaError("--scheduler needs --executor dask")
    threads = _threads_per_worker(jobs)
    if jobs == 1:
        return InlineExecutor(resources, threads)
    if isinstance(started, LocalExecutor):
        started.set_resources(resources, work_dir)
        return started
    return LocalExecutor(resources, jobs, threads, work_dir)
