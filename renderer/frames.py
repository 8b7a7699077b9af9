"""Direction conventions and frame-to-frame helpers, written once.

World frame: local North-East-Down (NED).  Head frame: forward-right-down (FRD).
At interfaces directions are azimuth/elevation in degrees: azimuth clockwise from
the frame's x axis (north, or forward) towards its y axis (east, or right),
elevation positive up (against +z, which points down).  Inside, unit vectors.
This module holds only these conversions, not any rotation of a particular pose
(see :mod:`renderer.pose`) or eye (see :mod:`renderer.eye`).

Every NumPy conversion of the package goes through here.  The compiled kernels write
the same conversions inline per pixel (``kernels.pixels``, ``kernels.sampling._atan2``,
``kernels.tables.equirect_tables``): a numba loop cannot call these array functions per
element without allocating, and the polynomial atan2 there keeps the loops vectorised;
the kernels' NumPy twins (``kernels.twins``) use this module and the kernel-versus-twin
tests hold the two together.
"""

from __future__ import annotations

import numpy as np


def azel_to_vec(az_deg, el_deg) -> np.ndarray:
    """Unit vectors from azimuth/elevation in degrees.

    Parameters
    ----------
    az_deg, el_deg : array_like
        Azimuth (clockwise from x towards y) and elevation (positive up), degrees;
        broadcast against each other.

    Returns
    -------
    ndarray, shape (..., 3)
        (x, y, z) with z pointing down, float64.
    """
    az = np.radians(np.asarray(az_deg, dtype=np.float64))
    el = np.radians(np.asarray(el_deg, dtype=np.float64))
    ce = np.cos(el)
    return np.stack(np.broadcast_arrays(ce * np.cos(az), ce * np.sin(az), -np.sin(el)),
                    axis=-1)


def vec_to_azel_rad(v):
    """Azimuth and elevation in radians of vectors of shape (..., 3) (need not be unit):
    atan2(y, x) and atan2(−z, hypot(x, y)), accurate at every elevation (an arcsin or
    arccos of a component loses digits near the poles and needs unit input).

    Returns
    -------
    az_rad : ndarray, in [-π, π]
    el_rad : ndarray, in [-π/2, π/2]
    """
    v = np.asarray(v, dtype=np.float64)
    x, y, z = v[..., 0], v[..., 1], v[..., 2]
    return np.arctan2(y, x), np.arctan2(-z, np.hypot(x, y))


def vec_to_azel(v):
    """Azimuth and elevation in degrees of vectors of shape (..., 3) (need not be unit);
    :func:`vec_to_azel_rad` in degrees.

    Returns
    -------
    az_deg : ndarray, in (-180, 180]
    el_deg : ndarray, in [-90, 90]
    """
    az, el = vec_to_azel_rad(v)
    return np.degrees(az), np.degrees(el)


def equirect_centres_deg(width, height):
    """Azimuth (W,) and elevation (H,) in degrees of the pixel centres of a W × H
    equirectangular grid: column j at −180° + (j + ½)·360°/W, row i at
    90° − (i + ½)·180°/H (azimuth left to right, elevation top to bottom)."""
    az = -180.0 + (np.arange(width) + 0.5) * 360.0 / width
    el = 90.0 - (np.arange(height) + 0.5) * 180.0 / height
    return az, el


def unit_vec_to_azel_rad(v):
    """Azimuth and elevation in radians of unit vectors of shape (..., 3).

    Elevation is arcsin(−z) (z clipped to [−1, 1]): for unit vectors this is the elevation
    of :func:`vec_to_azel`; it is what equirectangular lookups (whose rows are uniform in
    elevation) use.  Vectors that are not unit give wrong elevations: use
    :func:`vec_to_azel` for those.

    Returns
    -------
    az_rad : ndarray, in [-π, π]
    el_rad : ndarray, in [-π/2, π/2]
    """
    d = np.asarray(v, dtype=np.float64)
    return np.arctan2(d[..., 1], d[..., 0]), np.arcsin(np.clip(-d[..., 2], -1.0, 1.0))


def angle_between_deg(u, v) -> np.ndarray:
    """Angle in degrees between vectors (last axis 3), robust near 0 and 180 degrees."""
    u = np.asarray(u, dtype=np.float64)
    v = np.asarray(v, dtype=np.float64)
    cr = np.linalg.norm(np.cross(u, v), axis=-1)
    dt = np.sum(u * v, axis=-1)
    return np.degrees(np.arctan2(cr, dt))


def rotate(R, v) -> np.ndarray:
    """Apply a 3x3 rotation to vectors of shape (..., 3): returns R @ v for each."""
    return np.asarray(v, dtype=np.float64) @ np.asarray(R, dtype=np.float64).T
