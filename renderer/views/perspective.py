"""A perspective (rectilinear) screen view, for stimuli shown on a flat monitor.

The screen is a pinhole camera with square pixels: pixel (i, j) of a W × H image
has its centre at screen coordinates x = (j + ½ − W/2)·s, y = (H/2 − i − ½)·s with
s = 2·tan(hfov/2)/W, so the horizontal field of view spans the image's outer edges
(not the outermost pixel centres).  The camera looks along its x axis, image right
its +y, image up its −z (forward-right-down, like the head), and is turned by
yaw (right), pitch (up) and roll (right side down) in the view's frame ("world":
NED, yaw from geographic north; "head": from the beak).  Not for panoramas.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from scipy.spatial.transform import Rotation

from ..errors import MagretinaError, check_range
from .base import DEFAULT_FILTER, View, check_sampling

FRAMES = ("world", "head")


@dataclass(frozen=True)
class PerspectiveScreen(View):
    """Rectilinear view of a flat screen.

    Parameters
    ----------
    width, height : int
        Image size in pixels (>= 2).
    hfov_deg : float
        Horizontal field of view, degrees in (0, 170].
    yaw_deg, pitch_deg, roll_deg : float
        Viewing direction and roll of the camera in the view's frame, degrees.
    frame : "world" or "head"
    pick : None, int or str
        None averages the eyes that see a direction; an eye shows that eye only.
    """

    width: int = 1280
    height: int = 720
    hfov_deg: float = 90.0
    yaw_deg: float = 0.0
    pitch_deg: float = 0.0
    roll_deg: float = 0.0
    frame: str = "world"
    pick: object = None
    filter: str = DEFAULT_FILTER
    supersample: int = 1
    example = {"width": 32, "height": 20, "hfov_deg": 70.0}

    def __post_init__(self):
        check_sampling(self)
        for key in ("width", "height"):
            v = getattr(self, key)
            if not isinstance(v, (int, np.integer)) or isinstance(v, bool) or v < 2 or v > 32768:
                raise MagretinaError(f"perspective {key} = {v!r}: must be an integer in [2, 32768]")
        object.__setattr__(self, "hfov_deg", check_range("hfov_deg", self.hfov_deg, 0.0, 170.0,
                                                         lo_open=True, unit="degrees"))
        for key, lim in (("yaw_deg", 180.0), ("pitch_deg", 90.0), ("roll_deg", 180.0)):
            object.__setattr__(self, key, check_range(key, getattr(self, key), -lim, lim,
                                                      unit="degrees"))
        if self.frame not in FRAMES:
            raise MagretinaError(f"perspective frame = {self.frame!r}: allowed world, head")

    @property
    def shape(self):
        return (int(self.height), int(self.width))

    @property
    def vfov_deg(self) -> float:
        """Vertical field of view (edge to edge), degrees."""
        return float(np.degrees(2 * np.arctan(np.tan(np.radians(self.hfov_deg) / 2)
                                              * self.height / self.width)))

    @property
    def R_view_camera(self) -> np.ndarray:
        """3x3: v_view = R_view_camera @ v_camera (intrinsic Z-Y-X yaw, pitch, roll)."""
        return Rotation.from_euler("ZYX", [self.yaw_deg, self.pitch_deg, self.roll_deg],
                                   degrees=True).as_matrix()

    def screen_coords(self):
        """(x, y) screen coordinates of pixel centres, each shape (H, W), at unit distance."""
        H, W = self.shape
        s = 2.0 * np.tan(np.radians(self.hfov_deg) / 2.0) / W
        x = (np.arange(W) + 0.5 - W / 2.0) * s
        y = (H / 2.0 - np.arange(H) - 0.5) * s
        return np.meshgrid(x, y)

    def camera_directions(self) -> np.ndarray:
        """(H, W, 3) unit pixel directions in the camera frame."""
        x, y = self.screen_coords()
        d = np.stack([np.ones_like(x), x, -y], axis=-1)
        return d / np.linalg.norm(d, axis=-1, keepdims=True)

    def directions(self, layout=None) -> np.ndarray:
        return self.camera_directions() @ self.R_view_camera.T

    def solid_angle(self, layout=None) -> np.ndarray:
        """Per-pixel solid angle, sr: s²/(1 + x² + y²)^{3/2} (small-pixel limit)."""
        H, W = self.shape
        s = 2.0 * np.tan(np.radians(self.hfov_deg) / 2.0) / W
        x, y = self.screen_coords()
        return s * s / (1.0 + x * x + y * y) ** 1.5

    def scaled(self, n):
        return replace(self, width=int(self.width) * int(n), height=int(self.height) * int(n),
                       supersample=1)
