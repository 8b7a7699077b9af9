"""Which hypothesis do observed headings favour?  Log-likelihoods and an information criterion.

Each hypothesis gives a predicted heading distribution per condition
(:class:`renderer.orientation.model.Prediction`).  The log-likelihood of the observed
headings is the sum of log densities (per radian) at the observations, read from the
grid by periodic linear interpolation.  Two ways to score:

* ``fit=False``: the predictions as they stand (behavioural spread and
  non-orienting share from the study file; no free parameter);
* ``fit=True``: the behavioural von Mises concentration κ_b and the non-orienting
  share q are fitted by maximum likelihood per hypothesis, jointly over its
  conditions (2 free parameters each), so that a hypothesis is not penalised for a
  wrong guess of the animals' scatter.

The Akaike information criterion AIC = 2k − 2 ln L (Akaike 1974) ranks them, with the
uniform distribution (no orientation, k = 0) as a baseline; a difference below 2
AIC units is stated as "cannot tell apart" (Burnham & Anderson 2002, Model Selection
and Multimodel Inference, section 2.6: models within about 2 units have
substantial support).  Axial observations are compared with the prediction folded
onto 0..180° (θ and θ + 180° pooled).  The scores are statements about these model
predictions, not proof of a mechanism.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.optimize import minimize

from ..errors import MagretinaError
from .model import density_at, von_mises_smooth
from .statistics import check_angles

__all__ = ["loglik", "fit_behaviour", "compare", "TIE_AIC"]

#: |ΔAIC| below which two hypotheses are reported as not distinguishable.
TIE_AIC = 2.0


def _density(pred, kappa, q, axial):
    """Grid density per radian of a prediction's sensory part with κ_b and q applied."""
    G = pred.grid_deg.size
    p = von_mises_smooth(pred.prob_sensory, kappa)
    p = (1.0 - q) * p + q / G
    if axial:
        p = p + np.roll(p, -G // 2)  # θ and θ+180 pooled (the axis circle has length π)
    return p * G / (2 * math.pi)


def loglik(angles_deg, pred, kappa=None, q=None, axial=False) -> float:
    """Log-likelihood (nats) of observed headings under one prediction.

    Parameters
    ----------
    angles_deg : array_like (n,), degrees (0..180 axes for axial data)
    pred : Prediction
    kappa, q : float or None
        Behavioural concentration and non-orienting share; None: use the
        prediction's own (``pred.prob``).
    axial : bool
        Axial data: density of the axis, f(θ) + f(θ + 180°), on a circle of length π.
    """
    a = check_angles(angles_deg)
    if kappa is None and q is None:
        G = pred.grid_deg.size
        p = pred.prob * G / (2 * math.pi)
        if axial:
            p = p + np.roll(p, -G // 2)
    else:
        p = _density(pred, kappa or 0.0, q or 0.0, axial)
    d = density_at(pred.grid_deg, p, a % (180.0 if axial else 360.0))
    with np.errstate(divide="ignore"):
        return float(np.sum(np.log(np.maximum(d, 0.0))))


def fit_behaviour(observed, preds, axial) -> tuple:
    """ML (κ_b, q) for one hypothesis over its conditions -> (kappa, q, loglik)."""
    def nll(x):
        kappa, q = math.exp(x[0]), 1.0 / (1.0 + math.exp(-x[1]))
        s = sum(loglik(observed[c], preds[c], kappa, q, axial.get(c, False)) for c in observed)
        return -s if math.isfinite(s) else 1e300

    # a coarse grid brackets the optimum, Nelder-Mead refines it (two parameters, a
    # smooth surface; a bounded quasi-Newton fit was slower here for no gain)
    grid = [(u, v) for u in np.linspace(-4.0, 7.0, 12) for v in np.linspace(-8.0, 2.0, 6)]
    start = min(grid, key=nll)
    best = minimize(nll, start, method="Nelder-Mead",
                    options={"xatol": 1e-4, "fatol": 1e-6, "maxiter": 400})
    kappa, q = math.exp(best.x[0]), 1.0 / (1.0 + math.exp(-best.x[1]))
    return kappa, q, -float(best.fun)


def compare(observed, predictions, axial=None, fit=True) -> dict:
    """Score hypotheses against observed headings.

    Parameters
    ----------
    observed : dict condition -> array_like of headings (degrees)
    predictions : dict hypothesis -> dict condition -> Prediction
    axial : dict condition -> bool, or None
    fit : bool
        Fit κ_b and q per hypothesis (k = 2) or take the predictions as they are (k = 0).

    Returns
    -------
    dict: ``rows`` (per hypothesis and the uniform baseline: ``loglik``, ``k``,
    ``aic``, ``delta_aic``, ``weight`` (Akaike weight), fitted ``kappa``, ``q``, per
    condition ``loglik_by_condition``), ``best``, ``runner_up``, ``delta_aic`` between
    them, ``distinguishable`` and a one-line ``statement``.
    """
    if not observed:
        raise MagretinaError("compare: no observed headings")
    if not predictions:
        raise MagretinaError("compare: no hypotheses")
    axial = dict(axial or {})
    rows = []
    n_total = 0
    for c, a in observed.items():
        n_total += check_angles(a, name=f"headings of condition {c!r}").size
    for h, preds in predictions.items():
        missing = [c for c in observed if c not in preds]
        if missing:
            raise MagretinaError(f"compare: hypothesis {h!r} has no prediction for condition(s) "
                                 f"{', '.join(map(repr, missing))}; predicted: "
                                 f"{', '.join(map(repr, preds))}")
        if fit:
            kappa, q, ll = fit_behaviour(observed, preds, axial)
            byc = {c: loglik(observed[c], preds[c], kappa, q, axial.get(c, False))
                   for c in observed}
            rows.append({"hypothesis": h, "loglik": ll, "k": 2, "kappa": kappa, "q": q,
                         "loglik_by_condition": byc})
        else:
            byc = {c: loglik(observed[c], preds[c], axial=axial.get(c, False)) for c in observed}
            rows.append({"hypothesis": h, "loglik": float(sum(byc.values())), "k": 0,
                         "kappa": None, "q": None, "loglik_by_condition": byc})
    ll_u = sum(-len(observed[c]) * math.log(math.pi if axial.get(c, False) else 2 * math.pi)
               for c in observed)
    rows.append({"hypothesis": "uniform (no orientation)", "loglik": ll_u, "k": 0, "kappa": None,
                 "q": None, "loglik_by_condition": {}})
    for r in rows:
        r["aic"] = 2 * r["k"] - 2 * r["loglik"] if math.isfinite(r["loglik"]) else math.inf
    best_aic = min(r["aic"] for r in rows)
    for r in rows:
        r["delta_aic"] = r["aic"] - best_aic
    w = np.array([math.exp(-0.5 * r["delta_aic"]) if math.isfinite(r["delta_aic"]) else 0.0
                  for r in rows])
    for r, wi in zip(rows, w / w.sum()):
        r["weight"] = float(wi)
    ranked = sorted(rows, key=lambda r: r["aic"])
    best, second = ranked[0], ranked[1]
    d = second["aic"] - best["aic"]
    ok = d >= TIE_AIC
    if ok:
        st = (f"The data favour '{best['hypothesis']}' over '{second['hypothesis']}' by "
              f"{d:.1f} AIC units (Akaike weight {best['weight']:.2f}); n = {n_total} headings.")
    else:
        st = (f"Cannot tell apart '{best['hypothesis']}' and '{second['hypothesis']}': they are "
              f"{d:.1f} AIC units apart (< {TIE_AIC:g}); n = {n_total} headings.")
    return {"rows": rows, "best": best["hypothesis"], "runner_up": second["hypothesis"],
            "delta_aic": d, "distinguishable": ok, "statement": st, "fit": bool(fit),
            "n": n_total}
