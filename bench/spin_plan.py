"""Measured against estimated cost of the spin-plan methods, side by side in one run.

Prints, for the Monte Carlo and eigenbasis paths, the planner's estimate
(:mod:`renderer.spin.planner`) and the time measured here, and their ratio.  The
7-nucleus pair's Monte Carlo cost is measured through its parts (one propagator
step on all samples, times the planner's step count), since a full run takes hours;
``--full`` also runs its eigenbasis yield.  A ratio near 1 (within the spread of a
shared machine, a factor of ~3) means the planner ranks the methods as they run.

    python bench/spin_plan.py [--samples 16] [--full]
"""

from __future__ import annotations

import argparse
import math
import time

import numpy as np


def _time(fn, repeat=3):
    best = math.inf
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t)
    return best


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=16)
    ap.add_argument("--full", action="store_true", help="also run the 7-nucleus eigenbasis yield")
    a = ap.parse_args()

    from threadpoolctl import threadpool_limits

    from renderer.spin import singlet_yield
    from renderer.spin.definition import load_pair
    from renderer.spin.montecarlo import sample_yields
    from renderer.spin.planner import MATMUL_S_PER_OP, estimate, montecarlo_seconds

    b = np.array([0.0, 0.0, 50e-6])
    small = load_pair("fad-trp-3n")
    est = montecarlo_seconds(small, 50e-6, a.samples)
    got = _time(lambda: sample_yields(small, b, a.samples), repeat=1)
    print(f"montecarlo  fad-trp-3n (dim {small.dim}), {a.samples} samples: estimated {est:.3g} s, "
          f"measured {got:.3g} s, measured/estimated {got / est:.2f}")
    e_eig = next(e for e in estimate(small, 50e-6) if e.method == "eigenbasis").seconds_per_direction
    got = _time(lambda: singlet_yield(small, b, method="eigenbasis"))
    print(f"eigenbasis  fad-trp-3n: estimated {e_eig:.3g} s, measured {got:.3g} s, "
          f"ratio {got / e_eig:.2f}")

    big = load_pair("fad-trp-7n")
    n = big.dim
    rng = np.random.default_rng(0)
    step = (rng.standard_normal((n, n)) + 1j * rng.standard_normal((n, n))) / n
    psi = rng.standard_normal((n, a.samples)) + 0j
    with threadpool_limits(1, user_api="blas"):
        got = _time(lambda: step @ psi)
    est = n * n * a.samples * MATMUL_S_PER_OP
    print(f"montecarlo  fad-trp-7n (dim {n}) one step on {a.samples} samples: estimated "
          f"{est:.3g} s, measured {got:.3g} s, ratio {got / est:.2f}")
    ests = {e.method: e.seconds_per_direction for e in estimate(big, 50e-6, n_samples=256)}
    print(f"planner, fad-trp-7n, 256 samples: montecarlo {ests['montecarlo']:.3g} s vs eigenbasis "
          f"{ests['eigenbasis']:.3g} s per direction (Monte Carlo/exact = "
          f"{ests['montecarlo'] / ests['eigenbasis']:.3g})")
    if a.full:
        got = _time(lambda: singlet_yield(big, b, method="eigenbasis"), repeat=1)
        print(f"eigenbasis  fad-trp-7n: estimated {ests['eigenbasis']:.3g} s, measured {got:.3g} s, "
              f"ratio {got / ests['eigenbasis']:.2f}")


if __name__ == "__main__":
    main()
