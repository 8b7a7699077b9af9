"""Per-pixel kernels: view direction → eye → receptor axis → response → modulation,
and the scene lookup.  numba (``parallel=True, cache=True``) with a plain NumPy twin.

Everything here takes plain arrays.  Geometry is packed by :func:`pack_eyes`:

* ``R_eye_head`` (E, 3, 3): v_eye = R_eye_head[e] @ v_head.
* ``eye_params`` (E, 8): d/R, nasal, temporal, dorsal, ventral half-widths (rad),
  nasal sign (+1 if the nose is towards the eye's +y), full-sphere flag, unused.
* ``b_eye`` (E, 3): the unit field in each eye's frame for this shot.
* ``lut`` (L,): the receptor signal on ``linspace(-1, 1, L)`` of cos θ, linearly
  interpolated.
* ``pick``: −1 averages the eyes that see a direction; k ≥ 0 shows eye k only.

Equirectangular views are described by per-row and per-column cos/sin tables, so
the kernels never read a per-pixel direction array (the memory traffic is the
scene in and the image out).  The NumPy twins compute the same maths on explicit
direction arrays and are the reference in the tests and the baseline in ``bench/``.
This module knows nothing of poses, fields or files.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

PARAMS = 8


def pack_eyes(layout):
    """Pack a :class:`renderer.eye.Layout` into (R_eye_head (E,3,3), eye_params (E,8))."""
    E = len(layout.eyes)
    R = np.empty((E, 3, 3))
    P = np.zeros((E, PARAMS))
    for k, eye in enumerate(layout.eyes):
        R[k] = eye.R_head_eye.T
        hw = eye.half_widths_rad
        P[k, 0] = eye.nodal_ratio
        P[k, 1:5] = hw
        P[k, 5] = eye.nasal_sign
        P[k, 6] = 1.0 if hw.min() >= math.pi - 1e-12 else 0.0
    return np.ascontiguousarray(R), P


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


# ---------------------------------------------------------------------------
# numba kernels
# ---------------------------------------------------------------------------

@njit(cache=True, inline="always")
def _lut_lookup(lut, c):
    n1 = lut.shape[0] - 1
    x = (c + 1.0) * 0.5 * n1
    if x <= 0.0:
        return lut[0]
    if x >= n1:
        return lut[n1]
    i = int(x)
    f = x - i
    return lut[i] + f * (lut[i + 1] - lut[i])


@njit(cache=True, inline="always")
def _signal(hx, hy, hz, R_eye_head, eye_params, b_eye, lut, pick):
    """Signal for a head-frame unit direction; NaN if no eye sees it."""
    acc = 0.0
    cnt = 0
    E = R_eye_head.shape[0]
    for e in range(E):
        if pick >= 0 and e != pick:
            continue
        R = R_eye_head[e]
        ux = R[0, 0] * hx + R[0, 1] * hy + R[0, 2] * hz
        uy = R[1, 0] * hx + R[1, 1] * hy + R[1, 2] * hz
        uz = R[2, 0] * hx + R[2, 1] * hy + R[2, 2] * hz
        p = eye_params[e]
        if p[6] == 0.0:
            h = p[5] * uy
            v = -uz
            s2 = h * h + v * v
            if s2 == 0.0:
                if ux <= 0.0:
                    continue
            else:
                wh = p[1] if h >= 0.0 else p[2]
                wv = p[3] if v >= 0.0 else p[4]
                alpha = math.atan2(math.sqrt(s2), ux)
                if (h * h / (wh * wh) + v * v / (wv * wv)) * alpha * alpha > s2:
                    continue
        q = p[0]
        uxc = min(1.0, max(-1.0, ux))
        t = q * uxc + math.sqrt(1.0 - q * q * (1.0 - uxc * uxc))
        bx = b_eye[e, 0]
        c = t * (ux * bx + uy * b_eye[e, 1] + uz * b_eye[e, 2]) - q * bx
        acc += _lut_lookup(lut, c)
        cnt += 1
    if cnt == 0:
        return np.nan
    return acc / cnt


@njit(parallel=True, cache=True)
def pattern_equirect(cos_el, sin_el, cos_az, sin_az, R_head_view, R_eye_head, eye_params,
                     b_eye, lut, pick, out):
    """Signal on an equirectangular grid whose directions are in the view frame.

    ``out`` (H, W) float64 is filled; NaN where no eye sees.
    """
    H = cos_el.shape[0]
    W = cos_az.shape[0]
    M = R_head_view
    for i in prange(H):
        ce = cos_el[i]
        vz = -sin_el[i]
        for j in range(W):
            vx = ce * cos_az[j]
            vy = ce * sin_az[j]
            hx = M[0, 0] * vx + M[0, 1] * vy + M[0, 2] * vz
            hy = M[1, 0] * vx + M[1, 1] * vy + M[1, 2] * vz
            hz = M[2, 0] * vx + M[2, 1] * vy + M[2, 2] * vz
            out[i, j] = _signal(hx, hy, hz, R_eye_head, eye_params, b_eye, lut, pick)


@njit(parallel=True, cache=True)
def pattern_dirs(dirs, R_head_view, R_eye_head, eye_params, b_eye, lut, pick, out):
    """Signal for explicit unit directions ``dirs`` (N, 3) in the view frame -> ``out`` (N,)."""
    M = R_head_view
    for n in prange(dirs.shape[0]):
        vx = dirs[n, 0]
        vy = dirs[n, 1]
        vz = dirs[n, 2]
        if vx != vx:
            out[n] = np.nan
            continue
        hx = M[0, 0] * vx + M[0, 1] * vy + M[0, 2] * vz
        hy = M[1, 0] * vx + M[1, 1] * vy + M[1, 2] * vz
        hz = M[2, 0] * vx + M[2, 1] * vy + M[2, 2] * vz
        out[n] = _signal(hx, hy, hz, R_eye_head, eye_params, b_eye, lut, pick)


@njit(cache=True, inline="always")
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


@njit(cache=True, inline="always")
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


@njit(parallel=True, cache=True)
def composite_world_aligned(scene, cos_el, sin_el, cos_az, sin_az, R_head_view, R_eye_head,
                            eye_params, b_eye, lut, pick, inv_mean, gain, outside, out):
    """Composite a world panorama whose pixel grid coincides with the scene's.

    ``scene`` and ``out`` (H, W, C) float32 linear light.  Modulation
    m = gain·(s/mean − 1) multiplies every channel (luminance, chromaticity kept);
    unseen pixels are multiplied by ``outside``.
    """
    H = cos_el.shape[0]
    W = cos_az.shape[0]
    M = R_head_view
    for i in prange(H):
        ce = cos_el[i]
        vz = -sin_el[i]
        for j in range(W):
            vx = ce * cos_az[j]
            vy = ce * sin_az[j]
            hx = M[0, 0] * vx + M[0, 1] * vy + M[0, 2] * vz
            hy = M[1, 0] * vx + M[1, 1] * vy + M[1, 2] * vz
            hz = M[2, 0] * vx + M[2, 1] * vy + M[2, 2] * vz
            s = _signal(hx, hy, hz, R_eye_head, eye_params, b_eye, lut, pick)
            _modulate(scene[i, j], s, inv_mean, gain, outside, out[i, j])


@njit(parallel=True, cache=True)
def composite_resampled(scene, north_col, cos_el, sin_el, cos_az, sin_az, R_head_view,
                        R_world_view, R_eye_head, eye_params, b_eye, lut, pick, inv_mean, gain,
                        outside, out):
    """Composite an equirectangular view (any frame) over a resampled scene.

    The scene is a 2:1 world panorama with geographic north at continuous column
    ``north_col``; each output pixel's direction is rotated into the world frame by
    ``R_world_view`` and the scene sampled bilinearly.
    """
    H = cos_el.shape[0]
    W = cos_az.shape[0]
    SH = scene.shape[0]
    SW = scene.shape[1]
    C = scene.shape[2]
    M = R_head_view
    Q = R_world_view
    for i in prange(H):
        px = np.empty(C, dtype=np.float32)
        ce = cos_el[i]
        vz = -sin_el[i]
        for j in range(W):
            vx = ce * cos_az[j]
            vy = ce * sin_az[j]
            wx = Q[0, 0] * vx + Q[0, 1] * vy + Q[0, 2] * vz
            wy = Q[1, 0] * vx + Q[1, 1] * vy + Q[1, 2] * vz
            wz = Q[2, 0] * vx + Q[2, 1] * vy + Q[2, 2] * vz
            az = math.atan2(wy, wx)
            el = math.asin(min(1.0, max(-1.0, -wz)))
            x = north_col + az * (SW / (2.0 * math.pi))
            y = (0.5 * math.pi - el) * (SH / math.pi)
            _bilinear(scene, x, y, px)
            hx = M[0, 0] * vx + M[0, 1] * vy + M[0, 2] * vz
            hy = M[1, 0] * vx + M[1, 1] * vy + M[1, 2] * vz
            hz = M[2, 0] * vx + M[2, 1] * vy + M[2, 2] * vz
            s = _signal(hx, hy, hz, R_eye_head, eye_params, b_eye, lut, pick)
            _modulate(px, s, inv_mean, gain, outside, out[i, j])


@njit(parallel=True, cache=True)
def composite_dirs(scene, north_col, dirs, R_head_view, R_world_view, R_eye_head, eye_params,
                   b_eye, lut, pick, inv_mean, gain, outside, out):
    """Composite for explicit view directions ``dirs`` (N, 3); ``out`` (N, C) float32.

    Rows of ``dirs`` that are NaN (outside a view's footprint) give 0.
    """
    SH = scene.shape[0]
    SW = scene.shape[1]
    C = scene.shape[2]
    M = R_head_view
    Q = R_world_view
    for n in prange(dirs.shape[0]):
        px = np.empty(C, dtype=np.float32)
        vx = dirs[n, 0]
        vy = dirs[n, 1]
        vz = dirs[n, 2]
        if vx != vx:
            for c in range(C):
                out[n, c] = 0.0
            continue
        wx = Q[0, 0] * vx + Q[0, 1] * vy + Q[0, 2] * vz
        wy = Q[1, 0] * vx + Q[1, 1] * vy + Q[1, 2] * vz
        wz = Q[2, 0] * vx + Q[2, 1] * vy + Q[2, 2] * vz
        az = math.atan2(wy, wx)
        el = math.asin(min(1.0, max(-1.0, -wz)))
        _bilinear(scene, north_col + az * (SW / (2.0 * math.pi)), (0.5 * math.pi - el) * (SH / math.pi), px)
        hx = M[0, 0] * vx + M[0, 1] * vy + M[0, 2] * vz
        hy = M[1, 0] * vx + M[1, 1] * vy + M[1, 2] * vz
        hz = M[2, 0] * vx + M[2, 1] * vy + M[2, 2] * vz
        s = _signal(hx, hy, hz, R_eye_head, eye_params, b_eye, lut, pick)
        _modulate(px, s, inv_mean, gain, outside, out[n])


# ---------------------------------------------------------------------------
# NumPy twins (reference and baseline)
# ---------------------------------------------------------------------------

def equirect_dirs(cos_el, sin_el, cos_az, sin_az) -> np.ndarray:
    """Explicit (H*W, 3) view-frame directions of an equirectangular grid."""
    ce = cos_el[:, None]
    d = np.stack(np.broadcast_arrays(ce * cos_az[None, :], ce * sin_az[None, :],
                                     -sin_el[:, None] + 0.0 * cos_az[None, :]), axis=-1)
    return d.reshape(-1, 3)


def lut_lookup_numpy(lut, c):
    n1 = lut.shape[0] - 1
    x = np.clip((np.asarray(c) + 1.0) * 0.5 * n1, 0.0, float(n1))
    i = np.minimum(x.astype(np.int64), n1 - 1)
    f = x - i
    return lut[i] + f * (lut[i + 1] - lut[i])


def signal_numpy(dirs_head, R_eye_head, eye_params, b_eye, lut, pick=-1):
    """NumPy twin of the per-direction signal: (N, 3) head-frame unit dirs -> (N,)."""
    from .eye.eye import _visible_numpy

    d = np.asarray(dirs_head, dtype=np.float64)
    acc = np.zeros(d.shape[0])
    cnt = np.zeros(d.shape[0])
    for e in range(R_eye_head.shape[0]):
        if pick >= 0 and e != pick:
            continue
        u = d @ R_eye_head[e].T
        p = eye_params[e]
        vis = _visible_numpy(u, p[1:5], p[5]) if p[6] == 0.0 else np.ones(d.shape[0], bool)
        q = p[0]
        ux = np.clip(u[:, 0], -1.0, 1.0)
        t = q * ux + np.sqrt(1.0 - q * q * (1.0 - ux * ux))
        c = t * (u @ b_eye[e]) - q * b_eye[e, 0]
        val = lut_lookup_numpy(lut, c)
        acc += np.where(vis, val, 0.0)
        cnt += vis
    with np.errstate(invalid="ignore"):
        return np.where(cnt > 0, acc / np.maximum(cnt, 1), np.nan)


def pattern_numpy(dirs_view, R_head_view, R_eye_head, eye_params, b_eye, lut, pick=-1):
    """NumPy twin of :func:`pattern_dirs`."""
    d = np.asarray(dirs_view, dtype=np.float64)
    return signal_numpy(d @ np.asarray(R_head_view).T, R_eye_head, eye_params, b_eye, lut, pick)


def sample_equirect_numpy(scene, north_col, dirs_world):
    """Bilinear lookup of a 2:1 world panorama at world directions (N, 3) -> (N, C)."""
    SH, SW = scene.shape[:2]
    d = np.asarray(dirs_world, dtype=np.float64)
    az = np.arctan2(d[:, 1], d[:, 0])
    el = np.arcsin(np.clip(-d[:, 2], -1.0, 1.0))
    xs = north_col + az * (SW / (2 * np.pi)) - 0.5
    ys = np.clip((0.5 * np.pi - el) * (SH / np.pi) - 0.5, 0.0, SH - 1.0)
    x0f = np.floor(xs)
    fx = (xs - x0f)[:, None]
    x0 = x0f.astype(np.int64) % SW
    x1 = (x0 + 1) % SW
    y0 = np.minimum(ys.astype(np.int64), max(SH - 2, 0))
    fy = (ys - y0)[:, None]
    y1 = np.minimum(y0 + 1, SH - 1)
    s = scene.astype(np.float64)
    top = s[y0, x0] * (1 - fx) + s[y0, x1] * fx
    bot = s[y1, x0] * (1 - fx) + s[y1, x1] * fx
    return top * (1 - fy) + bot * fy


def modulate_numpy(px, s, inv_mean, gain, outside):
    """NumPy twin of the modulation step: px (N, C), s (N,) -> (N, C)."""
    k = 1.0 + gain * (s * inv_mean - 1.0)
    seen = ~np.isnan(s)
    out = np.where(seen[:, None], np.clip(px * k[:, None], 0.0, 1.0), px * outside)
    return out
