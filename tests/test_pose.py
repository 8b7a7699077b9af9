"""Head pose: aerospace yaw-pitch-roll (intrinsic Z-Y-X) in NED / forward-right-down."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy.spatial.transform import Rotation

from renderer.errors import MagretinaError
from renderer.pose import Pose, head_to_world, world_to_head


def _elementary(yaw, pitch, roll):
    """The aerospace direction-cosine product Rz(ψ)·Ry(θ)·Rx(φ) (e.g. Stevens & Lewis,
    Aircraft Control and Simulation, 2nd ed., §1.3), written out by hand."""
    y, p, r = np.radians([yaw, pitch, roll])
    Rz = np.array([[np.cos(y), -np.sin(y), 0], [np.sin(y), np.cos(y), 0], [0, 0, 1]])
    Ry = np.array([[np.cos(p), 0, np.sin(p)], [0, 1, 0], [-np.sin(p), 0, np.cos(p)]])
    Rx = np.array([[1, 0, 0], [0, np.cos(r), -np.sin(r)], [0, np.sin(r), np.cos(r)]])
    return Rz @ Ry @ Rx


@given(st.floats(-180, 180), st.floats(-89, 89), st.floats(-179, 179))
def test_matches_scipy_and_hand_product(yaw, pitch, roll):
    """R_world_head equals scipy's intrinsic 'ZYX' Euler rotation and the hand product."""
    R = Pose(yaw, pitch, roll).R_world_head
    assert np.allclose(R, Rotation.from_euler("ZYX", [yaw, pitch, roll], degrees=True).as_matrix())
    assert np.allclose(R, _elementary(yaw, pitch, roll), atol=1e-12)
    assert np.allclose(R @ R.T, np.eye(3), atol=1e-12)


def test_sign_conventions():
    """Yaw clockwise from north, pitch nose-up, roll right side down (NED, FRD)."""
    assert np.allclose(head_to_world(Pose(90, 0, 0), [1, 0, 0]), [0, 1, 0], atol=1e-12)   # east
    fwd = head_to_world(Pose(0, 30, 0), [1, 0, 0])
    assert fwd[2] < 0 and np.isclose(np.degrees(np.arcsin(-fwd[2])), 30.0)               # nose up
    right = head_to_world(Pose(0, 0, 20), [0, 1, 0])
    assert right[2] > 0                                                                    # right down
    v = np.array([0.3, -0.2, 0.9])
    assert np.allclose(world_to_head(Pose(10, 20, 30), head_to_world(Pose(10, 20, 30), v)), v)


def test_pitch_out_of_range():
    with pytest.raises(MagretinaError, match="pitch_deg"):
        Pose(0, 91, 0)
