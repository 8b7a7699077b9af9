"""Scene sampling for equirectangular views in any frame: composite over a resampled scene.

For: views whose pixel grid is not the scene's (head panoramas, rotated world views):
each row's signal comes from the row passes (:mod:`renderer.kernels.rows`), its
sampling coordinates in the 2:1 world-panorama scene from one vectorised loop with a
polynomial atan2, then bilinear samples are modulated into the output row.  Not for:
direction-array views (:func:`renderer.kernels.pixels.composite_dirs` samples those).
"""

from __future__ import annotations

import math

import numpy as np
from numba import get_num_threads, njit, prange

from .filtering import SIMPLE_S1, _mip_pixel, pyramid_args
from .layout import _fold, _tables
from .leaf import FASTMATH
from .rows import (RB_A, RB_ACC, RB_B, RB_C, RB_E1, RB_E2, RB_FRAC, RB_UX, RB_UY, RB_UZ,
                   RB_VAL, ROW_BLOCK, _row_buffers, _row_setup, _row_signal,
                   _shared_group)


#: atan(t) ≈ t·Σ a_k (t²)^k on |t| ≤ tan(π/8) (degree-9 Chebyshev interpolant in t², made
#: for this module); |error| ≤ 1e-15 rad, checked against numpy.arctan2 in tests/kernels.
ATAN2_COEFFS = (1.0000000000000002, -0.3333333333329829, 0.19999999986905082,
                -0.14285713037727155, 0.1111105729264439, -0.09089635745239827,
                0.07674293373806314, -0.06508962196078655, 0.05030301131043289,
                -0.025345761550124208)
_T0, _T1, _T2, _T3, _T4, _T5, _T6, _T7, _T8, _T9 = ATAN2_COEFFS
_TAN_PI_8 = math.sqrt(2.0) - 1.0


@njit(cache=True, inline="always", fastmath=FASTMATH, error_model="numpy")
def _atan2(y, x):
    """atan2 to about 1e-15 rad as selects and a polynomial, so loops calling it vectorise
    (numba's math.atan2 is a scalar libm call).  The ratio min/max of |x|, |y| is reduced
    to |t| ≤ tan(π/8) by atan a = π/4 + atan((a − 1)/(a + 1)), then the octant is
    restored; atan2(0, 0) = 0 as numpy's.  The sign of a zero y is not kept (±π for
    y = −0.0, x < 0 both give +π; these are the same scene column)."""
    ax = abs(x)
    ay = abs(y)
    mx = ax if ax > ay else ay
    mn = ay if ax > ay else ax
    a = mn / (mx if mx > 0.0 else 1.0)
    big = a > _TAN_PI_8
    t = (a - 1.0) / (a + 1.0) if big else a
    s = t * t
    p = _T7 + s * (_T8 + s * _T9)
    r = t * (_T0 + s * (_T1 + s * (_T2 + s * (_T3 + s * (_T4 + s * (_T5 + s * (_T6 + s * p)))))))
    r = r + (0.25 * math.pi if big else 0.0)
    r = 0.5 * math.pi - r if ay > ax else r
    r = math.pi - r if x < 0.0 else r
    return -r if y < 0.0 else r


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _row_scene_coords(ce, vz, caz, saz, Q, north_col, SW, SH, X0, FX, Y0, FY):
    """Bilinear sampling coordinates in a 2:1 world-panorama scene for one row of a view:
    per column the left and top source pixels (as floats, x wrapped into [0, SW), y
    clamped) and the fractions, as ``sample_equirect_numpy`` (the twin) computes them.
    ``Q`` rotates view-frame directions into the world frame.  One vectorised loop."""
    q00, q01, q02 = Q[0, 0], Q[0, 1], Q[0, 2]
    q10, q11, q12 = Q[1, 0], Q[1, 1], Q[1, 2]
    q20, q21, q22 = Q[2, 0], Q[2, 1], Q[2, 2]
    kx = SW / (2.0 * math.pi)
    ky = SH / math.pi
    fw = float(SW)
    ylast = SH - 1.0
    ytop = max(SH - 2.0, 0.0)
    for j in range(caz.shape[0]):
        vx = ce * caz[j]
        vy = ce * saz[j]
        wx = q00 * vx + q01 * vy + q02 * vz
        wy = q10 * vx + q11 * vy + q12 * vz
        wz = q20 * vx + q21 * vy + q22 * vz
        az = _atan2(wy, wx)
        # asin(−wz) of a unit vector, as an angle of the vector: no clipping needed
        el = _atan2(-wz, math.sqrt(wx * wx + wy * wy))
        xs = north_col + az * kx - 0.5
        ys = (0.5 * math.pi - el) * ky - 0.5
        ys = 0.0 if ys < 0.0 else (ylast if ys > ylast else ys)
        x0 = np.floor(xs)
        FX[j] = xs - x0
        X0[j] = x0 - fw * np.floor(x0 / fw)
        y0 = np.floor(ys)
        y0 = ytop if y0 > ytop else y0
        Y0[j] = y0
        FY[j] = ys - y0


