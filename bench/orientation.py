"""Benchmark: predicting the orientation outcome of a 6-condition, 3-hypothesis study.

Runs the worked example (renderer/study/examples/orientation_study.toml, an invented
scenario) and prints, side by side in one run, the time of each stage: expanding the
study (field), the grid predictions (18 = 6 conditions × 3 hypotheses), the
Monte-Carlo animals, and the animals-needed estimates, plus the share of the grid
prediction spent in receptor counts versus the KL matrix.  Best of --repeat runs.
Run: python bench/orientation.py [--headings 180] [--density 0.005] [--repeat 3]
"""

from __future__ import annotations

import argparse
import os
import re
import tempfile
import time

import numpy as np


def best_of(fn, repeat):
    best, out = np.inf, None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--headings", type=int, default=180, help="heading grid size (even)")
    ap.add_argument("--density", type=float, default=0.005, help="receptors per deg²")
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args()

    from renderer.orientation import model as M
    from renderer.study import load_study
    from renderer.study.expand import plan
    from renderer.study.orientation import predict_plan

    here = os.path.dirname(os.path.abspath(__file__))
    src = os.path.join(here, "..", "renderer", "study", "examples", "orientation_study.toml")
    text = open(src, encoding="utf-8").read()
    text = re.sub(r"headings = \d+", f"headings = {a.headings}", text)
    text = re.sub(r"density = [0-9.e-]+", f"density = {a.density}", text)
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "study.toml")
        with open(path, "w", encoding="utf-8") as fh:
            fh.write(text)
        study = load_study(path)
        t_plan, p = best_of(lambda: plan(study), a.repeat)
        t_grid, (per, doc) = best_of(lambda: predict_plan(study, 0, False, plan_=p), a.repeat)
        t_mc, _ = best_of(lambda: predict_plan(study, None, False, plan_=p), a.repeat)
        t_pow, _ = best_of(lambda: predict_plan(study, None, True, plan_=p), a.repeat)

        # split of one grid prediction: counts (receptor likelihood) vs KL matrix
        tk, tc = [0.0], [0.0]
        kl0, cc0 = M.kl_matrix, M.Predictor.condition_counts

        def kl(*x, **k):
            t = time.perf_counter()
            r = kl0(*x, **k)
            tk[0] += time.perf_counter() - t
            return r

        def cc(self, c):
            t = time.perf_counter()
            r = cc0(self, c)
            tc[0] += time.perf_counter() - t
            return r

        M.kl_matrix, M.Predictor.condition_counts = kl, cc
        try:
            predict_plan(study, 0, False, plan_=p)
        finally:
            M.kl_matrix, M.Predictor.condition_counts = kl0, cc0
    s = doc["shots"][0]
    n_pred = len(s["rows"])
    rec = s["model"]["receptors"]
    print(f"study: {len(s['conditions'])} conditions x {len(s['hypotheses'])} hypotheses = "
          f"{n_pred} predictions; grid {a.headings} headings; density {rec['density']} per deg²")
    print(f"expand study (IGRF field)         {t_plan:8.3f} s")
    print(f"grid predictions                  {t_grid:8.3f} s  ({t_grid / n_pred * 1e3:.1f} ms each)")
    print(f"  of which receptor counts        {tc[0]:8.3f} s  ({tc[0] / max(t_grid, 1e-9):.0%})")
    print(f"  of which KL matrices            {tk[0]:8.3f} s  ({tk[0] / max(t_grid, 1e-9):.0%})")
    print(f"+ Monte Carlo ({study.resolved['orientation']['monte_carlo']} animals/condition) "
          f"{t_mc:8.3f} s  ({t_mc / t_grid:.2f}x grid only)")
    print(f"+ animals needed (power)          {t_pow:8.3f} s  ({t_pow / t_grid:.2f}x grid only)")


if __name__ == "__main__":
    main()
