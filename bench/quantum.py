"""Benchmark: full-sphere quantum and yield Fisher information for a pair of dimension ≥ 500.

Builds a flavin–tryptophan-like pair from the ``fad-trp-7n`` preset (radical A: its four
nuclei, radical B: its two protons; Hilbert dimension 4 × 36 × 4 = 576; ``--large``: A's
first three nuclei and all three of B, dimension 864), then times in one run (a) the
information table (two dense eigendecompositions and about a dozen N×N products per
direction, every Lebedev node solved) and (b) the equal-rate yield at the same
directions with the eigenbasis solver, and prints seconds per direction for both, their
ratio, the full-sphere total, the total extrapolated to the order-17 grid (110
directions, the table's default) and the quantum/yield ratio range.  The default grid
(Lebedev order 7, 26 directions) keeps the run to a few minutes on a loaded 2-core
machine; the cost is per direction, so the extrapolation is linear.

Run:  .venv/bin/python bench/quantum.py [--order 7] [--large]
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from dataclasses import replace

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))

from renderer.response.harmonic import lebedev_grid  # noqa: E402
from renderer.spin import load_pair, singlet_yield  # noqa: E402
from renderer.response.information_table import compute_information_table  # noqa: E402


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--order", type=int, default=7, help="Lebedev order of the sphere grid")
    ap.add_argument("--field-uT", type=float, default=50.0)
    ap.add_argument("--large", action="store_true",
                    help="dimension 864 (A: first three nuclei, B: all three)")
    a = ap.parse_args()
    base = load_pair("fad-trp-7n")
    if a.large:
        pair = replace(base, a=replace(base.a, nuclei=base.a.nuclei[:3]))
    else:
        protons = tuple(n for n in base.b.nuclei if n.spin == 0.5)
        pair = replace(base, b=replace(base.b, nuclei=protons))
    nodes, _ = lebedev_grid(a.order)
    n17 = len(lebedev_grid(17)[0])
    b = a.field_uT * 1e-6
    print(f"pair: Hilbert dimension {pair.dim}, {len(nodes)} directions (Lebedev order {a.order})")
    t0 = time.perf_counter()
    table = compute_information_table(pair, b, order=a.order, use_cache=False)
    t_info = time.perf_counter() - t0
    t0 = time.perf_counter()
    singlet_yield(pair, b * nodes, method="eigenbasis")
    t_yield = time.perf_counter() - t0
    s = table.summary()
    print(f"information table: {t_info:.2f} s total, {t_info / len(nodes) * 1e3:.1f} ms/direction")
    print(f"yield only (eigenbasis): {t_yield:.2f} s total, {t_yield / len(nodes) * 1e3:.1f} ms/direction")
    print(f"ratio information / yield: {t_info / t_yield:.2f}")
    print(f"full sphere at Lebedev order 17 ({n17} directions), extrapolated: information "
          f"{t_info / len(nodes) * n17:.0f} s, yield {t_yield / len(nodes) * n17:.0f} s")
    print(f"quantum / yield information along the gradient: min {s['ratio_along_gradient_min']:.3g}, "
          f"median {s['ratio_along_gradient_median']:.3g}, max {s['ratio_along_gradient_max']:.3g}")


if __name__ == "__main__":
    main()
