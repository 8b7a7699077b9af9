"""Head orientation in the local NED world frame, and sequences of it.

Pose is aerospace yaw-pitch-roll, intrinsic Z-Y-X, built on
``scipy.spatial.transform.Rotation``: yaw is the heading clockwise from geographic
north, pitch positive nose-up, roll positive right side down.  ``R_world_head``
maps head-frame (forward-right-down) vectors to world-frame (NED) vectors.  This
module does not know about eyes or views.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.spatial.transform import Rotation

from .errors import check_range
from .frames import rotate


@dataclass(frozen=True)
class Pose:
    """Head orientation.

    Parameters
    ----------
    yaw_deg : float
        Heading, degrees clockwise from geographic north.
    pitch_deg : float
        Nose-up angle, degrees in [-90, 90].
    roll_deg : float
        Right-side-down angle, degrees.
    """

    yaw_deg: float = 0.0
    pitch_deg: float = 0.0
    roll_deg: float = 0.0

    def __post_init__(self):
        object.__setattr__(self, "yaw_deg", check_range("yaw_deg", self.yaw_deg, -1e6, 1e6))
        object.__setattr__(self, "pitch_deg", check_range("pitch_deg", self.pitch_deg, -90.0, 90.0,
                                                          unit="degrees"))
        object.__setattr__(self, "roll_deg", check_range("roll_deg", self.roll_deg, -180.0, 180.0,
                                                         unit="degrees"))

    @property
    def rotation(self) -> Rotation:
        """The scipy Rotation taking head-frame vectors to world (NED) vectors."""
        return Rotation.from_euler("ZYX", [self.yaw_deg, self.pitch_deg, self.roll_deg],
                                   degrees=True)

    @property
    def R_world_head(self) -> np.ndarray:
        """3x3 matrix: v_world = R_world_head @ v_head."""
        return self.rotation.as_matrix()

    @property
    def R_head_world(self) -> np.ndarray:
        """3x3 matrix: v_head = R_head_world @ v_world."""
        return self.rotation.as_matrix().T

    def as_dict(self) -> dict:
        return {"yaw_deg": self.yaw_deg, "pitch_deg": self.pitch_deg, "roll_deg": self.roll_deg}


def world_to_head(pose: Pose, v_world) -> np.ndarray:
    """Express world-frame vectors (..., 3) in the head frame."""
    return rotate(pose.R_head_world, v_world)


def head_to_world(pose: Pose, v_head) -> np.ndarray:
    """Express head-frame vectors (..., 3) in the world frame."""
    return rotate(pose.R_world_head, v_head)
