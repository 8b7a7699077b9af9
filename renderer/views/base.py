"""The view interface: which picture to draw and in which frame its pixels point.

A view is a small frozen dataclass with ``shape`` (H, W), ``frame`` ("world" or
"head") and ``pick`` (None: average the eyes that see a direction; an eye index
or name: that eye only).  Equirectangular views give ``tables()`` (cos/sin of
pixel-centre elevation per row and azimuth per column) so kernels can generate
directions on the fly; other views give ``directions(layout)``, an (H, W, 3) array
of unit vectors in their frame with NaN rows outside their footprint.
``solid_angle(layout)`` gives each pixel's solid angle (sr) for averages.  Every view
also says how it samples: ``filter`` (how the scene is read: "mipmap", the anisotropic
footprint filter, default; "trilinear", the isotropic mipmap; "bilinear", plain
bilinear reads; see :mod:`renderer.kernels.filtering`) and ``supersample`` (N: the
pattern and the visual-field outline are evaluated on N × N sub-pixels and their
modulation box-averaged; 1 = once per pixel centre).  Views do not evaluate fields or
responses.
"""

from __future__ import annotations

import numpy as np

from ..errors import MagretinaError


#: Filters a view can name (the first is the default).
FILTERS = ("mipmap", "trilinear", "bilinear")
DEFAULT_FILTER = "mipmap"
#: Largest supersampling factor per axis (N × N pattern evaluations per pixel).
SUPERSAMPLE_MAX = 16


def check_sampling(view):
    """Validate a view's ``filter`` and ``supersample`` fields (raise MagretinaError)."""
    name = type(view).__name__
    if view.filter not in FILTERS:
        raise MagretinaError(f"{name} filter = {view.filter!r}: allowed "
                             f"{', '.join(FILTERS)}")
    n = view.supersample
    if (not isinstance(n, (int, np.integer)) or isinstance(n, bool)
            or not 1 <= n <= SUPERSAMPLE_MAX):
        raise MagretinaError(f"{name} supersample = {n!r}: must be an integer in "
                             f"[1, {SUPERSAMPLE_MAX}]")


class View:
    frame = "head"
    equirect = False
    pick = None
    filter = DEFAULT_FILTER
    supersample = 1
    #: Constructor keywords of a small example (the view tests build every registered
    #: view from these, see ``renderer.views.examples``).
    example = {}

    def scaled(self, n):  # pragma: no cover - interface
        """The same view with n × n pixels for each of this one's (its pixel grid is the
        n × n sub-pixel grid of this one), supersample 1."""
        raise NotImplementedError

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