@njit(cache=True, inline="always", fastmath=FASTMATH, error_model="numpy")
def _bilinear_corners(X0, FX, Y0, FY, j, SW, SH, C):
    """Flat offsets of the four source pixels of column ``j``'s bilinear read (coordinates
    of :func:`_row_scene_coords`, x wrapping, y clamped) in a (SH·SW·C,) scene, and its
    fractions (fx, fy).  Inlined into the scalar read loops."""
    rowlen = SW * C
    x0 = int(X0[j])
    x1 = x0 + 1
    x1 = 0 if x1 >= SW else x1
    y0 = int(Y0[j])
    y1 = y0 + 1
    y1 = SH - 1 if y1 > SH - 1 else y1
    return (y0 * rowlen + x0 * C, y0 * rowlen + x1 * C, y1 * rowlen + x0 * C,
            y1 * rowlen + x1 * C, FX[j], FY[j])


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _row_sample_modulate(flat, SW, SH, C, X0, FX, Y0, FY, sig, inv_mean, gain, outside,
                         out_row):
    """Bilinear samples of the scene (``flat``: its (SH·SW·C,) flattened pixels) at the
    coordinates of :func:`_row_scene_coords`, modulated as ``_modulate`` does, into one
    flattened (W·C,) output row.  Scalar (the reads), with flat offsets (a little
    faster here than three-index reads)."""
    for j in range(sig.shape[0]):
        o00, o01, o10, o11, fx, fy = _bilinear_corners(X0, FX, Y0, FY, j, SW, SH, C)
        gx = 1.0 - fx
        gy = 1.0 - fy
        s = sig[j]
        seen = s == s
        k = 1.0 + gain * (s * inv_mean - 1.0) if seen else outside
        for c in range(C):
            a = flat[o00 + c] * gx + flat[o01 + c] * fx
            b = flat[o10 + c] * gx + flat[o11 + c] * fx
            v = (a * gy + b * fy) * k
            v = (0.0 if v < 0.0 else (1.0 if v > 1.0 else v)) if seen else v
            out_row[j * C + c] = v


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _row_sample_modulate3(flat, SW, SH, X0, FX, Y0, FY, sig, inv_mean, gain, outside,
                          out_row):
    """:func:`_row_sample_modulate` for three channels, unrolled, with the modulation
    folded into the four bilinear weights (about a third faster here)."""
    for j in range(sig.shape[0]):
        o00, o01, o10, o11, fx, fy = _bilinear_corners(X0, FX, Y0, FY, j, SW, SH, 3)
        gx = 1.0 - fx
        gy = 1.0 - fy
        s = sig[j]
        seen = s == s
        k = 1.0 + gain * (s * inv_mean - 1.0) if seen else outside
        w00 = gx * gy * k
        w01 = fx * gy * k
        w10 = gx * fy * k
        w11 = fx * fy * k
        v0 = flat[o00] * w00 + flat[o01] * w01 + flat[o10] * w10 + flat[o11] * w11
        v1 = (flat[o00 + 1] * w00 + flat[o01 + 1] * w01 + flat[o10 + 1] * w10
              + flat[o11 + 1] * w11)
        v2 = (flat[o00 + 2] * w00 + flat[o01 + 2] * w01 + flat[o10 + 2] * w10
              + flat[o11 + 2] * w11)
        c0 = 0.0 if v0 < 0.0 else (1.0 if v0 > 1.0 else v0)
        c1 = 0.0 if v1 < 0.0 else (1.0 if v1 > 1.0 else v1)
        c2 = 0.0 if v2 < 0.0 else (1.0 if v2 > 1.0 else v2)
        out_row[3 * j] = c0 if seen else v0
        out_row[3 * j + 1] = c1 if seen else v1
        out_row[3 * j + 2] = c2 if seen else v2


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _row_scene_jacobian(ce, se, caz, saz, Q, north_col, SW, SH, dcol, drow, X, Y, AX, AY,
                        BX, BY):
    """Level-0 continuous scene coords (X, Y, unwrapped) of one row of an
    equirectangular view and the Jacobian's columns (AX, AY: one pixel step right; BX,
    BY: one step down), in scene texels, as ``scene_jacobian_numpy`` computes them.

    The view direction v = (ce·cos az, ce·sin az, −se) changes by
    dcol·(−ce·sin az, ce·cos az, 0) per column and drow·(se·cos az, se·sin az, ce) per
    row (dcol = 2π/W, drow = π/H); both steps are rotated with v into the world frame
    (w = Q v), where azimuth atan2(w_y, w_x) and elevation asin(−w_z) change by
    (w_x dw_y − w_y dw_x)/ρ² and −dw_z/ρ, ρ² = w_x² + w_y²: near the scene's poles the
    column step grows as 1/ρ, the longitude compression.  One vectorised loop."""
    q00, q01, q02 = Q[0, 0], Q[0, 1], Q[0, 2]
    q10, q11, q12 = Q[1, 0], Q[1, 1], Q[1, 2]
    q20, q21, q22 = Q[2, 0], Q[2, 1], Q[2, 2]
    kx = SW / (2.0 * math.pi)
    ky = SH / math.pi
    vz = -se
    for j in range(caz.shape[0]):
        c = caz[j]
        s = saz[j]
        vx = ce * c
        vy = ce * s
        wx = q00 * vx + q01 * vy + q02 * vz
        wy = q10 * vx + q11 * vy + q12 * vz
        wz = q20 * vx + q21 * vy + q22 * vz
        # column step (−ce s, ce c, 0)·dcol and row step (se c, se s, ce)·drow
        ux = -ce * s * dcol
        uy = ce * c * dcol
        tx = q00 * ux + q01 * uy
        ty = q10 * ux + q11 * uy
        tz = q20 * ux + q21 * uy
        rx = se * c * drow
        ry = se * s * drow
        rz = ce * drow
        sx = q00 * rx + q01 * ry + q02 * rz
        sy = q10 * rx + q11 * ry + q12 * rz
        sz = q20 * rx + q21 * ry + q22 * rz
        rho2 = wx * wx + wy * wy
        rho = math.sqrt(rho2)
        inv2 = 1.0 / (rho2 if rho2 > 1e-300 else 1e-300)
        inv = 1.0 / (rho if rho > 1e-300 else 1e-300)
        az = _atan2(wy, wx)
        el = _atan2(-wz, rho)
        X[j] = north_col + az * kx
        Y[j] = (0.5 * math.pi - el) * ky
        AX[j] = kx * (wx * ty - wy * tx) * inv2
        AY[j] = ky * tz * inv
        BX[j] = kx * (wx * sy - wy * sx) * inv2
        BY[j] = ky * sz * inv


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _row_footprint_split(SW, SH, X, Y, AX, AY, BX, BY, X0, FX, Y0, FY, SIMPLE):
    """Which pixels of a row are one level-0 bilinear read under the filter (footprint
    major axis at most SIMPLE_S1 texels: the scene magnified or at its own scale),
    and for those the bilinear coordinates as :func:`_row_scene_coords` gives them.
    One vectorised loop; the rest go through ``filtering._mip_pixel``."""
    fw = float(SW)
    ylast = SH - 1.0
    ytop = max(SH - 2.0, 0.0)
    lim = SIMPLE_S1 * SIMPLE_S1
    for j in range(X.shape[0]):
        ax = AX[j]
        ay = AY[j]
        bx = BX[j]
        by = BY[j]
        p = ax * ax + bx * bx
        r = ay * ay + by * by
        q = ax * ay + bx * by
        d = 0.5 * (p - r)
        s1sq = 0.5 * (p + r) + math.sqrt(d * d + q * q)
        SIMPLE[j] = 1.0 if s1sq <= lim else 0.0
        xs = X[j] - 0.5
        ys = Y[j] - 0.5
        ys = 0.0 if ys < 0.0 else (ylast if ys > ylast else ys)
        x0 = np.floor(xs)
        FX[j] = xs - x0
        X0[j] = x0 - fw * np.floor(x0 / fw)
        y0 = np.floor(ys)
        y0 = ytop if y0 > ytop else y0
        Y0[j] = y0
        FY[j] = ys - y0


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _row_mip_modulate(flat, levels, scale, C, ntaps_max, X, Y, AX, AY, BX, BY, X0, FX, Y0,
                      FY, SIMPLE, sig, inv_mean, gain, outside, acc, out_row):
    """Footprint-filtered samples (:func:`renderer.kernels.filtering._mip_pixel`) at the
    coordinates of :func:`_row_scene_jacobian`, modulated as ``_modulate`` does, into one
    flattened (W·C,) output row; pixels :func:`_row_footprint_split` marks simple are
    read as the plain bilinear path reads them (the same value ``_mip_pixel`` gives
    them, without its footprint arithmetic).  Scalar (the reads)."""
    SH = levels[0, 1]
    SW = levels[0, 2]
    for j in range(sig.shape[0]):
        if SIMPLE[j] != 0.0:
            o00, o01, o10, o11, fx, fy = _bilinear_corners(X0, FX, Y0, FY, j, SW, SH, C)
            w00 = (1.0 - fx) * (1.0 - fy)
            w01 = fx * (1.0 - fy)
            w10 = (1.0 - fx) * fy
            w11 = fx * fy
            for c in range(C):
                acc[c] = (flat[o00 + c] * w00 + flat[o01 + c] * w01 + flat[o10 + c] * w10
                          + flat[o11 + c] * w11)
        else:
            _mip_pixel(flat, levels, scale, C, ntaps_max, X[j], Y[j], AX[j], AY[j], BX[j],
                       BY[j], acc)
        s = sig[j]
        seen = s == s
        k = 1.0 + gain * (s * inv_mean - 1.0) if seen else outside
        for c in range(C):
            v = acc[c] * k
            v = (0.0 if v < 0.0 else (1.0 if v > 1.0 else v)) if seen else v
            out_row[j * C + c] = v


