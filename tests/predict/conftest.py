"""Shared small configurations for the prediction tests."""

import numpy as np
import pytest

from renderer.eye import Eye
from renderer.eye.layout import Layout


def sphere_eye(name="sphere", radius_mm=1.0, nodal_mm=0.0, **kw):
    """An eye that sees every direction (all half-widths 180°)."""
    return Eye(retina_radius_mm=radius_mm, nodal_offset_mm=nodal_mm, nasal_deg=180.0,
               temporal_deg=180.0, dorsal_deg=180.0, ventral_deg=180.0, name=name, **kw)


@pytest.fixture
def sphere_layout():
    return Layout("sphere", (sphere_eye(),))


def ring_dirs(n):
    """n view directions equally spaced in azimuth on the head's horizon, (n, 3)."""
    phi = 2 * np.pi * (np.arange(n) + 0.5) / n
    return np.stack([np.cos(phi), np.sin(phi), np.zeros(n)], axis=-1)
