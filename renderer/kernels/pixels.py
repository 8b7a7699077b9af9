"""Per-pixel kernels: one view direction at a time, for views given as direction arrays.

For: views whose directions are explicit (N, 3) arrays (eye discs, retina maps,
perspective screens): view direction → each eye → visibility → receptor axis and frame →
response → mean over the eyes that see it, then optionally the scene sample and the
modulation.  One parallel loop over directions; each pixel branches per eye, so these do
not vectorise (equirectangular views use :mod:`renderer.kernels.rows` instead).  Not for:
the NumPy reference (:mod:`renderer.kernels.twins`).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from .layout import (MODE_AXIAL, MODE_FULL_FIXED, MODE_RATIO, P_COS_IN, P_COS_OUT, P_COS_PSI,
                     P_CUBE, P_E2, P_FULL, P_LUT, P_MODE, P_Q, P_RB0, P_RB1, P_RB2, P_SIN_PSI,
                     _fold, _tables)
from .filtering import _mip_pixel, pyramid_args
from .leaf import (FASTMATH, _cube_lookup, _inplane_field, _lut_lookup, _lut_row_lookup,
                   _molecular_xy, _ratio_cos, _visible)


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _frame_signal(ux, uy, uz, A, B, bx, by, bz, c, p, lut, cube):
    """Signal of the modes that need the receptor's in-plane frame (ratio, full)."""
    mode = p[P_MODE]
    be1, be2 = _inplane_field(mode == MODE_FULL_FIXED, A, B, uy, uz, bx, by, bz, c)
    if mode == MODE_RATIO:
        cb = _ratio_cos(p[P_RB0], p[P_RB1], p[P_RB2], c, be1, be2)
        return _lut_lookup(lut, c) / _lut_lookup(lut, cb)
    x, y = _molecular_xy(p[P_COS_PSI], p[P_SIN_PSI], be1, be2)
    return _cube_lookup(cube, x, y, c)


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _signal(vx, vy, vz, R_eye_view, eye_params, b_eye, luts, cubes, pick):
    """Signal for a unit view direction; NaN if no eye sees it.

    ``R_eye_view`` (E, 3, 3) rotates view-frame vectors straight into each eye's frame
    (the head rotation folded in by the caller, so each direction is rotated once).
    """
    acc = 0.0
    cnt = 0
    E = R_eye_view.shape[0]
    for e in range(E):
        if pick >= 0 and e != pick:
            continue
        ux = R_eye_view[e, 0, 0] * vx + R_eye_view[e, 0, 1] * vy + R_eye_view[e, 0, 2] * vz
        # most directions lie wholly outside an eye's widest half-width: reject them
        # before computing the rest of the rotation
        if ux < eye_params[e, P_COS_OUT] and eye_params[e, P_FULL] == 0.0:
            continue
        uy = R_eye_view[e, 1, 0] * vx + R_eye_view[e, 1, 1] * vy + R_eye_view[e, 1, 2] * vz
        uz = R_eye_view[e, 2, 0] * vx + R_eye_view[e, 2, 1] * vy + R_eye_view[e, 2, 2] * vz
        p = eye_params[e]
        if ux < p[P_COS_IN] and not _visible(ux, uy, uz, p):
            continue
        q = p[P_Q]
        e2 = p[P_E2]
        uxc = min(1.0, max(-1.0, ux))
        s2 = 1.0 - uxc * uxc
        if e2 == 1.0:
            B = q * uxc + math.sqrt(1.0 - q * q * s2)
            A = B * uxc - q
        else:
            k = e2 * uxc * uxc + s2
            hb = q * e2 * uxc
            t = (hb + math.sqrt(hb * hb - k * (q * q * e2 - 1.0))) / k
            ax = (t * uxc - q) * e2
            inv = 1.0 / math.sqrt(ax * ax + t * t * s2)
            A = ax * inv
            B = t * inv
        bx = b_eye[e, 0]
        by = b_eye[e, 1]
        bz = b_eye[e, 2]
        c = A * bx + B * (uy * by + uz * bz)
        row = int(p[P_LUT])
        if p[P_MODE] == MODE_AXIAL:
            acc += _lut_row_lookup(luts, row, c)
        else:
            acc += _frame_signal(ux, uy, uz, A, B, bx, by, bz, c, p, luts[row],
                                 cubes[int(p[P_CUBE])])
        cnt += 1
    if cnt == 0:
        return np.nan
    return acc / cnt


