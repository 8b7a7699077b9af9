"""Receptors normal to the retina (the default hypothesis)."""

from __future__ import annotations

from dataclasses import dataclass

from .base import Alignment


@dataclass(frozen=True)
class Normal(Alignment):
    """Receptor axis along the inward normal of the retina at each receptor (Ritz,
    Adem & Schulten 2000, Biophys. J. 78:707).  With ``axis = "chief-ray"`` this is
    the chief-ray hypothesis.

    A full (non-axial) response is used through its average over a uniformly random
    in-plane angle.
    """

    kind = "normal"
