"""A small process pool over plain pipes: worker processes that leave nothing behind when killed.

``multiprocessing`` pools started with "spawn" create named POSIX semaphores
(``/dev/shm/sem.mp-*``) for their queues; they are unlinked only by a clean
shutdown or by the resource-tracker process, so a run killed with its process
group (SIGKILL) leaks several per pool.  This pool uses none: each worker is a
``python -m renderer.study.pipepool`` child that reads length-prefixed pickled
units on its stdin and writes pickled results on a private copy of its stdout
(its own fd 1 is pointed at stderr, so stray prints cannot corrupt the stream).
A worker exits when its stdin closes (the parent ended) and stops between frames
when its parent is gone (see :func:`renderer.study.worker.parent_gone`).  This
module runs units; it does not decide what to render (see :mod:`.runner`).
"""

from __future__ import annotations

import os
import pickle
import queue
import struct
import subprocess
import sys
import threading

from . import worker

_HEAD = struct.Struct("<Q")


def _write_msg(fh, obj):
    data = pickle.dumps(obj, protocol=pickle.HIGHEST_PROTOCOL)
    fh.write(_HEAD.pack(len(data)) + data)
    fh.flush()


def _read_exact(fh, n):
    buf = b""
    while len(buf) < n:
        chunk = fh.read(n - len(buf))
        if not chunk:
            return None
        buf += chunk
    return buf


def _read_msg(fh):
    head = _read_exact(fh, _HEAD.size)
    if head is None:
        return None
    body = _read_exact(fh, _HEAD.unpack(head)[0])
    return None if body is None else pickle.loads(body)


class WorkerDied(RuntimeError):
    """A worker process ended without returning its unit's result."""


class PipePool:
    """``jobs`` worker processes running :mod:`.worker` units; see the module docstring.

    Parameters
    ----------
    jobs : int
        Worker processes.
    numba_threads : int or None
        Numba threads per worker.
    """

    def __init__(self, jobs, numba_threads=None):
        env = dict(os.environ)
        # The children import this very package (a source checkout shadows an install).
        root = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
        env["PYTHONPATH"] = root + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
        self.results = queue.Queue()
        self.procs = []
        self.busy = {}
        self.backlog = []
        self.lock = threading.Lock()
        for _ in range(int(jobs)):
            p = subprocess.Popen([sys.executable, "-m", "renderer.study.pipepool",
                                  str(numba_threads or 0)], stdin=subprocess.PIPE,
                                 stdout=subprocess.PIPE, env=env, close_fds=True)
            self.procs.append(p)
            threading.Thread(target=self._reader, args=(p,), daemon=True).start()
        self.idle = list(self.procs)

    def _reader(self, p):
        while True:
            try:
                msg = _read_msg(p.stdout)
            except Exception as exc:  # a torn or unpicklable message
                msg = (False, WorkerDied(f"worker {p.pid}: unreadable result ({exc})"))
            if msg is None:
                self.results.put((p, False, WorkerDied(f"worker process {p.pid} ended")))
                return
            self.results.put((p, *msg))

    def submit(self, fn_name, task):
        """Queue one unit: ``fn_name`` a key of :data:`renderer.study.executors._FUNCS`."""
        self.backlog.append((fn_name, task))
        self._dispatch()

    def _dispatch(self):
        while self.idle and self.backlog:
            p = self.idle.pop(0)
            unit = self.backlog.pop(0)
            self.busy[p] = unit
            try:
                _write_msg(p.stdin, unit)
            except (BrokenPipeError, OSError):
                self.busy.pop(p, None)
                self.results.put((p, False, WorkerDied(f"worker process {p.pid} ended")))

    def next_result(self):
        """The next finished unit's result (raises its exception)."""
        while True:
            try:
                p, ok, r = self.results.get(timeout=0.25)
            except queue.Empty:
                continue
            had = self.busy.pop(p, None)
            if isinstance(r, WorkerDied):
                if had is None:
                    continue  # an idle worker ended (we are closing)
                raise r
            self.idle.append(p)
            self._dispatch()
            if not ok:
                raise r
            return r

    def close(self):
        """End every worker now (their files are written atomically) and reap them."""
        for p in self.procs:
            try:
                p.stdin.close()
            except OSError:
                pass
            if p.poll() is None:
                p.kill()
        for p in self.procs:
            try:
                p.wait(timeout=10)
            except subprocess.TimeoutExpired:  # pragma: no cover - a stuck kernel call
                pass
            try:
                p.stdout.close()
            except OSError:
                pass


def _serve(numba_threads):
    out = os.fdopen(os.dup(1), "wb")
    os.dup2(2, 1)
    inp = sys.stdin.buffer
    worker.init_worker(numba_threads or None)
    worker.watch_parent()
    while True:
        try:
            msg = _read_msg(inp)
        except Exception:
            return
        if msg is None:
            return
        kind, task = msg
        try:
            res = (True, worker.UNITS[kind](task))
        except Exception as exc:
            res = (False, exc)
        try:
            _write_msg(out, res)
        except (BrokenPipeError, OSError):
            return
        except Exception as exc:  # an exception that cannot be pickled
            _write_msg(out, (False, RuntimeError(f"{type(exc).__name__}: {exc}")))


if __name__ == "__main__":
    _serve(int(sys.argv[1]) if len(sys.argv) > 1 else 0)
