"""Axial responses written as a Legendre series in cos θ.

f(cos θ) = Σ_l c_l P_l(cos θ).  A radical-pair yield is unchanged when the field
is reversed, so physical responses have even l only; odd terms are accepted for
hand-made test functions but flagged by :attr:`Legendre.is_even`.  This module
does not fit series to data (see :mod:`renderer.response.tabulated`).
"""

from __future__ import annotations

import numpy as np
from numpy.polynomial import legendre as npleg

from ..errors import MagretinaError
from .base import AxialResponse


class Legendre(AxialResponse):
    """f(cos θ) = Σ_l c_l P_l(cos θ).

    Parameters
    ----------
    coeffs : sequence of float
        c_0, c_1, c_2, ... (dimensionless, in the units of the response).
    """

    def __init__(self, coeffs):
        c = np.atleast_1d(np.asarray(coeffs, dtype=np.float64))
        if c.ndim != 1 or c.size == 0:
            raise MagretinaError("Legendre coefficients must be a non-empty list of numbers")
        if not np.all(np.isfinite(c)):
            raise MagretinaError(f"Legendre coefficients must be finite, got {c.tolist()}")
        self.coeffs = c
        self.coeffs.setflags(write=False)

    @property
    def is_even(self) -> bool:
        """True if every odd-order coefficient is zero (field-reversal symmetric)."""
        return bool(np.all(self.coeffs[1::2] == 0.0))

    def __call__(self, cos_theta):
        return npleg.legval(np.asarray(cos_theta, dtype=np.float64), self.coeffs)

    def scaled(self, factors) -> "Legendre":
        """A new series with c_l multiplied by ``factors[l]`` (orientational averages)."""
        f = np.asarray(factors, dtype=np.float64)
        return Legendre(self.coeffs * f[: self.coeffs.size])

    def describe(self) -> dict:
        return {"kind": "legendre", "coeffs": self.coeffs.tolist()}

    def __repr__(self):
        return f"Legendre({self.coeffs.tolist()})"
