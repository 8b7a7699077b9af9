"""The view interface: which picture to draw and in which frame its pixels point.

A view is a small frozen dataclass with ``shape`` (H, W), ``frame`` ("world" or
"head") and ``pick`` (None: average the eyes that see a direction; an eye index
or name: that eye only).  Equirectangular views give ``tables()`` (cos/sin of
pixel-centre elevation per row and azimuth per column) so kernels can generate
directions on the fly; other views give ``directions(layout)``, an (H, W, 3) array
of unit vectors in their frame with NaN rows outside their footprint.
``solid_angle(layout)`` gives each pixel's solid angle (sr) for averages.  Views do
not evaluate fields or responses.
"""

from __future__ import annotations

import numpy as np


class View:
    frame = "head"
    equirect = False
    pick = None

    @property
    def shape(self):  # pragma: no cover - interface
        raise NotImplementedError

    def directions(self, layout) -> np.ndarray:  # pragma: no cover - interface
        raise NotImplementedError

    def solid_angle(self, layout) -> np.ndarray:  # pragma: no cover - interface
        raise NotImplementedError

    def describe(self) -> dict:
        d = {"kind": type(self).__name__}
        d.update({k: getattr(self, k) for k in getattr(self, "__dataclass_fields__", {})})
        return d
