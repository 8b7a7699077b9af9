"""Benchmark: validating and planning a study of 100,000 shots (one frame each).

The study sweeps ``render.gain`` over a linspace of ``--shots`` values (one tiny
world panorama per shot, a fixed field) and, in one run, times (best and median of
``--repeat`` interleaved repeats): ``load_study`` (read and validate the file),
``plan`` (every value checked, every shot expanded with its frames, field, seeds and
resources) and ``magretina run --dry-run`` as a whole (plan, estimate, folder checks,
the printed summary), and prints microseconds per shot.  Nothing is rendered or
written outside a temporary folder.

Run:  .venv/bin/python bench/plan.py [--shots 100000] [--repeat 3]
"""

from __future__ import annotations

import argparse
import contextlib
import io
import os
import statistics
import sys
import tempfile
import time

sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))

from renderer.study import load_study, plan  # noqa: E402
from renderer.study.runner import run_study  # noqa: E402

STUDY = """
[study]
name = "plan-bench"
seed = 1

[field]
model = "fixed"
total_uT = 50.0
inclination_deg = 60.0

[views.world]
kind = "world-panorama"
width = 16

[sequence]
kind = "still"
frames = 1

[[sweep.axis]]
key = "render.gain"
linspace = [0.5, 1.5, {n}]
"""


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--shots", type=int, default=100000)
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args()
    with tempfile.TemporaryDirectory() as d:
        path = os.path.join(d, "study.toml")
        with open(path, "w", encoding="utf-8") as fh:
            fh.write(STUDY.format(n=a.shots))
        times = {"load_study": [], "plan": [], "run --dry-run": []}
        for _ in range(a.repeat):
            t0 = time.perf_counter()
            st = load_study(path)
            t1 = time.perf_counter()
            p = plan(st)
            t2 = time.perf_counter()
            with contextlib.redirect_stdout(io.StringIO()):
                run_study(path, os.path.join(d, "out"), dry=True, progress=False)
            t3 = time.perf_counter()
            times["load_study"].append(t1 - t0)
            times["plan"].append(t2 - t1)
            times["run --dry-run"].append(t3 - t2)
            assert len(p.shots) == a.shots
    print(f"study of {a.shots} shots (one frame each), {a.repeat} repeats")
    for k, v in times.items():
        print(f"  {k:<14} best {min(v):7.2f} s  median {statistics.median(v):7.2f} s  "
              f"({min(v) / a.shots * 1e6:.0f} µs/shot)")


if __name__ == "__main__":
    main()
