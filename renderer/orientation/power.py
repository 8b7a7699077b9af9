"""How many animals does a conclusive experiment need?  Power by simulation of the test.

For a predicted effect (a heading distribution per condition, from
:mod:`renderer.orientation.model`) experiments of n animals are simulated by drawing
headings from the prediction, and the very test that will be run on the real data
(:mod:`renderer.orientation.statistics`) is applied to each; the power is the share
of simulated experiments with p < α, with its binomial standard error
sqrt(P(1 − P)/n_sim).  Tests: ``rayleigh`` (any orientation), ``v`` (toward an
expected heading), ``watson-williams`` and ``u2`` (two conditions differ),
``moore`` (the same animals under two conditions, each animal's heading drawn
independently in each condition: individual preferences are not modelled).  All
draws are seeded (numpy Generator).  This is a planning aid for a model
prediction; it says nothing about real animals beyond what the hypothesis says.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import MagretinaError
from . import statistics as st
from .comparison import compare
from .model import sample_headings

__all__ = ["TESTS", "simulate_power", "power_curve", "animals_needed", "discrimination_power",
           "animals_to_discriminate"]

TESTS = ("rayleigh", "v", "watson-williams", "u2", "moore")


def _p_value(test, a, b, expected_deg, axial):
    if test == "rayleigh":
        return st.rayleigh_test(a, axial)[1]
    if test == "v":
        return st.v_test(a, expected_deg, axial)[1]
    if test == "watson-williams":
        return st.watson_williams(a, b, axial=axial)["p"]
    if test == "u2":
        return st.watson_u2(a, b, axial=axial)["p"]
    if test == "moore":
        return st.moore_paired(a, b, axial=axial)["p"]
    raise MagretinaError(f"test = {test!r}: allowed {', '.join(TESTS)}")


def simulate_power(sampler, n, test="rayleigh", alpha=0.05, n_sim=500, seed=0,
                   expected_deg=None, sampler_b=None, axial=False) -> dict:
    """Power of ``test`` at n animals by simulation.

    Parameters
    ----------
    sampler : callable (n, rng) -> headings (n,) degrees (condition A)
    n : int, animals per condition
    test : one of ``TESTS``
    alpha : significance level
    n_sim : simulated experiments
    seed : int
    expected_deg : float, for the V test
    sampler_b : callable, condition B for two-sample and paired tests
    axial : bool

    Returns
    -------
    dict: ``n``, ``power``, ``se``, ``n_sim``, ``test``, ``alpha``.
    """
    n = int(n)
    if n < 3:
        raise MagretinaError(f"n = {n}: at least 3 animals")
    if not 0.0 < alpha < 1.0:
        raise MagretinaError(f"alpha = {alpha!r}: allowed (0, 1)")
    if test not in TESTS:
        raise MagretinaError(f"test = {test!r}: allowed {', '.join(TESTS)}")
    if test == "v" and expected_deg is None:
        raise MagretinaError("the V test needs an expected heading (expected_deg)")
    if test in ("watson-williams", "u2", "moore") and sampler_b is None:
        raise MagretinaError(f"test {test!r} compares two conditions: give sampler_b")
    rng = np.random.default_rng(seed)
    hits = 0
    for _ in range(int(n_sim)):
        a = sampler(n, rng)
        b = sampler_b(n, rng) if sampler_b is not None else None
        try:
            p = _p_value(test, a, b, expected_deg, axial)
        except MagretinaError:
            p = 1.0  # a degenerate simulated sample (e.g. all identical) counts as no detection
        hits += p < alpha
    P = hits / int(n_sim)
    return {"n": n, "power": P, "se": math.sqrt(max(P * (1 - P), 1e-12) / int(n_sim)),
            "n_sim": int(n_sim), "test": test, "alpha": alpha}


def power_curve(sampler, ns, **kw) -> list:
    """:func:`simulate_power` at each n in ``ns`` (seeds offset by n so curves are reproducible)."""
    seed = kw.pop("seed", 0)
    return [simulate_power(sampler, n, seed=seed + int(n), **kw) for n in ns]


def _search(pw, target, n_max):
    """Smallest n in 3..n_max with pw(n)["power"] >= target (doubling, then bisection)."""
    cache = {}

    def P(n):
        if n not in cache:
            cache[n] = pw(n)
        return cache[n]["power"]

    curve = lambda: sorted(cache.values(), key=lambda r: r["n"])  # noqa: E731
    lo, hi = 3, 4
    while P(hi) < target:
        lo = hi
        if hi >= n_max:
            return {"n": None, "target": target, "curve": curve()}
        hi = min(2 * hi, int(n_max))
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if P(mid) >= target:
            hi = mid
        else:
            lo = mid
    return {"n": hi, "target": target, "curve": curve()}


def animals_needed(sampler, target=0.8, n_max=200, **kw) -> dict:
    """Smallest n (3..n_max) whose simulated power reaches ``target``.

    Doubling from n = 4 brackets the answer, then bisection on integers (power
    rises with n for these tests; the Monte-Carlo noise of each estimate is in
    ``curve``).  Returns dict ``n`` (None if not reached by ``n_max``), ``target``,
    ``curve`` (every evaluation).
    """
    if not 0.0 < target < 1.0:
        raise MagretinaError(f"target power = {target!r}: allowed (0, 1)")
    seed = kw.pop("seed", 0)
    return _search(lambda n: simulate_power(sampler, n, seed=seed + n, **kw), target, n_max)


def discrimination_power(predictions, true_hypothesis, n, n_sim=100, seed=0) -> dict:
    """Share of simulated experiments in which the model comparison picks the true hypothesis.

    n headings per condition are drawn from ``predictions[true_hypothesis]``; each
    simulated experiment is scored by
    :func:`renderer.orientation.comparison.compare` with ``fit=False`` (the
    predictions as they stand); a success is the true hypothesis ranked first and
    distinguishable (ΔAIC ≥ 2 to the runner-up, uniform baseline included).
    """
    if true_hypothesis not in predictions:
        raise MagretinaError(f"hypothesis {true_hypothesis!r}: not among "
                             f"{', '.join(map(repr, predictions))}")
    rng = np.random.default_rng(seed)
    truth = predictions[true_hypothesis]
    hits = 0
    for _ in range(int(n_sim)):
        obs = {c: sample_headings(p, n, rng) for c, p in truth.items()}
        res = compare(obs, predictions, fit=False)
        hits += res["best"] == true_hypothesis and res["distinguishable"]
    P = hits / int(n_sim)
    return {"n": int(n), "power": P, "se": math.sqrt(max(P * (1 - P), 1e-12) / int(n_sim)),
            "n_sim": int(n_sim), "test": "model comparison"}


def animals_to_discriminate(predictions, true_hypothesis, target=0.8, n_max=200, n_sim=100,
                            seed=0) -> dict:
    """Animals per condition for the comparison to pick ``true_hypothesis`` with
    probability ``target`` (see :func:`discrimination_power`)."""
    if not 0.0 < target < 1.0:
        raise MagretinaError(f"target power = {target!r}: allowed (0, 1)")
    return _search(lambda n: discrimination_power(predictions, true_hypothesis, n, n_sim,
                                                  seed + n), target, n_max)