@njit(parallel=True, cache=True, fastmath=FASTMATH)
def _composite_resampled(scene, north_col, cos_el, sin_el, cos_az, sin_az, R_head_view,
                         R_world_view, R_eye_view, eye_params, b_eye, shared, bv, lut, cubes,
                         pick, inv_mean, gain, outside, out, nthreads, pyr_flat, pyr_levels,
                         pyr_scale, ntaps_max):
    """Composite an equirectangular view (any frame) over a resampled scene.

    The scene is a 2:1 world panorama with geographic north at continuous column
    ``north_col``; each output pixel's direction is rotated into the world frame by
    ``R_world_view`` and the scene sampled bilinearly (``ntaps_max`` = 0) or through
    its pyramid (``pyr_*``, :mod:`renderer.kernels.filtering`) with up to ``ntaps_max``
    taps.  The signal comes from the row passes of the world composite, the sampling
    coordinates from one vectorised loop per row (:func:`_row_scene_coords`,
    :func:`_row_scene_jacobian`); ``out`` must be C-contiguous.
    """
    H = cos_el.shape[0]
    W = cos_az.shape[0]
    SH = scene.shape[0]
    SW = scene.shape[1]
    C = scene.shape[2]
    E = R_eye_view.shape[0]
    Q = R_world_view
    flat = scene.reshape(-1)
    bnd, kcs, active, fast, srow, pairs, order = _row_setup(H, cos_az, sin_az, eye_params,
                                                            shared, lut, pick, nthreads)
    for blk in prange(order.shape[0]):
        rb, ib, dec, kinds = _row_buffers(E, W, bnd.shape[1])
        sig = np.empty(W)
        acc = np.empty(C)
        r0 = order[blk] * ROW_BLOCK
        for i in range(r0, min(H, r0 + ROW_BLOCK)):
            ce = cos_el[i]
            vz = -sin_el[i]
            _row_signal(ce, vz, cos_az, sin_az, bnd, R_eye_view, eye_params, kcs, b_eye,
                        active, fast, bv, srow, pairs, cubes, rb, ib, dec, kinds, sig)
            # the row buffers are free again: they take the sampling coordinates
            if ntaps_max > 0:
                _row_scene_jacobian(ce, sin_el[i], cos_az, sin_az, Q, north_col, SW, SH,
                                    2.0 * math.pi / W, math.pi / H, rb[RB_UX], rb[RB_UY],
                                    rb[RB_UZ], rb[RB_A], rb[RB_B], rb[RB_C])
                _row_footprint_split(SW, SH, rb[RB_UX], rb[RB_UY], rb[RB_UZ], rb[RB_A],
                                     rb[RB_B], rb[RB_C], rb[RB_E1], rb[RB_E2], rb[RB_VAL],
                                     rb[RB_FRAC], rb[RB_ACC])
                _row_mip_modulate(pyr_flat, pyr_levels, pyr_scale, C, ntaps_max, rb[RB_UX],
                                  rb[RB_UY], rb[RB_UZ], rb[RB_A], rb[RB_B], rb[RB_C], rb[RB_E1],
                                  rb[RB_E2], rb[RB_VAL], rb[RB_FRAC], rb[RB_ACC], sig,
                                  inv_mean, gain, outside, acc, out[i].reshape(-1))
                continue
            _row_scene_coords(ce, vz, cos_az, sin_az, Q, north_col, SW, SH, rb[RB_UX],
                              rb[RB_UY], rb[RB_UZ], rb[RB_A])
            if C == 3:
                _row_sample_modulate3(flat, SW, SH, rb[RB_UX], rb[RB_UY], rb[RB_UZ], rb[RB_A],
                                      sig, inv_mean, gain, outside, out[i].reshape(-1))
            else:
                _row_sample_modulate(flat, SW, SH, C, rb[RB_UX], rb[RB_UY], rb[RB_UZ],
                                     rb[RB_A], sig, inv_mean, gain, outside,
                                     out[i].reshape(-1))


