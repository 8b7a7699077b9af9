"""Pixel-grid and direction-grid tables: equirectangular cos/sin tables and cube maps.

For: the plain-array descriptions of a grid that the kernels read instead of per-pixel
direction arrays (per-row and per-column cos/sin of an equirectangular view), the
explicit directions of such a grid (for the twins and other views), and the cube-map
tables that hold full-frame responses.  NumPy (and SciPy for the cube refinement) only;
not for compiled code or for what a view shows (that is :mod:`renderer.views`).
"""

from __future__ import annotations

import numpy as np


def equirect_tables(width, height, north_col=None):
    """cos/sin tables of pixel-centre elevation (rows) and azimuth (columns).

    Column j's centre is at azimuth (j + ½ − north_col)·360°/W (north_col defaults
    to W/2: north in the middle), row i's at elevation 90° − (i + ½)·180°/H.
    """
    if north_col is None:
        north_col = width / 2.0
    az = np.radians((np.arange(width) + 0.5 - north_col) * 360.0 / width)
    el = np.radians(90.0 - (np.arange(height) + 0.5) * 180.0 / height)
    return np.cos(el), np.sin(el), np.cos(az), np.sin(az)


# cube-map tables for full-frame responses
# ---------------------------------------------------------------------------

def cube_nodes(n):
    """Unit directions of a cube-map table's nodes, shape (6, n, n, 3).

    Face f = 2k + (0 if the major axis k is positive else 1); on each face the two
    other components, divided by the major one's magnitude, run over
    ``linspace(-1, 1, n)`` in index order (first minor axis = row).  Nodes on the
    cube's edges belong to two faces with equal values, so bilinear interpolation
    never needs a neighbouring face.
    """
    g = np.linspace(-1.0, 1.0, int(n))
    U, V = np.meshgrid(g, g, indexing="ij")
    out = np.empty((6, n, n, 3))
    for f in range(6):
        k, sgn = divmod(f, 2)
        minor = [i for i in range(3) if i != k]
        out[f, ..., k] = -1.0 if sgn else 1.0
        out[f, ..., minor[0]] = U
        out[f, ..., minor[1]] = V
    return out / np.linalg.norm(out, axis=-1, keepdims=True)


def cube_table(evaluate_dirs, n=257, n_sample=65):
    """Sample a function of unit direction on :func:`cube_nodes`, shape (6, n, n).

    The function is evaluated on an ``n_sample``-node grid per face and refined to
    ``n`` nodes by bicubic spline interpolation in the face coordinates (error of
    order h⁴·max|∂⁴f|/384 with h = 2/(n_sample − 1), about 2.5e-9·max|∂⁴f| at 65),
    because evaluating a spin-dynamics or harmonic response on 6·257² directions
    would dominate a shot.  Rendering then interpolates bilinearly on the fine grid,
    erring by at most about h²/8·max|∂²f| with h = 2/(n − 1) (4e-6·max|∂²f| at 257).
    ``n_sample >= n`` evaluates every node directly.  Along a cube edge the spline of
    either face reduces to the 1-D spline of the same edge samples, so the table stays
    continuous across faces.
    """
    n = int(n)
    m = min(int(n_sample), n)
    if m < 4:
        raise ValueError("cube_table needs n_sample >= 4")
    coarse = np.asarray(evaluate_dirs(cube_nodes(m).reshape(-1, 3)), dtype=np.float64)
    coarse = coarse.reshape(6, m, m)
    if m == n:
        return np.ascontiguousarray(coarse)
    # deferred: scipy.interpolate is needed only to refine a coarser sample, and importing
    # it costs start-up time of every process that loads the kernels
    from scipy.interpolate import RectBivariateSpline

    gc = np.linspace(-1.0, 1.0, m)
    gf = np.linspace(-1.0, 1.0, n)
    out = np.empty((6, n, n))
    for f in range(6):
        out[f] = RectBivariateSpline(gc, gc, coarse[f], kx=3, ky=3, s=0)(gf, gf)
    return out


def equirect_dirs(cos_el, sin_el, cos_az, sin_az) -> np.ndarray:
    """Explicit (H*W, 3) view-frame directions of an equirectangular grid."""
    ce = cos_el[:, None]
    d = np.stack(np.broadcast_arrays(ce * cos_az[None, :], ce * sin_az[None, :],
                                     -sin_el[:, None] + 0.0 * cos_az[None, :]), axis=-1)
    return d.reshape(-1, 3)
