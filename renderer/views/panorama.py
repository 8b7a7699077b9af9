"""Equirectangular panoramas (2:1) in the world frame or the head frame.

World panorama: columns are azimuth from geographic north, north in the middle,
east to the right; the centre of column j is at −180° + (j + ½)·360°/W and of row
i at elevation 90° − (i + ½)·180°/H.  The head panorama uses the same grid with
azimuth measured from the head's forward axis (positive right).  Not for flat-screen
(rectilinear) views.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..errors import MagretinaError
from ..frames import equirect_centres_deg
from ..kernels import equirect_dirs, equirect_tables
from .base import DEFAULT_FILTER, View, check_sampling


def _check_width(width):
    try:
        w = int(width)
    except (TypeError, ValueError):
        raise MagretinaError(f"panorama width must be an integer, got {width!r}") from None
    if w != width or w < 8 or w % 2:
        raise MagretinaError(f"panorama width = {width!r}: must be an even integer >= 8 "
                             f"(the panorama is width x width/2)")
    return w


@dataclass(frozen=True)
class _Equirect(View):
    width: int = 1024
    pick: object = None
    filter: str = DEFAULT_FILTER
    supersample: int = 1
    equirect = True

    def __post_init__(self):
        object.__setattr__(self, "width", _check_width(self.width))
        check_sampling(self)

    def scaled(self, n):
        return replace(self, width=self.width * int(n), supersample=1)

    @property
    def shape(self):
        return (self.width // 2, self.width)

    def tables(self):
        H, W = self.shape
        return equirect_tables(W, H)

    def directions(self, layout=None) -> np.ndarray:
        H, W = self.shape
        return equirect_dirs(*self.tables()).reshape(H, W, 3)

    def solid_angle(self, layout=None) -> np.ndarray:
        H, W = self.shape
        cos_el = self.tables()[0]
        dA = (np.pi / H) * (2 * np.pi / W)
        return np.repeat((cos_el * dA)[:, None], W, axis=1) * (np.sinc(0.5 / H))

    def pixel_azel(self):
        """(azimuth, elevation) in degrees of pixel centres, each shape (W,) and (H,)."""
        H, W = self.shape
        return equirect_centres_deg(W, H)


@dataclass(frozen=True)
class WorldPanorama(_Equirect):
    """Equirectangular panorama in the world (NED) frame, width × width/2 pixels."""

    frame = "world"
    example = {"width": 48}


@dataclass(frozen=True)
class HeadPanorama(_Equirect):
    """Equirectangular panorama in the head frame (azimuth from the head's forward axis)."""

    frame = "head"
    example = {"width": 48}