def composite_resampled(scene, north_col, cos_el, sin_el, cos_az, sin_az, R_head_view,
                        R_world_view, R_eye_head, eye_params, b_eye, lut, pick, inv_mean, gain,
                        outside, out, cubes=None, pyramid=None, ntaps_max=0):
    """Composite an equirectangular view (any frame) over a resampled scene.

    The scene is a 2:1 world panorama with geographic north at continuous column
    ``north_col``; each output pixel's direction is rotated into the world frame by
    ``R_world_view`` and the scene sampled bilinearly, or, given the scene's
    ``pyramid`` (:func:`renderer.kernels.filtering.build_pyramid`) and ``ntaps_max``
    >= 1, by the footprint filter of :mod:`renderer.kernels.filtering`.
    """
    lut, cubes = _tables(eye_params, lut, cubes)
    R_eye_view = _fold(R_eye_head, R_head_view)
    shared, bv = _shared_group(R_eye_view, eye_params, b_eye)
    # the kernel reads and writes flat arrays, which needs C-contiguous images
    scene = np.ascontiguousarray(scene)
    dest = out if out.flags.c_contiguous else np.empty(out.shape, out.dtype)
    pf, pl, ps, nt = pyramid_args(scene, pyramid, ntaps_max)
    _composite_resampled(scene, north_col, cos_el, sin_el, cos_az, sin_az, R_head_view,
                         R_world_view, R_eye_view, eye_params, b_eye, shared, bv, lut, cubes,
                         pick, inv_mean, gain, outside, dest, get_num_threads(), pf, pl, ps, nt)
    if dest is not out:
        out[...] = dest
