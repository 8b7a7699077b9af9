"""Orientational disorder of the molecular axis about the nominal receptor axis."""

from __future__ import annotations

from dataclasses import dataclass
from functools import partial

import numpy as np

from ...errors import MagretinaError, check_range
from ...response.base import LUT_SIZE
from .averaging import averaged_lut, kappa_from_p2, p2_of_kappa, vmf_factors
from .base import Alignment


@dataclass(frozen=True)
class Disorder(Alignment):
    """Molecular axes scattered about the nominal receptor axis by a von Mises–Fisher
    distribution of concentration κ (``kappa``), or equivalently of order parameter
    ⟨P_2⟩ (``order_p2``); give one.  Each Legendre term of the response scales by the
    distribution's ⟨P_l⟩ = I_{l+½}(κ)/I_{½}(κ).  Partial order of this kind is the
    photoselection setting of Lau, Rodgers & Hore (2012, J. R. Soc. Interface).

    κ = 0 is complete disorder (no pattern); κ → ∞ the perfectly ordered normal
    hypothesis.  A full response is first averaged over its in-plane angle.
    """

    kappa: float | None = None
    order_p2: float | None = None
    kind = "disorder"
    examples = {"disorder": {"kappa": 5.0}}

    def __post_init__(self):
        super().__post_init__()
        if (self.kappa is None) == (self.order_p2 is None):
            raise MagretinaError("alignment 'disorder': give exactly one of kappa (>= 0) or "
                                 f"order_p2 (in [0, 1)); got kappa = {self.kappa!r}, "
                                 f"order_p2 = {self.order_p2!r}")
        if self.kappa is not None:
            k = check_range("alignment 'disorder': kappa", self.kappa, 0.0, 1e8)
            object.__setattr__(self, "kappa", k)
            object.__setattr__(self, "order_p2", p2_of_kappa(k))
        else:
            object.__setattr__(self, "kappa", kappa_from_p2(self.order_p2))
            object.__setattr__(self, "order_p2", float(self.order_p2))

    def axial_lut(self, response, n: int = LUT_SIZE) -> np.ndarray:
        return averaged_lut(response, partial(vmf_factors, self.kappa), n)
