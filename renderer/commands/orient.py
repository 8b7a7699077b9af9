"""``magretina orient``: predicted orientation of an experiment, and analysis of observed headings.

``orient predict STUDY.toml`` prints, for each shot of the study (sweeps included),
the predicted mean heading, mean vector length and circular SD of every hypothesis
in every ``[[orientation.condition]]``, and the animals a conclusive experiment would
need; ``orient analyse STUDY.toml HEADINGS.csv`` reads observed headings and prints
their circular statistics, the tests, and which hypothesis the data favour.  Both
take ``--json``; ``--out DIR`` writes the results (and plots) into a study folder,
where ``magretina report`` picks them up.  Predictions are model predictions, not
measurements.  All capability is in :mod:`renderer.orientation` and
:mod:`renderer.study.orientation`.
"""

from __future__ import annotations

import math
import os
import sys

from ..errors import MagretinaError

ANALYSIS_JSON = "orientation-analysis.json"


def register(sub):
    p = sub.add_parser("orient", help="predicted headings of an orientation experiment and "
                                      "analysis of observed headings",
                       description="Orientation experiments: predicted heading distributions per "
                                   "condition and hypothesis (model predictions, not "
                                   "measurements), and circular statistics of observed headings.")
    s = p.add_subparsers(dest="orient_command", metavar="ACTION")
    s.required = True
    q = s.add_parser("predict", help="predict each hypothesis' headings in each condition")
    q.add_argument("study", metavar="STUDY.toml", help="study file (TOML) with the orientation "
                                                         "conditions and hypotheses")
    q.add_argument("--json", action="store_true", help="print JSON instead of a table")
    q.add_argument("--out", metavar="DIR", help="write orientation.json/.csv and plots here "
                                                "(e.g. the study's output folder)")
    q.add_argument("--monte-carlo", type=int, default=None, metavar="N",
                   help="simulated animals per condition (overrides the study file; 0 = off)")
    q.add_argument("--no-power", action="store_true", help="skip the animals-needed estimates")
    q.set_defaults(func=run_predict)
    a = s.add_parser("analyse", help="analyse observed headings against the study's hypotheses")
    a.add_argument("study", metavar="STUDY.toml", help="study file (TOML) with the hypotheses "
                                                         "to test")
    a.add_argument("headings", metavar="HEADINGS.csv",
                   help="columns heading_deg, condition[, animal, trial, axial]")
    a.add_argument("--json", action="store_true", help="print JSON instead of a table")
    a.add_argument("--out", metavar="DIR", help="write orientation-analysis.json and a plot here")
    a.add_argument("--alpha", type=float, default=0.05, help="significance level (default 0.05)")
    a.add_argument("--axial", action="store_true", help="treat every condition as axial data")
    a.add_argument("--no-fit", action="store_true",
                   help="score the predictions as they stand (no fitted behavioural spread)")
    a.add_argument("--bootstrap", type=int, default=1000, help="bootstrap resamples (0 = none)")
    a.add_argument("--seed", type=int, default=0, help="bootstrap/permutation seed")
    a.add_argument("--shot", type=int, default=0, help="which shot of a swept study (index)")
    a.add_argument("--rose", action="store_true",
                   help="plot observed headings as a rose diagram instead of dots")
    a.set_defaults(func=run_analyse)


def _load(path):
    # deferred: library modules load when the command runs, so start-up stays light
    from ..study import load_study

    return load_study(path)


def _f(x, nd=4):
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "-"
    return f"{x:.{nd}g}" if isinstance(x, float) else str(x)


def run_predict(args) -> int:
    # deferred: library modules load when the command runs, so start-up stays light
    from ..orientation.model import CAUTION
    from ..study.orientation import json_bytes, predict_plan

    study = _load(args.study)
    per, doc = predict_plan(study, args.monte_carlo, power=not args.no_power)
    if args.out:
        _write_predict(args.out, per, doc)
    if args.json:
        sys.stdout.write(json_bytes(doc).decode())
        return 0
    print(CAUTION)
    for s in doc["shots"]:
        if s["params"]:
            print(f"\nshot {s['shot_id']}: " + ", ".join(f"{k} = {v}" for k, v in s["params"].items()))
        print(f"{'hypothesis':<24}{'condition':<22}{'mean°':>8}{'r':>7}{'SD°':>8}{'MC mean°':>10}"
              f"{'MC r':>7}")
        for r in s["rows"]:
            print(f"{r['hypothesis'][:23]:<24}{r['condition'][:21]:<22}{_f(r['mean_deg']):>8}"
                  f"{r['r']:>7.3f}{_f(r['circular_sd_deg'], 3):>8}{_f(r.get('mc_mean_deg')):>10}"
                  f"{_f(r.get('mc_r'), 3):>7}")
        if s.get("power"):
            print("Animals needed (power by simulation of the test):")
            for p in s["power"]:
                if p.get("note"):
                    n = p["note"]
                elif p["n"] is None:
                    n = f"more than {max(c['n'] for c in p['curve'])}"
                else:
                    n = p["n"]
                print(f"  {p['hypothesis'][:23]:<24}{p['condition'][:21]:<22}{p['test']:<18}{n}")
    if args.out:
        print(f"\nwrote {os.path.join(args.out, 'orientation.json')}")
    return 0


def _write_predict(out, per, doc):
    # deferred: library modules load when the command runs, so start-up stays light
    from ..study.orientation import write_outputs

    write_outputs(out, per, doc)


def run_analyse(args) -> int:
    # deferred: library modules load when the command runs, so start-up stays light
    from ..orientation.analysis import analyse, format_analysis
    from ..orientation.headings import read_headings
    from ..study.orientation import json_bytes, predict_plan

    study = _load(args.study)
    hd = read_headings(args.headings, axial=True if args.axial else None)
    per, doc = predict_plan(study, monte_carlo=0, power=False)
    if not 0 <= args.shot < len(per):
        raise MagretinaError(f"--shot {args.shot}: the study has {len(per)} shot(s) "
                             f"(0..{len(per) - 1})")
    shot, preds = per[args.shot]
    conds = [c["name"] for c in doc["shots"][args.shot]["conditions"]]
    res = analyse(hd, preds, args.alpha, fit=not args.no_fit, n_boot=args.bootstrap,
                  seed=args.seed, conditions=conds)
    res["shot_id"] = shot.shot_id
    if args.out:
        from ..orientation.plots import plot_conditions
        from ..study.outputs import write_if_changed

        os.makedirs(args.out, exist_ok=True)
        write_if_changed(os.path.join(args.out, ANALYSIS_JSON), json_bytes(res))
        obs = {c: hd.angles(c) for c in hd.conditions}
        plot_conditions(os.path.join(args.out, "orientation-observed.png"),
                        [c for c in conds if c in obs], preds, obs, hd.axial, args.alpha,
                        rose=args.rose)
    if args.json:
        sys.stdout.write(json_bytes(res).decode())
        return 0
    print(format_analysis(res))
    return 0
