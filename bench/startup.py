"""Start-up times a user feels, as whole-process wall and CPU (user + sys of the child)
times: ``magretina --help``, ``magretina field``, the first ``magretina demo`` in a fresh
environment (empty NUMBA_CACHE_DIR) and a later one.  CPU time is far less sensitive to
other load on the machine than wall time; judge the targets by it on a busy machine.

Usage: python bench/startup.py [--runs N] [--cold-runs N]
Not a test: prints figures beside the targets, asserts nothing.
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time

TARGETS = {"--help": 0.5, "field": 0.5, "demo (cold cache)": 40.0, "demo (warm cache)": 8.0}


def timed(args, env):
    """(wall s, user+sys CPU s) of one ``python -m renderer ARGS`` process."""
    r0 = resource.getrusage(resource.RUSAGE_CHILDREN)
    t = time.perf_counter()
    subprocess.run([sys.executable, "-m", "renderer", *args], env=env, check=True,
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    wall = time.perf_counter() - t
    r1 = resource.getrusage(resource.RUSAGE_CHILDREN)
    return wall, (r1.ru_utime - r0.ru_utime) + (r1.ru_stime - r0.ru_stime)


def line(name, samples):
    w = [s[0] for s in samples]
    c = [s[1] for s in samples]
    print(f"{name:20s} wall median {statistics.median(w):6.2f} s (min {min(w):.2f}, max "
          f"{max(w):.2f})  cpu median {statistics.median(c):6.2f} s  target {TARGETS[name]:g} s"
          f"  runs {len(w)}")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=5, help="runs of each warm case (default 5)")
    ap.add_argument("--cold-runs", type=int, default=1,
                    help="cold demo runs, each with a fresh numba cache (default 1)")
    a = ap.parse_args()
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    with tempfile.TemporaryDirectory() as tmp:
        base = dict(os.environ, PYTHONPATH=root)
        out = os.path.join(tmp, "demo")
        cold = []
        for k in range(a.cold_runs):
            env = dict(base, NUMBA_CACHE_DIR=os.path.join(tmp, f"cache{k}"))
            cold.append(timed(["demo", "--out", out, "--force"], env))
        env = dict(base, NUMBA_CACHE_DIR=os.path.join(tmp, "cache0"))
        print(f"{os.cpu_count()} CPUs, load average {os.getloadavg()[0]:.1f}")
        line("--help", [timed(["--help"], env) for _ in range(a.runs)])
        site = ["--lat-deg", "-33.1", "--lon-deg", "-71.6"]
        line("field", [timed(["field", *site], env) for _ in range(a.runs)])
        line("demo (cold cache)", cold)
        line("demo (warm cache)", [timed(["demo", "--out", out, "--force"], env)
                                   for _ in range(a.runs)])


if __name__ == "__main__":
    main()
