"""Circular statistics of observed headings, as used in orientation experiments.

Headings are compass angles in degrees (0 = north, clockwise).  The mean direction,
mean resultant length r, circular standard deviation sqrt(-2 ln r) and the tests
(Rayleigh, V, Watson-Williams, Watson's U², Moore's paired test, Hotelling's
second-order test) follow Batschelet (1981, Circular Statistics in Biology), Zar
(Biostatistical Analysis, ch. "Circular distributions: hypothesis testing"), Fisher
(1993, Statistical Analysis of Circular Data) and Mardia & Jupp (2000, Directional
Statistics).  Axial data (an angle and its opposite are the same observation) are
handled by doubling the angles, computing on the doubled angles and halving mean
directions and spreads back (Batschelet 1981, ch. 1.3; common practice).  This
module is plain arithmetic on angle arrays: it knows nothing about receptors,
models or files.  Invalid input (empty, NaN, infinite, non-numeric) raises
:class:`renderer.errors.MagretinaError` naming the argument.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.optimize import brentq
from scipy.special import i0e, i1e, ndtr
from scipy.stats import chi2, f as fdist

from ..errors import MagretinaError

__all__ = ["describe", "rayleigh_test", "v_test", "check_angles", "mean_vector",
           "rayleigh_p", "rayleigh_critical_r", "v_test_p", "mean_ci", "kappa_from_r",
           "a1", "watson_williams", "watson_u2", "watson_u2_p", "moore_paired",
           "moore_p", "second_order", "hotelling_second_order", "bootstrap_ci",
           "wrap180", "double_angles"]


# ----------------------------------------------------------------------------- input
def check_angles(angles_deg, name="angles_deg", min_n=1) -> np.ndarray:
    """Angles as a 1-D float64 array (degrees), or MagretinaError.

    Parameters
    ----------
    angles_deg : array_like (n,)
        Compass angles in degrees; any real values (taken modulo 360).
    name : str
        Name used in error messages.
    min_n : int
        Fewest angles allowed.
    """
    try:
        a = np.asarray(angles_deg, dtype=np.float64)
    except (TypeError, ValueError):
        raise MagretinaError(f"{name}: not numbers ({_short(angles_deg)})") from None
    if a.ndim == 0:
        a = a.reshape(1)
    if a.ndim != 1:
        raise MagretinaError(f"{name}: expected a 1-D sequence of angles, got shape {a.shape}")
    if a.size < min_n:
        raise MagretinaError(f"{name}: {a.size} angle(s) given; at least {min_n} needed"
                             if a.size else f"{name}: empty; at least {min_n} angle(s) needed")
    bad = ~np.isfinite(a)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise MagretinaError(f"{name}[{i}] = {a[i]!r}: angles must be finite numbers "
                             f"(degrees); {int(bad.sum())} non-finite value(s) in {a.size}")
    return a


def _short(x) -> str:
    s = repr(x)
    return s if len(s) < 60 else s[:57] + "..."


def _rad(angles_deg, axial, name="angles_deg", min_n=1):
    a = np.radians(check_angles(angles_deg, name, min_n))
    return 2.0 * a if axial else a


def double_angles(angles_deg) -> np.ndarray:
    """2·θ mod 360 (degrees): axial data to a unimodal sample (Batschelet 1981, 1.3)."""
    return (2.0 * check_angles(angles_deg)) % 360.0


def wrap180(x_deg):
    """Angle(s) wrapped into [-180, 180) degrees."""
    return (np.asarray(x_deg, float) + 180.0) % 360.0 - 180.0


def _compass(rad, axial):
    d = math.degrees(rad) % 360.0
    return (d / 2.0) % 180.0 if axial else d


# ----------------------------------------------------------------------------- first order
def mean_vector(angles_deg, axial=False, weights=None):
    """Mean direction and mean resultant length (on doubled angles when axial).

    Returns
    -------
    (mean_rad, r, n) : the mean angle in radians of the (doubled) sample, in
        (-π, π]; NaN when r = 0; r in [0, 1]; n the sample size.
    """
    a = _rad(angles_deg, axial)
    w = np.ones_like(a) if weights is None else np.asarray(weights, float)
    C = float(np.sum(w * np.cos(a)) / np.sum(w))
    S = float(np.sum(w * np.sin(a)) / np.sum(w))
    r = min(1.0, math.hypot(C, S))
    mean = math.atan2(S, C) if r > 1e-15 else float("nan")
    return mean, r, a.size


def describe(angles_deg, axial=False) -> dict:
    """First-order description of a sample of headings.

    Parameters
    ----------
    angles_deg : array_like (n,)
        Headings, degrees clockwise from north.
    axial : bool
        Axial data: angles are doubled for the statistics; ``mean_deg`` and
        ``circular_sd_deg`` are halved back.

    Returns
    -------
    dict with ``n``; ``mean_deg`` (mean direction, 0..360, or 0..180 for axial; NaN
    when r = 0); ``r`` (mean resultant length of the (doubled) angles, 0..1);
    ``circular_sd_deg`` = sqrt(−2 ln r) in degrees (halved for axial; inf at r = 0)
    (Batschelet 1981, eq. 2.3.3; Mardia & Jupp 2000, eq. 2.3.13).
    """
    mean, r, n = mean_vector(angles_deg, axial)
    sd = math.degrees(math.sqrt(-2.0 * math.log(r))) if r > 0 else float("inf")
    return {"n": int(n),
            "mean_deg": float("nan") if math.isnan(mean) else _compass(mean, axial),
            "r": float(r),
            "circular_sd_deg": sd / 2.0 if axial else sd}


def rayleigh_p(z, n):
    """p of Rayleigh's test for z = n r² (Fisher 1993, eq. 4.17; Wilkie 1983 for n < 50).

    p ≈ exp(−z)·[1 + (2z − z²)/(4n) − (24z − 132z² + 76z³ − 9z⁴)/(288n²)] below
    n = 50 and exp(−z) above, as in astropy.stats.rayleightest; clipped to [0, 1].
    The series is asymptotic and breaks down far in the tail of small samples (the
    bracket falls below 1/2 and can turn negative); there the approximation of
    Greenwood & Durand as given by Zar (eq. 27.4),
    p = exp(sqrt(1 + 4n + 4(n² − R²)) − (1 + 2n)), R² = n z, is used instead.
    """
    z = float(z)
    tmp = 1.0
    if n < 50:
        tmp = (1.0 + (2.0 * z - z * z) / (4.0 * n)
               - (24.0 * z - 132.0 * z ** 2 + 76.0 * z ** 3 - 9.0 * z ** 4) / (288.0 * n * n))
    if tmp < 0.5:
        R2 = n * z
        return float(min(1.0, math.exp(math.sqrt(max(1.0 + 4.0 * n + 4.0 * (n * n - R2), 0.0))
                                       - (1.0 + 2.0 * n))))
    return float(min(1.0, max(0.0, math.exp(-z) * tmp)))


def rayleigh_test(angles_deg, axial=False):
    """Rayleigh test of uniformity against a unimodal alternative.

    Parameters
    ----------
    angles_deg : array_like (n,), degrees
    axial : bool
        Double the angles first (tests for a bimodal, axial preference).

    Returns
    -------
    (z, p) : z = n r² (Zar, eq. 27.2), p from :func:`rayleigh_p`.
    """
    _, r, n = mean_vector(angles_deg, axial)
    z = n * r * r
    return float(z), rayleigh_p(z, n)


def rayleigh_critical_r(n, alpha=0.05) -> float:
    """Mean resultant length r at which Rayleigh's p equals ``alpha`` for n angles.

    Drawn as the critical circle on orientation plots (a mean vector reaching past
    it is significant at ``alpha``).  Solved by bisection on :func:`rayleigh_p`.
    """
    n = int(n)
    if n < 2:
        raise MagretinaError(f"n = {n}: the Rayleigh test needs at least 2 angles")
    if not 0.0 < alpha < 1.0:
        raise MagretinaError(f"alpha = {alpha!r}: allowed (0, 1)")
    lo, hi = 0.0, 1.0
    if rayleigh_p(n * 1.0, n) > alpha:  # even r = 1 is not significant (tiny n)
        return float("nan")
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        if rayleigh_p(n * mid * mid, n) > alpha:
            lo = mid
        else:
            hi = mid
    return 0.5 * (lo + hi)


def v_test_p(u, n):
    """One-sided p of the V test: normal tail with the small-sample terms of
    Durand & Greenwood (1958), as in astropy.stats.vtest; clipped to [0, 1]
    (floored at half the normal tail where the expansion breaks down)."""
    z = float(u)
    tail = float(ndtr(-z))
    pdf = math.exp(-0.5 * z * z) / math.sqrt(2.0 * math.pi)
    p = (tail + pdf * ((3 * z - z ** 3) / (16.0 * n)
                               + (15 * z + 305 * z ** 3 - 125 * z ** 5 + 9 * z ** 7)
                               / (4608.0 * n * n)))
    # The expansion is asymptotic: far in the upper tail of small samples it can
    # fall below zero.  There it is floored at half the normal tail (a p-value so
    # small that the floor changes no decision at any usual alpha).
    return float(min(1.0, max(0.5 * tail, p)))


def v_test(angles_deg, expected_deg, axial=False):
    """V test (modified Rayleigh test) for a mean direction toward ``expected_deg``.

    Parameters
    ----------
    angles_deg : array_like (n,), degrees
    expected_deg : float
        The direction predicted before looking at the data (degrees; for axial
        data an axis, doubled with the angles).
    axial : bool

    Returns
    -------
    (u, p) : u = sqrt(2n)·r·cos(mean − expected) (Zar, eqs. 27.5-27.6), p one-sided
        from :func:`v_test_p`.
    """
    a = _rad(angles_deg, axial)
    try:
        mu = math.radians(float(expected_deg)) * (2.0 if axial else 1.0)
    except (TypeError, ValueError):
        raise MagretinaError(f"expected_deg = {expected_deg!r}: must be a number (degrees)") from None
    if not math.isfinite(mu):
        raise MagretinaError(f"expected_deg = {expected_deg!r}: must be finite")
    n = a.size
    rc = float(np.mean(np.cos(a - mu)))  # = r cos(mean − expected)
    u = math.sqrt(2.0 * n) * rc
    return float(u), v_test_p(u, n)


def a1(kappa):
    """A1(κ) = I1(κ)/I0(κ): mean resultant length of a von Mises distribution."""
    k = np.asarray(kappa, float)
    return i1e(k) / i0e(k)


def kappa_from_r(r, n=None):
    """Maximum-likelihood von Mises concentration for mean resultant length r.

    Solves A1(κ) = r by Brent's method (Mardia & Jupp 2000, eq. 5.3.5); with ``n``
    the small-sample correction of Fisher (1993, eq. 4.41) is applied for n < 15.
    Returns 0 for r = 0 and inf for r = 1.
    """
    r = float(r)
    if r <= 0.0:
        return 0.0
    if r >= 1.0:
        return float("inf")
    hi = 1.0
    while a1(hi) < r:
        hi *= 2.0
        if hi > 1e8:
            return float("inf")
    k = float(brentq(lambda x: float(a1(x)) - r, 0.0, hi, xtol=1e-12))
    if n is not None and n < 15:
        k = max(k - 2.0 / (n * k), 0.0) if k < 2 else (n - 1) ** 3 * k / (n ** 3 + n)
    return k


def mean_ci(angles_deg, alpha=0.05, axial=False):
    """Confidence interval of the mean direction (Zar, eqs. 26.24-26.25; Upton 1986).

    Uses χ² = χ²₁(1 − α): for r ≤ 0.9, d = arccos(sqrt(2n(2R² − nχ²)/(4n − χ²))/R);
    for r > 0.9, d = arccos(sqrt(n² − (n² − R²)·exp(χ²/n))/R), R = n r; the interval
    is mean ± d.  Returns None when the data are too dispersed for an interval (the
    argument of arccos exceeds 1 or the root is imaginary), as Zar notes.

    Returns
    -------
    (lo_deg, hi_deg) or None : compass degrees (halved for axial data; lo may be
        numerically greater than hi when the interval spans north).
    """
    mean, r, n = mean_vector(angles_deg, axial)
    if not 0.0 < alpha < 1.0:
        raise MagretinaError(f"alpha = {alpha!r}: allowed (0, 1)")
    c = float(chi2.ppf(1.0 - alpha, 1))
    R = n * r
    if R <= 0 or math.isnan(mean):
        return None
    if r <= 0.9:
        if r <= math.sqrt(c / (2.0 * n)):
            return None
        arg = math.sqrt(2.0 * n * (2.0 * R * R - n * c) / (4.0 * n - c)) / R
    else:
        arg = math.sqrt(max(n * n - (n * n - R * R) * math.exp(c / n), 0.0)) / R
    if not 0.0 <= arg <= 1.0:
        return None
    d = math.acos(arg)
    return _compass(mean - d, axial), _compass(mean + d, axial)


# ----------------------------------------------------------------------------- two or more samples
def watson_williams(*samples, axial=False) -> dict:
    """Watson-Williams test that k samples share one mean direction.

    F = K·(N − k)(ΣR_i − R)/((k − 1)(N − ΣR_i)) with the correction
    K = 1 + 3/(8κ̂), κ̂ the ML concentration for the pooled within-sample
    r_w = ΣR_i/N (Zar, eq. 27.17 and 27.19; Batschelet 1981, ch. 6.2).  Assumes
    von Mises samples of one concentration; p from F(k − 1, N − k).

    Parameters
    ----------
    *samples : two or more array_like of angles (degrees)
    axial : bool

    Returns
    -------
    dict: ``F``, ``p``, ``df1``, ``df2``, ``kappa`` (pooled), ``r_w``, ``means_deg``.
    """
    if len(samples) < 2:
        raise MagretinaError("watson_williams: needs at least two samples")
    rads = [_rad(s, axial, name=f"sample {i}", min_n=2) for i, s in enumerate(samples)]
    k = len(rads)
    N = sum(a.size for a in rads)
    Rs = [math.hypot(np.sum(np.cos(a)), np.sum(np.sin(a))) for a in rads]
    allr = np.concatenate(rads)
    R = math.hypot(np.sum(np.cos(allr)), np.sum(np.sin(allr)))
    sR = sum(Rs)
    rw = sR / N
    kap = kappa_from_r(rw)
    K = 1.0 + 3.0 / (8.0 * kap) if kap > 0 else float("inf")
    den = (k - 1) * (N - sR)
    if den <= 0:
        raise MagretinaError("watson_williams: every sample is perfectly concentrated (r = 1); "
                             "the test is undefined")
    F = K * (N - k) * (sR - R) / den
    p = float(fdist.sf(F, k - 1, N - k)) if math.isfinite(F) else float("nan")
    means = [describe(np.degrees(a) / (2.0 if axial else 1.0), axial)["mean_deg"] for a in rads]
    return {"F": float(F), "p": p, "df1": k - 1, "df2": N - k, "kappa": kap, "r_w": rw,
            "means_deg": means}


def watson_u2_p(u2, terms=50) -> float:
    """Asymptotic p of Watson's two-sample U²: 2 Σ_{k≥1} (−1)^{k−1} exp(−2k²π²U²)
    (Watson 1961, Biometrika 48:109; the limiting law of the one-sample U²)."""
    u2 = float(u2)
    if u2 <= 0:
        return 1.0
    s = sum((-1) ** (k - 1) * math.exp(-2.0 * k * k * math.pi ** 2 * u2) for k in range(1, terms))
    return float(min(1.0, max(0.0, 2.0 * s)))


def _u2(a, b):
    """U² of two samples of angles in [0, 2π) with ties (Zar, eq. 27.26)."""
    n1, n2 = a.size, b.size
    N = n1 + n2
    vals = np.concatenate([a, b])
    lab = np.concatenate([np.zeros(n1), np.ones(n2)])
    u, inv = np.unique(vals, return_inverse=True)
    c1 = np.cumsum(np.bincount(inv, weights=1.0 - lab, minlength=u.size)) / n1
    c2 = np.cumsum(np.bincount(inv, weights=lab, minlength=u.size)) / n2
    t = np.bincount(inv, minlength=u.size).astype(float)
    d = c1 - c2
    return n1 * n2 / N ** 2 * (np.sum(t * d * d) - np.sum(t * d) ** 2 / N)


def watson_u2(a_deg, b_deg, axial=False, n_perm=0, seed=0) -> dict:
    """Watson's two-sample U² test (non-parametric: any difference of distributions).

    Parameters
    ----------
    a_deg, b_deg : array_like of angles (degrees)
    axial : bool
    n_perm : int
        0: asymptotic p (:func:`watson_u2_p`); > 0: permutation p from ``n_perm``
        relabellings (seeded), (1 + #{U²* ≥ U²})/(1 + n_perm).

    Returns
    -------
    dict: ``U2``, ``p``, ``method``.
    """
    a = _rad(a_deg, axial, "a_deg", 2) % (2 * math.pi)
    b = _rad(b_deg, axial, "b_deg", 2) % (2 * math.pi)
    u2 = float(_u2(a, b))
    if n_perm and n_perm > 0:
        rng = np.random.default_rng(seed)
        allv = np.concatenate([a, b])
        hits = 0
        for _ in range(int(n_perm)):
            p = rng.permutation(allv)
            hits += _u2(p[:a.size], p[a.size:]) >= u2 - 1e-12
        return {"U2": u2, "p": (1 + hits) / (1 + int(n_perm)), "method": f"permutation ({n_perm})"}
    return {"U2": u2, "p": watson_u2_p(u2), "method": "asymptotic (Watson 1961)"}


def moore_p(rprime, n, n_sim=0, seed=0) -> float:
    """p of Moore's R' for n vectors.

    ``n_sim`` = 0: the χ² form: 12(C² + S²)/(n(n + 1)(2n + 1)) is asymptotically
    χ²₂ under the null (C, S sums of rank-weighted cosines and sines with variance
    Σi²/2 each), so p = exp(−6 n³ R'²/(n(n + 1)(2n + 1))).  ``n_sim`` > 0: Monte Carlo
    of the exact null (uniform directions, ranks 1..n; seeded).
    """
    n = int(n)
    if n_sim and n_sim > 0:
        rng = np.random.default_rng(seed)
        ranks = np.arange(1, n + 1, dtype=float)
        hits = 0
        for k0 in range(0, int(n_sim), 4096):
            m = min(4096, int(n_sim) - k0)
            phi = rng.uniform(0.0, 2 * math.pi, (m, n))
            rs = np.hypot(np.cos(phi) @ ranks, np.sin(phi) @ ranks) / n ** 1.5
            hits += int(np.sum(rs >= rprime - 1e-12))
        return (1 + hits) / (1 + int(n_sim))
    t = 12.0 * n ** 3 * rprime ** 2 / (n * (n + 1) * (2 * n + 1))
    return float(math.exp(-t / 2.0))


def moore_paired(a_deg, b_deg, r_a=None, r_b=None, axial=False, n_sim=0, seed=0) -> dict:
    """Moore's paired test: do the same animals head differently under two conditions?

    For each animal j the difference of its two vectors (X_j, Y_j) =
    (r_b cos b − r_a cos a, r_b sin b − r_a sin a) is ranked by length; Moore's
    (1980, Biometrika 67:175) rank-weighted resultant R' = sqrt(C² + S²)/n^{3/2},
    C = Σ j cos φ_(j), S = Σ j sin φ_(j), tests whether the differences have a
    preferred direction (Zar, section "Paired-sample testing"; second-order data
    when r_a, r_b are the animals' mean resultant lengths).

    Parameters
    ----------
    a_deg, b_deg : array_like (n,), degrees, paired by position
    r_a, r_b : array_like (n,) or None (unit vectors)
    axial : bool
    n_sim : int
        0: χ² p-value (:func:`moore_p`); > 0: Monte-Carlo p with that many draws.

    Returns
    -------
    dict: ``R_prime``, ``p``, ``n``, ``mean_difference_deg`` (direction of the
    rank-weighted resultant).
    """
    a = _rad(a_deg, axial, "a_deg", 2)
    b = _rad(b_deg, axial, "b_deg", 2)
    if a.size != b.size:
        raise MagretinaError(f"moore_paired: {a.size} and {b.size} angles; pairs need equal "
                             f"counts (one per animal and condition)")
    ra = np.ones_like(a) if r_a is None else np.asarray(r_a, float)
    rb = np.ones_like(b) if r_b is None else np.asarray(r_b, float)
    X = rb * np.cos(b) - ra * np.cos(a)
    Y = rb * np.sin(b) - ra * np.sin(a)
    L = np.hypot(X, Y)
    keep = L > 1e-12  # identical pairs carry no direction
    n = int(keep.sum())
    if n < 2:
        raise MagretinaError("moore_paired: fewer than 2 animals differ between the conditions")
    order = np.argsort(L[keep], kind="stable")
    phi = np.arctan2(Y[keep], X[keep])[order]
    ranks = np.arange(1, n + 1, dtype=float)
    C, S = float(ranks @ np.cos(phi)), float(ranks @ np.sin(phi))
    rp = math.hypot(C, S) / n ** 1.5
    return {"R_prime": rp, "p": moore_p(rp, n, n_sim, seed), "n": n,
            "mean_difference_deg": _compass(math.atan2(S, C), False)}


# ----------------------------------------------------------------------------- second order
def second_order(groups, axial=False) -> dict:
    """Second-order statistics: one mean vector per animal, then over animals.

    Parameters
    ----------
    groups : mapping animal -> array_like of that animal's headings (degrees), or a
        sequence of such arrays.
    axial : bool

    Returns
    -------
    dict: ``n_animals``; per animal ``animal_means_deg`` and ``animal_r``; the
    second-order mean vector (mean of r_i·(cos θ_i, sin θ_i), Batschelet 1981, ch. 7)
    as ``mean_deg`` and ``length``; ``describe`` of the animals' mean directions
    (unweighted) and its Rayleigh test; Hotelling's second-order test
    (:func:`hotelling_second_order`).
    """
    items = list(groups.values()) if isinstance(groups, dict) else list(groups)
    if len(items) < 2:
        raise MagretinaError(f"second_order: {len(items)} animal(s); at least 2 needed")
    means, rs = [], []
    for i, g in enumerate(items):
        m, r, _ = mean_vector(g, axial)
        means.append(m)
        rs.append(r)
    means, rs = np.array(means), np.array(rs)
    ok = ~np.isnan(means)
    x, y = rs[ok] * np.cos(means[ok]), rs[ok] * np.sin(means[ok])
    mx, my = float(x.mean()), float(y.mean())
    compass = np.array([_compass(m, axial) for m in means[ok]])
    unweighted = describe(compass, axial)
    z, p = rayleigh_test(compass, axial)
    out = {"n_animals": int(ok.sum()),
           "animal_means_deg": [float(c) for c in compass],
           "animal_r": [float(r) for r in rs[ok]],
           "mean_deg": _compass(math.atan2(my, mx), axial) if math.hypot(mx, my) > 0 else float("nan"),
           "length": math.hypot(mx, my),
           "of_animal_means": unweighted,
           "rayleigh_of_animal_means": {"z": z, "p": p}}
    if ok.sum() >= 3:
        out["hotelling"] = hotelling_second_order(x, y)
    return out


def hotelling_second_order(x, y) -> dict:
    """Hotelling's one-sample test of a second-order mean vector (Zar, eq. 27.13).

    F = n(n − 2)/2 · (x̄²Σy² − 2x̄ȳΣxy + ȳ²Σx²)/(Σx²Σy² − (Σxy)²) with sums of
    squares and products about the means; F(2, n − 2) under H0 (no mean vector).

    Parameters
    ----------
    x, y : array_like (n,) : r_i cos θ_i and r_i sin θ_i of the animals.
    """
    x, y = np.asarray(x, float), np.asarray(y, float)
    n = x.size
    if n < 3:
        raise MagretinaError("hotelling_second_order: needs at least 3 animals")
    mx, my = x.mean(), y.mean()
    sxx, syy = np.sum((x - mx) ** 2), np.sum((y - my) ** 2)
    sxy = np.sum((x - mx) * (y - my))
    den = sxx * syy - sxy ** 2
    if den <= 0:
        return {"F": float("nan"), "p": float("nan"), "df1": 2, "df2": n - 2}
    F = n * (n - 2) / 2.0 * (mx * mx * syy - 2 * mx * my * sxy + my * my * sxx) / den
    return {"F": float(F), "p": float(fdist.sf(F, 2, n - 2)), "df1": 2, "df2": n - 2}


# ----------------------------------------------------------------------------- bootstrap
def bootstrap_ci(angles_deg, alpha=0.05, axial=False, n_boot=2000, seed=0) -> dict:
    """Percentile bootstrap intervals of the mean direction and of r.

    Resamples the headings with replacement (``n_boot`` times, seeded); the mean
    direction's interval is taken on the deviations of the resampled means from the
    sample mean, wrapped to ±180° (Fisher 1993, section 8.3; common practice).

    Returns
    -------
    dict: ``mean_deg`` (lo, hi) compass degrees (halved for axial), ``r`` (lo, hi),
    ``n_boot``, ``alpha``.
    """
    a = _rad(angles_deg, axial, min_n=2)
    if not 0.0 < alpha < 1.0:
        raise MagretinaError(f"alpha = {alpha!r}: allowed (0, 1)")
    rng = np.random.default_rng(seed)
    idx = rng.integers(0, a.size, (int(n_boot), a.size))
    c, s = np.cos(a)[idx].mean(axis=1), np.sin(a)[idx].mean(axis=1)
    m0 = math.atan2(np.sin(a).mean(), np.cos(a).mean())
    dev = np.degrees(np.angle(np.exp(1j * (np.arctan2(s, c) - m0))))
    lo, hi = np.percentile(dev, [100 * alpha / 2, 100 * (1 - alpha / 2)])
    rlo, rhi = np.percentile(np.hypot(c, s), [100 * alpha / 2, 100 * (1 - alpha / 2)])
    k = 2.0 if axial else 1.0
    base = math.degrees(m0)
    mod = 180.0 if axial else 360.0
    return {"mean_deg": (((base + lo) / k) % mod, ((base + hi) / k) % mod),
            "r": (float(rlo), float(rhi)), "n_boot": int(n_boot), "alpha": alpha}
