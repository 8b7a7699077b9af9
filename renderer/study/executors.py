"""Where work units run: in this process, a local process pool, or a Dask cluster.

Every executor has ``submit(kind, task)`` (kind ``"render"`` or ``"finish"``, see
:mod:`.worker`) and ``next_result()``, which blocks until some unit has finished
and returns its result (or raises its exception), so the runner streams results
as they arrive.  Shared resources (layout, views with their precomputed direction
tables, responses, scene) are sent once per worker: as the pool initializer's
arguments, or scattered to every Dask worker (``broadcast=True``) and passed as
futures.  Dask tasks are submitted with ``pure=False`` so units with equal
arguments are never merged.  Ctrl-C terminates the pool's processes (their files
are written atomically, so nothing partial is left visible).  This module does not
decide what to render.
"""

from __future__ import annotations

import os
import queue
import uuid

from ..errors import MagretinaError
from . import worker

EXECUTORS = ("local", "dask")
_FUNCS = {"render": worker.render_chunk, "finish": worker.finish_shot}


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
    """A ``multiprocessing`` pool of ``jobs`` spawned worker processes."""

    name = "local"

    def __init__(self, resources, jobs, numba_threads=None):
        import multiprocessing as mp

        # "spawn": forking a parent that already runs numba's thread pool is unsafe.
        self.pool = mp.get_context("spawn").Pool(
            jobs, initializer=worker.init_worker, initargs=(resources, numba_threads))
        self.q = queue.Queue()

    def submit(self, kind, task):
        self.pool.apply_async(_FUNCS[kind], (task,), callback=lambda r: self.q.put((True, r)),
                              error_callback=lambda e: self.q.put((False, e)))

    def next_result(self):
        while True:
            try:
                ok, r = self.q.get(timeout=0.25)
            except queue.Empty:
                continue
            if not ok:
                raise r
            return r

    def close(self, cancel=False):
        if cancel:
            self.pool.terminate()
        else:
            self.pool.close()
        self.pool.join()


class DaskExecutor:
    """A Dask ``Client`` on a new LocalCluster (``jobs`` workers) or on ``scheduler``."""

    name = "dask"

    def __init__(self, resources, jobs, scheduler=None):
        try:
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


def make_executor(kind, resources, jobs, scheduler=None):
    if kind not in EXECUTORS:
        raise MagretinaError(f"--executor {kind!r}: allowed {', '.join(EXECUTORS)}")
    if jobs < 1:
        raise MagretinaError(f"--jobs {jobs}: must be >= 1")
    if kind == "dask":
        return DaskExecutor(resources, jobs, scheduler)
    if scheduler:
        raise MagretinaError("--scheduler needs --executor dask")
    cores = os.cpu_count() or 1
    threads = max(1, cores // jobs)
    if jobs == 1:
        return InlineExecutor(resources, threads)
    return LocalExecutor(resources, jobs, threads)
