"""Receptors along the chief ray: the photoreceptor points at the pupil."""

from __future__ import annotations

from dataclasses import dataclass

from ...errors import MagretinaError
from .base import Alignment


@dataclass(frozen=True)
class ChiefRay(Alignment):
    """Receptor axis along the ray that reaches it, i.e. parallel to the viewing
    direction after the nodal point (photoreceptors oriented towards the pupil, as
    vertebrate photoreceptors are; common practice).  θ is then the angle between
    viewing direction and field whatever the eye's geometry; with the nodal point at
    the retina's centre (d = 0) it coincides with the normal hypothesis.
    """

    axis: str = "chief-ray"
    kind = "chief-ray"

    def __post_init__(self):
        if self.axis != "chief-ray":
            raise MagretinaError(f"alignment 'chief-ray': axis = {self.axis!r}; the chief-ray "
                                 f"hypothesis fixes axis = 'chief-ray'")
