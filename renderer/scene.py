"""Scenes: 2:1 equirectangular world panoramas in linear light, loaded or generated.

A :class:`Scene` is a float32 (H, W, 3) linear-light image whose geographic north
lies at the continuous column ``north_col`` (pixel j spans [j, j+1); the default
W/2 puts north in the middle, like :class:`renderer.views.WorldPanorama`).  The
procedural generator draws an invented dusk landscape (sky gradient with the glow of
a set sun, a hill line, dark ground and four landmarks at stated azimuths) so demos
and tests need no photographs.  Not a renderer of realistic scenes.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np

from .errors import MagretinaError
from .inputs import image_size
from .io import read_image_linear
from .kernels import build_pyramid


@dataclass(frozen=True)
class Scene:
    """A world panorama in linear light.

    Attributes
    ----------
    image : ndarray, (H, W, 3) float32, linear light in [0, 1], W = 2 H
    north_col : float
        Continuous column (pixels) of geographic north.
    name : str
    landmarks : dict
        Optional name -> azimuth (degrees from north) of features in the scene.
    """

    image: np.ndarray
    north_col: float | None = None
    name: str = "scene"
    landmarks: dict = field(default_factory=dict)

    def __post_init__(self):
        img = np.ascontiguousarray(self.image, dtype=np.float32)
        if img.ndim != 3 or img.shape[2] != 3:
            raise MagretinaError(f"scene {self.name}: image must be H x W x 3, got {img.shape}")
        H, W = img.shape[:2]
        if W != 2 * H:
            raise MagretinaError(f"scene {self.name}: an equirectangular panorama must be 2:1 "
                                 f"(width = 2 x height); got {W} x {H}")
        nc = W / 2.0 if self.north_col is None else float(self.north_col)
        if not (0.0 <= nc <= W):
            raise MagretinaError(f"scene {self.name}: north_col = {nc:g} outside [0, {W}]")
        object.__setattr__(self, "image", img)
        object.__setattr__(self, "north_col", nc)

    @property
    def shape(self):
        return self.image.shape[:2]

    def pyramid(self):
        """The scene's mipmap pyramid (:func:`renderer.kernels.build_pyramid`, linear
        light), built on first use and kept with this Scene object, so every frame and
        view rendered over it reuses it.  The image is made read-only then, so the two
        cannot drift apart (copy the image to edit it, and make a new Scene)."""
        pyr = self.__dict__.get("_pyramid")
        if pyr is None or tuple(pyr.shape) != tuple(self.image.shape):
            self.image.setflags(write=False)
            pyr = build_pyramid(self.image)
            object.__setattr__(self, "_pyramid", pyr)
        return pyr

    @classmethod
    def load(cls, path, north_col=None) -> "Scene":
        """Read a 2:1 panorama file (8-bit taken as sRGB, 16-bit as linear)."""
        # Shape from the header first: a wrong or huge file is refused before decoding.
        W, H = image_size(path, "scene")
        if W != 2 * H:
            raise MagretinaError(f"scene {os.fspath(path)}: an equirectangular panorama must be 2:1 "
                                 f"(width = 2 x height); got {W} x {H}")
        img = read_image_linear(path)
        H, W = img.shape[:2]
        if W != 2 * H:
            raise MagretinaError(f"scene {os.fspath(path)}: an equirectangular panorama must be 2:1 "
                                 f"(width = 2 x height); got {W} x {H}")
        return cls(img, north_col=north_col, name=os.path.basename(os.fspath(path)))

    def describe(self) -> dict:
        return {"name": self.name, "shape": list(self.image.shape), "north_col": self.north_col,
                "landmarks": self.landmarks}


#: Landmarks of the procedural dusk scene: name -> azimuth (degrees from north).
DUSK_LANDMARKS = {"tower": 0.0, "lone_tree": 90.0, "hut": 180.0, "mast": 270.0}


def uniform(width=1024, luminance=0.5) -> Scene:
    """A uniform grey panorama of the given linear luminance."""
    H = int(width) // 2
    return Scene(np.full((H, 2 * H, 3), luminance, np.float32), name=f"uniform-{luminance:g}")


def dusk(width=2048, sun_azimuth_deg=285.0, sun_depression_deg=4.0, seed=7) -> Scene:
    """Generate the procedural dusk landscape.

    Parameters
    ----------
    width : int
        Panorama width (height is width/2).
    sun_azimuth_deg, sun_depression_deg : float
        Where the (set) sun is: its glow brightens the sky around that azimuth.
    seed : int
        Seed of the hill line's random phases (fixed default: the scene is fixed).

    Returns
    -------
    Scene with north in the middle column and :data:`DUSK_LANDMARKS`.
    """
    W = int(width)
    if W < 16 or W % 2:
        raise MagretinaError(f"scene width = {width!r}: must be an even integer >= 16")
    H = W // 2
    rng = np.random.default_rng(seed)
    az = np.radians(-180.0 + (np.arange(W) + 0.5) * 360.0 / W)
    el = np.radians(90.0 - (np.arange(H) + 0.5) * 180.0 / H)
    AZ, EL = np.meshgrid(az, el)

    # Hill line: a few random-phase harmonics in azimuth, 1-6 degrees high.
    hill = np.full(W, np.radians(2.5))
    for k, amp in ((2, 1.4), (3, 1.0), (5, 0.7), (9, 0.4), (17, 0.2)):
        hill += np.radians(amp) * np.sin(k * az + rng.uniform(0, 2 * np.pi))

    # Sky: zenith deep blue to a pale horizon, warm glow around the set sun.
    sun = np.array([np.cos(-np.radians(sun_depression_deg)) * np.cos(np.radians(sun_azimuth_deg)),
                    np.cos(-np.radians(sun_depression_deg)) * np.sin(np.radians(sun_azimuth_deg)),
                    np.sin(-np.radians(sun_depression_deg))])
    dirs = np.stack([np.cos(EL) * np.cos(AZ), np.cos(EL) * np.sin(AZ), np.sin(EL)], axis=-1)
    cos_sun = np.clip(dirs @ sun, -1, 1)
    t = np.clip(EL / (np.pi / 2), 0, 1) ** 0.45
    zenith = np.array([0.010, 0.018, 0.060])
    horizon = np.array([0.22, 0.20, 0.24])
    sky = horizon * (1 - t[..., None]) + zenith * t[..., None]
    glow = np.exp((cos_sun - 1.0) / 0.06)[..., None] * np.array([0.55, 0.22, 0.05])
    glow += np.exp((cos_sun - 1.0) / 0.5)[..., None] * np.array([0.10, 0.05, 0.02])
    sky = sky + glow * np.clip(1.2 - t, 0, 1)[..., None]

    # Ground: dark, slightly green, darker towards the nadir, with a faint texture.
    depth = np.clip(-EL / (np.pi / 2), 0, 1)
    ground = np.array([0.020, 0.026, 0.016]) * (1.0 - 0.6 * depth[..., None])
    ground *= (1.0 + 0.15 * np.sin(37 * AZ) * np.sin(23 * EL))[..., None]
    hills = np.array([0.012, 0.014, 0.016])
    img = np.where((EL > hill[None, :])[..., None], sky, hills)
    img = np.where((EL < 0)[..., None], ground, img)

    # Landmarks: silhouettes standing on the hill line at known azimuths.
    def box(az_deg, half_width_deg, height_deg, base=None):
        a = np.radians(((np.degrees(AZ) - az_deg + 180.0) % 360.0) - 180.0)
        b = hill_at(az_deg) if base is None else base
        return (np.abs(a) <= np.radians(half_width_deg)) & (EL >= b - 0.02) & (EL <= b + np.radians(height_deg))

    def hill_at(az_deg):
        return hill[int(np.argmin(np.abs(np.degrees(az) - ((az_deg + 180) % 360 - 180))))]

    dark = np.array([0.004, 0.004, 0.005])
    masks = [box(0.0, 0.8, 22.0), box(0.0, 2.2, 3.0),             # tower with a base
             box(90.0, 0.35, 9.0),                                  # tree trunk
             box(90.0, 3.0, 5.0, base=hill_at(90.0) + np.radians(5.0)),  # tree crown
             box(180.0, 3.0, 4.0), box(180.0, 1.5, 6.0),           # hut and roof
             box(270.0, 0.25, 30.0)]                               # thin mast
    for m in masks:
        img = np.where(m[..., None], dark, img)
    # A light at the top of the mast and a lit window in the hut.
    img = np.where(box(270.0, 0.4, 0.8, base=hill_at(270.0) + np.radians(29.5))[..., None],
                   np.array([0.9, 0.1, 0.05]), img)
    img = np.where(box(180.0, 0.5, 1.2, base=hill_at(180.0) + np.radians(1.0))[..., None],
                   np.array([0.6, 0.45, 0.15]), img)
    img = np.clip(img, 0.0, 1.0).astype(np.float32)
    return Scene(img, north_col=W / 2.0, name="dusk", landmarks=dict(DUSK_LANDMARKS))