@njit(parallel=True, cache=True, fastmath=FASTMATH)
def _pattern_dirs(dirs, R_head_view, R_eye_view, eye_params, b_eye, lut, cubes, pick, out):
    """Signal for explicit unit directions ``dirs`` (N, 3) in the view frame -> ``out`` (N,)."""
    for n in prange(dirs.shape[0]):
        vx = dirs[n, 0]
        vy = dirs[n, 1]
        vz = dirs[n, 2]
        if vx != vx:
            out[n] = np.nan
            continue
        out[n] = _signal(vx, vy, vz, R_eye_view, eye_params, b_eye, lut, cubes, pick)


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _bilinear(scene, x, y, out_px):
    """Bilinear sample at continuous pixel coords (x wraps, y clamps); x, y in pixels
    with pixel j spanning [j, j+1)."""
    H = scene.shape[0]
    W = scene.shape[1]
    C = scene.shape[2]
    xs = x - 0.5
    ys = y - 0.5
    if ys < 0.0:
        ys = 0.0
    if ys > H - 1:
        ys = H - 1.0
    x0f = math.floor(xs)
    fx = xs - x0f
    x0 = int(x0f) % W
    x1 = (x0 + 1) % W
    y0 = int(ys)
    if y0 > H - 2:
        y0 = H - 2 if H > 1 else 0
    fy = ys - y0
    y1 = y0 + 1 if H > 1 else 0
    for c in range(C):
        a = scene[y0, x0, c] * (1.0 - fx) + scene[y0, x1, c] * fx
        b = scene[y1, x0, c] * (1.0 - fx) + scene[y1, x1, c] * fx
        out_px[c] = a * (1.0 - fy) + b * fy


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _modulate(px, s, inv_mean, gain, outside, out_px):
    C = px.shape[0]
    if s != s:
        for c in range(C):
            out_px[c] = px[c] * outside
        return
    k = 1.0 + gain * (s * inv_mean - 1.0)
    for c in range(C):
        v = px[c] * k
        if v < 0.0:
            v = 0.0
        elif v > 1.0:
            v = 1.0
        out_px[c] = v


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _grid_step(dirs, n, m_prev, m_next, has_prev, has_next, t):
    """Direction step of one pixel along a grid axis into ``t`` (3,): the central
    difference of the neighbours ``m_prev``, ``m_next`` (flat indices) where both exist
    and are inside the view's footprint, else one-sided, else 0 (as
    ``grid_tangents_numpy``)."""
    okp = has_prev and dirs[m_prev, 0] == dirs[m_prev, 0]
    okn = has_next and dirs[m_next, 0] == dirs[m_next, 0]
    for k in range(3):
        if okp and okn:
            t[k] = 0.5 * (dirs[m_next, k] - dirs[m_prev, k])
        elif okn:
            t[k] = dirs[m_next, k] - dirs[n, k]
        elif okp:
            t[k] = dirs[n, k] - dirs[m_prev, k]
        else:
            t[k] = 0.0


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _mip_dir_sample(flat, levels, scale, ntaps_max, north_col, SW, SH, dirs, n, GW, Q, tc, tr,
                    px):
    """Footprint-filtered scene value for grid pixel ``n`` (flat index; rows of GW
    pixels) into ``px``: scene coords of its direction and the Jacobian from the
    direction steps to its grid neighbours, rotated into the world frame by ``Q``."""
    N = dirs.shape[0]
    j = n % GW
    _grid_step(dirs, n, n - 1, n + 1, j > 0, j + 1 < GW, tc)
    _grid_step(dirs, n, n - GW, n + GW, n - GW >= 0, n + GW < N, tr)
    vx = dirs[n, 0]
    vy = dirs[n, 1]
    vz = dirs[n, 2]
    wx = Q[0, 0] * vx + Q[0, 1] * vy + Q[0, 2] * vz
    wy = Q[1, 0] * vx + Q[1, 1] * vy + Q[1, 2] * vz
    wz = Q[2, 0] * vx + Q[2, 1] * vy + Q[2, 2] * vz
    ax_ = Q[0, 0] * tc[0] + Q[0, 1] * tc[1] + Q[0, 2] * tc[2]
    ay_ = Q[1, 0] * tc[0] + Q[1, 1] * tc[1] + Q[1, 2] * tc[2]
    az_ = Q[2, 0] * tc[0] + Q[2, 1] * tc[1] + Q[2, 2] * tc[2]
    bx_ = Q[0, 0] * tr[0] + Q[0, 1] * tr[1] + Q[0, 2] * tr[2]
    by_ = Q[1, 0] * tr[0] + Q[1, 1] * tr[1] + Q[1, 2] * tr[2]
    bz_ = Q[2, 0] * tr[0] + Q[2, 1] * tr[1] + Q[2, 2] * tr[2]
    kx = SW / (2.0 * math.pi)
    ky = SH / math.pi
    rho2 = wx * wx + wy * wy
    rho = math.sqrt(rho2)
    inv2 = 1.0 / max(rho2, 1e-300)
    inv = 1.0 / max(rho, 1e-300)
    x = north_col + math.atan2(wy, wx) * kx
    y = (0.5 * math.pi - math.asin(min(1.0, max(-1.0, -wz)))) * ky
    _mip_pixel(flat, levels, scale, px.shape[0], ntaps_max, x, y,
               kx * (wx * ay_ - wy * ax_) * inv2, ky * az_ * inv,
               kx * (wx * by_ - wy * bx_) * inv2, ky * bz_ * inv, px)


