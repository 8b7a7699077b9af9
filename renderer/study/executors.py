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
Dask worker (``broadcast=True``) and passed as futures.  Dask tasks are submitted
with ``pure=False`` so units with equal arguments are never merged.  Ctrl-C terminates the pool's processes (their files
are written atomically, so nothing partial is left visible).  This module does not
decide what to render.
"""

from __future__ import annotations

import os
import pickle
import tempfile
import uuid

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


class DaskExecutor:
    """A Dask ``Client`` on a new LocalCluster (``jobs`` workers) or on ``scheduler``."""

    name = "dask"

    def __init__(self, resources, jobs, scheduler=None):
        try:  # deferred: dask is the optional [scale] extra
            from dask.distributed import Client, LocalCluster, as_completed
        except ImportError:
            raise MagretinaError("--executor dask needs the scale extra: pip install "
                                 "'magretina[scale]'") from None
        self.cluster = None
        if scheduler:
            try:
                self.client = Client(scheduler, timeout="20s")
            except (OSError, TimeoutError) as exc:
                raise MagretinaError(f"--scheduler {scheduler}: cannot connect ({exc})") from None
        else:
            self.cluster = LocalCluster(n_workers=jobs, threads_per_worker=1, processes=True,
                                        dashboard_address=None)
            self.client = Client(self.cluster)
        # One copy of each distinct geometry per worker, not one per task.
        self.res = {k: self.client.scatter(v, broadcast=True, hash=False)
                    for k, v in resources.items()}
        self.ac = as_completed()
        self.futures = []

    def submit(self, kind, task):
        task = dict(task, numba_threads=1)
        fut = self.client.submit(_FUNCS[kind], task, self.res[task["res_key"]], pure=False,
                                 key=f"magretina-{kind}-{task['shot_id']}-{uuid.uuid4().hex[:8]}")
        self.futures.append(fut)
        self.ac.add(fut)

    def next_result(self):
        fut = next(self.ac)
        self.futures.remove(fut)
        return fut.result()

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
        return DaskExecutor(resources, jobs, scheduler)
    if scheduler:
        raise MagretinaError("--scheduler needs --executor dask")
    threads = _threads_per_worker(jobs)
    if jobs == 1:
        return InlineExecutor(resources, threads)
    if started is not None:
        started.set_resources(resources, work_dir)
        return started
    return LocalExecutor(resources, jobs, threads, work_dir)
