"""Analysis of an observed headings file against predicted headings: one call, one report.

Gathers, per condition, the first-order statistics (mean direction, r, circular SD,
confidence interval of the mean, bootstrap intervals, Rayleigh test, V test toward
each hypothesis' predicted mean direction), second-order statistics over animals
when animals have several trials, tests between each condition and the first one
(Watson-Williams, Watson's U², and Moore's paired test over animals seen in both),
and the model comparison of :mod:`.comparison`.  The result is a plain dict
(JSON-ready) plus a text table.  Statistics describe the data; the hypotheses'
predictions are model predictions.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import MagretinaError
from . import statistics as st
from .comparison import compare

__all__ = ["analyse", "format_analysis"]


def _safe(fn, *a, **k):
    try:
        return fn(*a, **k)
    except MagretinaError as exc:
        return {"error": str(exc)}


def analyse(headings, predictions=None, alpha=0.05, fit=True, n_boot=1000, seed=0,
            conditions=None) -> dict:
    """Analyse a :class:`renderer.orientation.headings.Headings` table.

    Parameters
    ----------
    headings : Headings
    predictions : dict hypothesis -> dict condition -> Prediction, or None
    alpha : significance level of intervals
    fit : fit behavioural spread and non-orienting share in the model comparison
    n_boot : bootstrap resamples (0 = none)
    seed : bootstrap and permutation seed
    conditions : names expected (from the study); a listed condition with no
        heading, or a heading of an unknown condition, is an error.
    """
    obs = {c: np.array(headings.angles(c)) for c in headings.conditions}
    if conditions is not None:
        unknown = [c for c in obs if c not in conditions]
        if unknown:
            raise MagretinaError(f"headings file {headings.path}: condition(s) "
                                 f"{', '.join(map(repr, unknown))} are not in the study; "
                                 f"study conditions: {', '.join(map(repr, conditions))}")
    for c, a in obs.items():
        if a.size == 0:
            raise MagretinaError(f"headings file {headings.path}: condition {c!r} has no headings")
    predictions = predictions or {}
    axial = dict(headings.axial)
    per = []
    for c, a in obs.items():
        ax = axial.get(c, False)
        d = st.describe(a, ax)
        z, p = st.rayleigh_test(a, ax) if a.size >= 2 else (float("nan"), float("nan"))
        row = {"condition": c, "axial": ax, **d, "rayleigh_z": z, "rayleigh_p": p,
               "ci_mean_deg": st.mean_ci(a, alpha, ax) if a.size >= 2 else None}
        if n_boot and a.size >= 3:
            row["bootstrap"] = st.bootstrap_ci(a, alpha, ax, n_boot, seed)
        vt = {}
        for h, preds in predictions.items():
            pr = preds.get(c)
            if pr is None or not math.isfinite(pr.stats["mean_deg"]) or a.size < 2:
                continue
            exp = pr.stats["mean_deg"] % 180.0 if ax else pr.stats["mean_deg"]
            u, pv = st.v_test(a, exp, ax)
            vt[h] = {"expected_deg": exp, "u": u, "p": pv}
        row["v_test"] = vt
        animals = headings.by_animal(c)
        row["n_animals"] = len(animals)
        if len(animals) >= 2 and any(len(v) > 1 for v in animals.values()):
            row["second_order"] = _safe(st.second_order, animals, ax)
        per.append(row)
    between = []
    names = list(obs)
    for c in names[1:]:
        c0 = names[0]
        ax = axial.get(c, False) or axial.get(c0, False)
        item = {"a": c0, "b": c}
        if obs[c0].size >= 2 and obs[c].size >= 2:
            item["watson_williams"] = _safe(st.watson_williams, obs[c0], obs[c], axial=ax)
            item["watson_u2"] = _safe(st.watson_u2, obs[c0], obs[c], axial=ax)
        A, B = headings.by_animal(c0), headings.by_animal(c)
        both = [k for k in A if k in B]
        if len(both) >= 3:
            ma = [st.mean_vector(A[k], ax) for k in both]
            mb = [st.mean_vector(B[k], ax) for k in both]
            k2 = 2.0 if ax else 1.0
            item["moore_paired"] = _safe(
                st.moore_paired, [math.degrees(m[0]) / k2 for m in ma],
                [math.degrees(m[0]) / k2 for m in mb], [m[1] for m in ma], [m[1] for m in mb],
                axial=ax, n_sim=9999, seed=seed)
            item["moore_paired"]["animals"] = len(both)
        between.append(item)
    out = {"file": headings.path, "alpha": alpha, "conditions": per, "between": between}
    if predictions:
        usable = {h: p for h, p in predictions.items() if all(c in p for c in obs)}
        if usable:
            out["comparison"] = compare(obs, usable, axial, fit=fit)
    return out


def _f(x, nd=3):
    if x is None:
        return "-"
    if isinstance(x, float):
        return "nan" if math.isnan(x) else f"{x:.{nd}g}"
    return str(x)


def format_analysis(res) -> str:
    """A readable text table of :func:`analyse` results."""
    lines = [f"Observed headings: {res['file']}",
             f"{'condition':<22}{'n':>4}{'anim':>5}{'mean°':>8}{'r':>7}{'SD°':>7}"
             f"{'CI of mean°':>16}{'Rayleigh z':>11}{'p':>9}"]
    for r in res["conditions"]:
        ci = r["ci_mean_deg"]
        ci_s = f"{ci[0]:.0f}..{ci[1]:.0f}" if ci else "-"
        lines.append(f"{r['condition'][:21]:<22}{r['n']:>4}{r['n_animals']:>5}"
                     f"{_f(r['mean_deg'], 4):>8}{r['r']:>7.3f}{_f(r['circular_sd_deg'], 3):>7}"
                     f"{ci_s:>16}{_f(r['rayleigh_z']):>11}{_f(r['rayleigh_p']):>9}")
        for h, v in r["v_test"].items():
            lines.append(f"    V test toward {h} ({v['expected_deg']:.0f}°): u = {v['u']:.3f}, "
                         f"p = {_f(v['p'])}")
    for b in res["between"]:
        parts = []
        if isinstance(b.get("watson_williams"), dict) and "F" in b["watson_williams"]:
            ww = b["watson_williams"]
            parts.append(f"Watson-Williams F = {ww['F']:.3f}, p = {_f(ww['p'])}")
        if isinstance(b.get("watson_u2"), dict) and "U2" in b["watson_u2"]:
            parts.append(f"U² = {b['watson_u2']['U2']:.4f}, p = {_f(b['watson_u2']['p'])}")
        if isinstance(b.get("moore_paired"), dict) and "R_prime" in b["moore_paired"]:
            m = b["moore_paired"]
            parts.append(f"Moore R' = {m['R_prime']:.3f}, p = {_f(m['p'])} ({m['animals']} animals)")
        lines.append(f"  {b['a']} vs {b['b']}: " + ("; ".join(parts) or "too few headings"))
    cmp_ = res.get("comparison")
    if cmp_:
        lines.append("Model comparison (predictions are model predictions, not measurements):")
        lines.append(f"{'hypothesis':<30}{'log L':>10}{'k':>3}{'AIC':>10}{'ΔAIC':>8}{'weight':>8}"
                     f"{'κ_b':>8}{'q':>7}")
        for r in sorted(cmp_["rows"], key=lambda r: r["aic"]):
            lines.append(f"{r['hypothesis'][:29]:<30}{r['loglik']:>10.2f}{r['k']:>3}"
                         f"{r['aic']:>10.2f}{r['delta_aic']:>8.2f}{r['weight']:>8.3f}"
                         f"{_f(r['kappa']):>8}{_f(r['q'], 2):>7}")
        lines.append(cmp_["statement"])
    return "\n".join(lines)
