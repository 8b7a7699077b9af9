"""Starting a Dask client for magretina's parallel work (study frames, spin-table directions).

One place decides how a cluster is reached: a new ``LocalCluster`` of worker processes
(one thread each, no dashboard) or an existing scheduler address.  :class:`DaskStart`
does it in a background thread, so the caller can plan while the workers start and
import the library (``warm``, run once on every worker).  This module does not decide
what runs on the workers (see :mod:`renderer.study.executors` and
:mod:`renderer.response.cluster`).
"""

from __future__ import annotations

import threading

from .errors import MagretinaError


def need_dask():
    """Import dask.distributed, or raise the MagretinaError that names the extra to install."""
    try:
        # deferred: dask is the optional [scale] extra
        import dask.distributed  # noqa: F401
    except ImportError:
        raise MagretinaError("--executor dask needs the scale extra: pip install "
                             "'magretina[scale]'") from None


class DaskStart:
    """A Dask client being started in a background thread.

    Parameters
    ----------
    jobs : int
        Worker processes of a new LocalCluster (ignored with ``scheduler``).
    scheduler : str, optional
        Address of an existing scheduler (``tcp://HOST:PORT``).
    warm : callable, optional
        Run once on every worker after it is up (e.g. to import the library).
    """

    def __init__(self, jobs, scheduler=None, warm=None):
        need_dask()
        self.jobs, self.scheduler, self.warm = jobs, scheduler, warm
        self.client = self.cluster = self.error = None
        self.thread = threading.Thread(target=self._start, name="magretina-dask-start",
                                       daemon=True)
        self.thread.start()

    def _start(self):
        from dask.distributed import Client, LocalCluster  # deferred: optional [scale] extra

        try:
            if self.scheduler:
                try:
                    self.client = Client(self.scheduler, timeout="20s")
                except (OSError, TimeoutError) as exc:
                    raise MagretinaError(f"--scheduler {self.scheduler}: cannot connect "
                                         f"({exc})") from None
            else:
                self.cluster = LocalCluster(n_workers=self.jobs, threads_per_worker=1,
                                            processes=True, dashboard_address=None)
                self.client = Client(self.cluster)
            if self.warm is not None:
                self.client.run(self.warm)
        except BaseException as exc:  # re-raised by wait(), in the caller's thread
            self.error = exc

    def wait(self):
        """The started (client, cluster or None); raises what starting raised."""
        self.thread.join()
        if self.error is not None:
            self.close()
            raise self.error
        return self.client, self.cluster

    def n_workers(self) -> int:
        """Workers the scheduler knows now (at least 1)."""
        client, _ = self.wait()
        try:
            n = len(client.scheduler_info().get("workers", {}))
        except Exception:  # an older scheduler: fall back to the requested count
            n = 0
        return max(1, n or int(self.jobs or 1))

    def close(self, cancel=False):
        self.thread.join()
        try:
            if self.client is not None:
                self.client.close()
        finally:
            if self.cluster is not None:
                self.cluster.close()
