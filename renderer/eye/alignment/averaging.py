"""Orientational averages of axial responses, precomputed as Legendre-series scalings.

For an axial response f(cos θ) = Σ c_l P_l(cos θ), any distribution of the molecular
axis that is symmetric about the nominal receptor axis multiplies each term by the
distribution's mean ⟨P_l(cos ω)⟩, ω the angle between molecular and receptor axes
(the spherical-harmonic addition theorem).  A fixed tilt γ with free rotation gives
⟨P_l⟩ = P_l(cos γ); a von Mises–Fisher spread of concentration κ gives
⟨P_l⟩ = I_{l+½}(κ)/I_{½}(κ).  This module computes those factors, the Legendre
coefficients of any axial response, and the averaged lookup tables; it does not
sample anything per pixel.
"""

from __future__ import annotations

import numpy as np
from numpy.polynomial import legendre as npleg
from scipy import optimize, special

from ...errors import MagretinaError
from ...response.base import LUT_SIZE, lut_nodes

#: Largest Legendre order used when projecting a response that is not a finite series.
L_MAX = 512


def tilt_factors(tilt_rad: float, l_max: int) -> np.ndarray:
    """P_l(cos γ) for l = 0..l_max, shape (l_max + 1,)."""
    return npleg.legvander(np.array([np.cos(tilt_rad)]), int(l_max))[0]


def vmf_factors(kappa: float, l_max: int) -> np.ndarray:
    """⟨P_l(cos ω)⟩ of a von Mises–Fisher distribution on the sphere, l = 0..l_max.

    ⟨P_l⟩ = I_{l+½}(κ)/I_{½}(κ) (modified Bessel functions of the first kind; the
    exponentially scaled ``ive`` keeps large κ finite).  κ = 0 is isotropic.
    """
    l = np.arange(int(l_max) + 1)
    k = float(kappa)
    if k < 1e-8:
        return (l == 0).astype(float)
    with np.errstate(under="ignore"):
        return special.ive(l + 0.5, k) / special.ive(0.5, k)


def p2_of_kappa(kappa: float) -> float:
    """Order parameter ⟨P_2⟩ of a von Mises–Fisher distribution of concentration κ."""
    return float(vmf_factors(kappa, 2)[2])


def kappa_from_p2(p2: float) -> float:
    """The concentration κ ≥ 0 whose ⟨P_2⟩ equals ``p2`` (0 ≤ p2 < 1)."""
    s = float(p2)
    if not 0.0 <= s < 1.0:
        raise MagretinaError(f"order_p2 = {p2!r} is out of range; allowed [0, 1) for a "
                             f"von Mises-Fisher spread (1 = perfect order)")
    if s == 0.0:
        return 0.0
    hi = 10.0
    while p2_of_kappa(hi) < s:
        hi *= 4.0
    return float(optimize.brentq(lambda k: p2_of_kappa(k) - s, 1e-9, hi, xtol=1e-12, rtol=1e-13))


def legendre_coefficients(response, l_max: int = L_MAX, tol: float = 1e-9) -> np.ndarray:
    """Legendre coefficients c_l of an axial response (or a full one's axial average).

    A :class:`renderer.response.Legendre` gives its own coefficients (exact).  Any
    other axial response is projected with Gauss–Legendre quadrature, doubling the
    order from 32 until the series reproduces the response on its lookup-table nodes
    to ``tol`` times its range, or ``l_max`` is reached.
    """
    if not getattr(response, "axial", True):
        response = response.axial_average()
    coeffs = getattr(response, "coeffs", None)
    if coeffs is not None:
        return np.asarray(coeffs, dtype=np.float64)
    nodes = lut_nodes(LUT_SIZE)
    ref = np.asarray(response(nodes), dtype=np.float64)
    scale = max(float(np.ptp(ref)), float(np.max(np.abs(ref))), 1e-300)
    L = 32
    while True:
        x, w = npleg.leggauss(L + 1)
        V = npleg.legvander(x, L)
        fx = np.asarray(response(x), dtype=np.float64)
        c = (2 * np.arange(L + 1) + 1) / 2.0 * (V.T @ (w * fx))
        if np.max(np.abs(npleg.legval(nodes, c) - ref)) <= tol * scale or L >= l_max:
            return c
        L *= 2


def averaged_lut(response, factors_fn, n: int = LUT_SIZE) -> np.ndarray:
    """Lookup table on ``lut_nodes(n)`` of Σ c_l·g_l·P_l(cos θ), g = factors_fn(l_max)."""
    c = legendre_coefficients(response)
    g = np.asarray(factors_fn(c.size - 1), dtype=np.float64)
    return npleg.legval(lut_nodes(n), c * g[: c.size])


__all__ = ["tilt_factors", "vmf_factors", "p2_of_kappa", "kappa_from_p2",
           "legendre_coefficients", "averaged_lut", "L_MAX"]
