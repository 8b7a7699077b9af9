"""The receptor-alignment interface: how the receptor molecule sits at each retinal point.

An alignment hypothesis says, for the receptor a ray reaches, which axis and frame
its molecule has.  Every hypothesis starts from a per-receptor *base axis*: the
inward retinal normal (``axis = "normal"``) or the chief ray, the direction of the
ray after the nodal point (``axis = "chief-ray"``).  On top of it a hypothesis
either changes the response table (tilt with free rotation, orientational disorder,
random in-plane angle: averages precomputed here, never per pixel) or asks the
kernel for more per-pixel work (a ratio of two populations, a full molecular frame).
Implementations are small frozen dataclasses, one per file, registered in
``renderer.eye.alignment.REGISTRY``.  This module does no rendering.

Conventions: in-plane reference "meridian" puts molecular x along the local retinal
meridian, away from the posterior pole (y = z × x along the parallel); "fixed" uses the
projection of the eye's dorsal direction (−z of the eye frame), undefined where the axis
is vertical in the eye.  Tilt and disorder applied to a *full* response first average it
over its own in-plane angle; disorder with a fixed in-plane frame is not modelled.  A
class's ``mode`` is a code of :data:`renderer.kernels.KERNEL_MODES` (default: axial), its
``kernel_slots()`` fill that mode's ``eye_params`` constants, and its ``examples`` are the
settings the tests build it with (:func:`renderer.eye.alignment.examples`).
"""

from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np

from ...errors import MagretinaError
# the kernel mode codes are defined once, beside the packed layout the kernels read
from ...kernels.layout import MODE_AXIAL
from ...response.base import LUT_SIZE, lut_nodes

AXES = ("normal", "chief-ray")


def axial_response(response):
    """The axial response behind ``response``: itself if axial, else its average over a
    uniformly random rotation about molecular z (``axial_average()`` if it has one,
    else a 128-point trapezoid average of ``evaluate_dirs`` over the in-plane angle,
    exact for harmonics up to order 127)."""
    if getattr(response, "axial", True):
        return response
    if hasattr(response, "axial_average"):
        return response.axial_average()
    return _NumericAxialAverage(response)


class _NumericAxialAverage:
    axial = True

    def __init__(self, full, n_phi=128):
        self.full = full
        self.phi = 2 * np.pi * np.arange(n_phi) / n_phi

    def __call__(self, cos_theta):
        c = np.clip(np.asarray(cos_theta, dtype=np.float64), -1.0, 1.0)
        s = np.sqrt(1.0 - c * c)
        cp, sp = np.cos(self.phi), np.sin(self.phi)
        d = np.stack(np.broadcast_arrays(s[..., None] * cp, s[..., None] * sp, c[..., None]), -1)
        v = np.asarray(self.full.evaluate_dirs(d.reshape(-1, 3)), dtype=np.float64)
        return v.reshape(d.shape[:-1]).mean(axis=-1)

    def lut(self, n=LUT_SIZE):
        return self(lut_nodes(n))


@dataclass(frozen=True)
class Alignment:
    """Base class.  ``axis``: "normal" (inward retinal normal) or "chief-ray"."""

    axis: str = "normal"
    kind = "normal"
    mode = MODE_AXIAL
    #: Example settings, label -> constructor keywords ({} means one example, the
    #: defaults, labelled by ``kind``): the mode tests build every registered hypothesis
    #: from these, so each kernel mode a class can ask for should be reached by one.
    examples = {}

    def __post_init__(self):
        if self.axis not in AXES:
            raise MagretinaError(f"alignment {self.kind!r}: axis = {self.axis!r}; "
                                 f"allowed {', '.join(AXES)}")

    # tables ---------------------------------------------------------------------
    def axial_lut(self, response, n: int = LUT_SIZE) -> np.ndarray:
        """f on ``lut_nodes(n)`` of cos θ (θ from the receptor's base axis), after
        this hypothesis's averaging; shape (n,)."""
        return np.asarray(axial_response(response).lut(n), dtype=np.float64)

    def needs_full_response(self) -> bool:
        return False

    def kernel_slots(self) -> dict:
        """Extra per-eye kernel parameters {slot index: value}."""
        return {}

    def describe(self) -> dict:
        d = {"mode": self.kind}
        d.update({f.name: getattr(self, f.name) for f in fields(self)})
        return d

    @property
    def hypothesis(self) -> str:
        """First paragraph of the class docstring: the hypothesis and its source."""
        return (type(self).__doc__ or "").strip().split("\n\n")[0]
