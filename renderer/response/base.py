"""The response interface: what a receptor's angular response must provide.

A response says how strongly one receptor signals as a function of the field
direction in its molecular frame.  Two kinds exist:

* **axial** responses depend only on cos θ, θ the angle between the receptor axis
  (molecular z) and the field.  They expose ``__call__(cos_theta)`` and ``lut(n)``,
  samples on a uniform grid of cos θ over [-1, 1], which the rendering kernels
  interpolate linearly.
* **full** responses depend on the field direction in the full molecular frame
  (two angles).  They expose ``evaluate_dirs(dirs_mol)`` for unit vectors in the
  molecular frame, ``sphere_lut(n_theta, n_phi)``, and ``axial_average()``, the
  axial response left after free rotation about molecular z.

This module is for the interface and shared helpers only; implementations live
beside it, one per file, and are registered in ``renderer.response.REGISTRY``.
"""

from __future__ import annotations

import numpy as np

#: Default number of samples in cos θ used by the rendering kernels' lookup table.
#: Linear interpolation on 4097 nodes errs by at most h²/8·max|f''| with h = 1/2048,
#: i.e. < 3e-8·max|f''|, far below any modulation a study resolves.
LUT_SIZE = 4097

#: Which reaction product drives the visual signal: s = f (singlet) or s = 1 − f
#: (triplet).  The one list every layer (pipeline, predictions, study files, CLI) checks.
PRODUCTS = ("singlet", "triplet")


def lut_nodes(n: int = LUT_SIZE) -> np.ndarray:
    """The cos θ nodes of an axial lookup table: ``linspace(-1, 1, n)``."""
    return np.linspace(-1.0, 1.0, int(n))


class AxialResponse:
    """Base class of axial responses f(cos θ).

    Subclasses implement ``__call__(cos_theta) -> ndarray`` (same shape, float64).
    """

    axial = True

    def __call__(self, cos_theta):  # pragma: no cover - interface
        raise NotImplementedError

    def lut(self, n: int = LUT_SIZE) -> np.ndarray:
        """Samples of f at ``lut_nodes(n)``, shape (n,), float64."""
        return np.asarray(self(lut_nodes(n)), dtype=np.float64)

    def evaluate_dirs(self, dirs_mol):
        """f for unit field directions in the molecular frame, shape (N, 3) -> (N,)."""
        d = np.asarray(dirs_mol, dtype=np.float64)
        return self(np.clip(d[..., 2], -1.0, 1.0))

    def describe(self) -> dict:
        """A JSON-serialisable description of the response (for sidecars)."""
        return {"kind": type(self).__name__}