@njit(parallel=True, cache=True, fastmath=FASTMATH)
def _composite_dirs(scene, north_col, dirs, R_head_view, R_world_view, R_eye_view, eye_params,
                   b_eye, lut, cubes, pick, inv_mean, gain, outside, out, GW, pyr_flat, pyr_levels,
                   pyr_scale, ntaps_max):
    """Composite for explicit view directions ``dirs`` (N, 3); ``out`` (N, C) float32.

    Rows of ``dirs`` that are NaN (outside a view's footprint) give 0.  With
    ``ntaps_max`` >= 1 the scene is read through its pyramid (``pyr_*``) with the
    footprint filter of :mod:`renderer.kernels.filtering`; ``dirs`` is then a grid of
    rows of ``GW`` pixels, whose neighbours give each pixel's footprint.
    """
    SH = scene.shape[0]
    SW = scene.shape[1]
    C = scene.shape[2]
    Q = R_world_view
    for n in prange(dirs.shape[0]):
        px = np.empty(C, dtype=np.float32)
        pm = np.empty(C)
        tc = np.empty(3)
        tr = np.empty(3)
        vx = dirs[n, 0]
        vy = dirs[n, 1]
        vz = dirs[n, 2]
        if vx != vx:
            for c in range(C):
                out[n, c] = 0.0
            continue
        s = _signal(vx, vy, vz, R_eye_view, eye_params, b_eye, lut, cubes, pick)
        if ntaps_max > 0:
            _mip_dir_sample(pyr_flat, pyr_levels, pyr_scale, ntaps_max, north_col, SW, SH, dirs,
                            n, GW, Q, tc, tr, pm)
            _modulate(pm, s, inv_mean, gain, outside, out[n])
            continue
        wx = Q[0, 0] * vx + Q[0, 1] * vy + Q[0, 2] * vz
        wy = Q[1, 0] * vx + Q[1, 1] * vy + Q[1, 2] * vz
        wz = Q[2, 0] * vx + Q[2, 1] * vy + Q[2, 2] * vz
        az = math.atan2(wy, wx)
        el = math.asin(min(1.0, max(-1.0, -wz)))
        _bilinear(scene, north_col + az * (SW / (2.0 * math.pi)), (0.5 * math.pi - el) * (SH / math.pi),
                  px)
        _modulate(px, s, inv_mean, gain, outside, out[n])


# public entry points: normalise the tables, then call the compiled kernels


def pattern_dirs(dirs, R_head_view, R_eye_head, eye_params, b_eye, lut, pick, out, cubes=None):
    """Signal for explicit unit directions ``dirs`` (N, 3) in the view frame -> ``out`` (N,)."""
    lut, cubes = _tables(eye_params, lut, cubes)
    _pattern_dirs(dirs, R_head_view, _fold(R_eye_head, R_head_view), eye_params, b_eye, lut, cubes,
                  pick, out)


def composite_dirs(scene, north_col, dirs, R_head_view, R_world_view, R_eye_head, eye_params,
                   b_eye, lut, pick, inv_mean, gain, outside, out, cubes=None, pyramid=None,
                   ntaps_max=0, grid_width=None):
    """Composite for explicit view directions ``dirs`` (N, 3); ``out`` (N, C) float32.

    Rows of ``dirs`` that are NaN (outside a view's footprint) give 0.  Given the
    scene's ``pyramid`` and ``ntaps_max`` >= 1, ``dirs`` must be a view's pixel grid
    flattened row by row, rows of ``grid_width`` pixels: each pixel's footprint on the
    scene comes from the directions of its neighbours.
    """
    lut, cubes = _tables(eye_params, lut, cubes)
    pf, pl, ps, nt = pyramid_args(scene, pyramid, ntaps_max)
    GW = 1 if grid_width is None else int(grid_width)
    if nt > 0 and (grid_width is None or dirs.shape[0] % GW):
        raise ValueError(f"the footprint filter needs the grid width of dirs ({dirs.shape[0]} "
                         f"directions, grid_width = {grid_width!r})")
    _composite_dirs(scene, north_col, dirs, R_head_view, R_world_view,
                    _fold(R_eye_head, R_head_view), eye_params,
                    b_eye, lut, cubes, pick, inv_mean, gain, outside, out, GW, pf, pl, ps, nt)
