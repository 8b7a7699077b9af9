"""Per-pixel kernels: view direction → eye → receptor frame → response → modulation,
and the scene lookup.  numba (``parallel=True, cache=True``) with a plain NumPy twin.

Everything here takes plain arrays.  Geometry is packed by :func:`pack_eyes`:

* ``R_eye_head`` (E, 3, 3): v_eye = R_eye_head[e] @ v_head.
* ``eye_params`` (E, PARAMS), slots named by the ``P_*`` constants: the base-axis
  geometry (q = d/R and e2 = (R/a)², with q = 0, e2 = 1 for the chief ray), the four
  half-widths (rad), nasal sign, full-sphere flag, cos of the smallest and largest
  half-width (fast visibility), the alignment's kernel mode, its response-table row
  and cube index, and the mode's constants (ratio population B, in-plane angle ψ).
* ``b_eye`` (E, 3): the unit field in each eye's frame for this shot.
* ``lut`` (L,) or (K, L): receptor signal tables on ``linspace(-1, 1, L)`` of cos θ,
  linearly interpolated; eye e reads row ``eye_params[e, P_LUT]``.
* ``cubes`` (C, 6, n, n): full-frame response tables on a cube map (see
  :func:`cube_table`), only for full-frame modes.
* ``pick``: −1 averages the eyes that see a direction; k ≥ 0 shows eye k only.

Per eye and pixel the base receptor axis is A·x̂ + B·u⊥ (u the eye-frame view
direction, see :mod:`renderer.eye.optics`) and, where a mode needs it, the receptor's
in-plane frame follows the meridian (e1, away from the posterior pole) and the
parallel (e2).  Modes: axial (one table lookup: normal, chief ray, tilt, disorder and
random in-plane angle, whose averages are in the table), ratio of two populations,
full-frame with the in-plane reference on the meridian or fixed to the eye's dorsal
direction.  Equirectangular views are described by per-row and per-column cos/sin
tables, so the kernels never read a per-pixel direction array.  The NumPy twins
compute the same maths on explicit direction arrays and are the reference in the
tests and the baseline in ``bench/``.  This module knows nothing of poses, fields
or files.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

#: LLVM fast-math flags safe for this module: no 'nnan'/'ninf', because NaN marks unseen
#: pixels and is tested for; no "afn" either, so atan2 and sqrt stay exact (the visibility
#: test relies on that).  Contraction to FMA and reciprocals only.
FASTMATH = {"contract", "arcp", "nsz"}

PARAMS = 20
P_Q, P_NASAL, P_TEMPORAL, P_DORSAL, P_VENTRAL, P_SIGN, P_FULL, P_E2 = range(8)
P_MODE, P_LUT, P_CUBE = 8, 9, 10
P_RB0, P_RB1, P_RB2 = 11, 12, 13       # ratio: population B axis = RB0·a + RB1·e1 + RB2·e2
P_COS_PSI, P_SIN_PSI = 14, 15          # full frame: molecular x = cos ψ·e1 + sin ψ·e2
P_COS_IN, P_COS_OUT = 16, 17           # cos(smallest), cos(largest) half-width

MODE_AXIAL, MODE_RATIO, MODE_FULL_MERIDIAN, MODE_FULL_FIXED = 0, 1, 2, 3

_NO_CUBES = np.zeros((1, 6, 2, 2))


def pack_eyes(layout, lut_rows=None, cube_rows=None):
    """Pack a :class:`renderer.eye.Layout` into (R_eye_head (E,3,3), eye_params (E,PARAMS)).

    Parameters
    ----------
    layout : Layout
    lut_rows, cube_rows : sequence of int, optional
        Per eye, the row of the response-table stack and the cube index it reads
        (default 0 for every eye: one shared table).
    """
    E = len(layout.eyes)
    R = np.empty((E, 3, 3))
    P = np.zeros((E, PARAMS))
    for k, eye in enumerate(layout.eyes):
        R[k] = eye.R_head_eye.T
        hw = eye.half_widths_rad
        q, e2 = eye.axis_geometry
        P[k, P_Q] = q
        P[k, P_NASAL:P_VENTRAL + 1] = hw
        P[k, P_SIGN] = eye.nasal_sign
        P[k, P_FULL] = 1.0 if hw.min() >= math.pi - 1e-12 else 0.0
        P[k, P_E2] = e2
        P[k, P_COS_IN] = math.cos(hw.min())
        P[k, P_COS_OUT] = math.cos(hw.max())
        al = eye.alignment
        P[k, P_MODE] = al.mode
        P[k, P_COS_PSI] = 1.0
        for slot, value in al.kernel_slots().items():
            P[k, slot] = value
        P[k, P_LUT] = 0 if lut_rows is None else lut_rows[k]
        P[k, P_CUBE] = 0 if cube_rows is None else cube_rows[k]
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
    from scipy.interpolate import RectBivariateSpline

    gc = np.linspace(-1.0, 1.0, m)
    gf = np.linspace(-1.0, 1.0, n)
    out = np.empty((6, n, n))
    for f in range(6):
        out[f] = RectBivariateSpline(gc, gc, coarse[f], kx=3, ky=3, s=0)(gf, gf)
    return out


# ---------------------------------------------------------------------------
# numba kernels
# ---------------------------------------------------------------------------

@njit(cache=True, inline="always", fastmath=FASTMATH)
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


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _lut_row_lookup(luts, row, c):
    """_lut_lookup on row ``row`` of a (K, L) table stack, without making a view."""
    n1 = luts.shape[1] - 1
    x = (c + 1.0) * 0.5 * n1
    if x <= 0.0:
        return luts[row, 0]
    if x >= n1:
        return luts[row, n1]
    i = int(x)
    f = x - i
    return luts[row, i] + f * (luts[row, i + 1] - luts[row, i])


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _cube_lookup(cube, x, y, z):
    ax = abs(x)
    ay = abs(y)
    az = abs(z)
    if ax >= ay and ax >= az:
        f = 0 if x > 0.0 else 1
        inv = 1.0 / ax
        u = y
        v = z
    elif ay >= az:
        f = 2 if y > 0.0 else 3
        inv = 1.0 / ay
        u = x
        v = z
    else:
        f = 4 if z > 0.0 else 5
        inv = 1.0 / az
        u = x
        v = y
    h = 0.5 * (cube.shape[2] - 1)
    n2 = cube.shape[2] - 2
    xu = (u * inv + 1.0) * h
    xv = (v * inv + 1.0) * h
    i = min(max(int(xu), 0), n2)
    j = min(max(int(xv), 0), n2)
    fu = xu - i
    fv = xv - j
    t = cube[f, i, j] + fv * (cube[f, i, j + 1] - cube[f, i, j])
    b = cube[f, i + 1, j] + fv * (cube[f, i + 1, j + 1] - cube[f, i + 1, j])
    return t + fu * (b - t)


#: Odd polynomial atan(x) ≈ x·Σ c_k x^{2k} on [−1, 1] (weighted least-squares fit made for
#: this module); |error| ≤ 3.8e-8 rad, checked on a dense grid in tests/kernels.
ATAN_COEFFS = (0.9999993355627802, -0.3332986075436498, 0.19946565611778277,
               -0.1390863061253806, 0.09642202741860259, -0.05591243160816954,
               0.02186304866628265, -0.004054596580840994)
#: Margin (rad) around the fast angle inside which the visibility test falls back to atan2.
ATAN_MARGIN = 1e-7
_A0, _A1, _A2, _A3, _A4, _A5, _A6, _A7 = ATAN_COEFFS


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _fast_atan(x):
    z = x * x
    p = _A5 + z * (_A6 + z * _A7)
    return x * (_A0 + z * (_A1 + z * (_A2 + z * (_A3 + z * (_A4 + z * p)))))


@njit(cache=True)
def fast_angle(r, ux):
    """atan2(r, ux) for r >= 0 to within 3.8e-8 rad, without a transcendental call."""
    if ux >= r:
        return _fast_atan(r / ux)
    if -ux >= r:
        return math.pi - _fast_atan(r / -ux)
    return 0.5 * math.pi - _fast_atan(ux / r)


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _visible(ux, uy, uz, p):
    if p[P_FULL] != 0.0 or ux >= p[P_COS_IN]:
        return True
    if ux < p[P_COS_OUT]:
        return False
    h = p[P_SIGN] * uy
    v = -uz
    s2 = h * h + v * v
    if s2 == 0.0:
        return ux > 0.0
    wh = p[P_NASAL] if h >= 0.0 else p[P_TEMPORAL]
    wv = p[P_DORSAL] if v >= 0.0 else p[P_VENTRAL]
    k = h * h / (wh * wh) + v * v / (wv * wv)
    r = math.sqrt(s2)
    # decide with the fast angle unless it lies within its error margin of the boundary;
    # the answer is then the same as with atan2 (the NumPy twin's exact test)
    if ux >= r:
        a = _fast_atan(r / ux)
    elif -ux >= r:
        a = math.pi - _fast_atan(r / -ux)
    else:
        a = 0.5 * math.pi - _fast_atan(ux / r)
    hi = a + ATAN_MARGIN
    if k * hi * hi <= s2:
        return True
    lo = a - ATAN_MARGIN
    if lo > 0.0 and k * lo * lo > s2:
        return False
    alpha = math.atan2(r, ux)
    return k * alpha * alpha <= s2


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _frame_signal(ux, uy, uz, A, B, bx, by, bz, c, p, lut, cube):
    """Signal of the modes that need the receptor's in-plane frame (ratio, full)."""
    mode = p[P_MODE]
    if mode == MODE_FULL_FIXED:
        # reference: the eye's dorsal direction (0, 0, -1) projected on the membrane,
        # r = (a_z a − ẑ)/√(1 − a_z²); e2 = a × r.  With b·a = c:
        # b·r = (a_z c − b_z)/n,  b·(a × r) = (a × r)·b = (b_y a_x − b_x a_y)/n
        a2 = B * uz
        n2 = 1.0 - a2 * a2
        if n2 > 1e-24:
            inv = 1.0 / math.sqrt(n2)
            be1 = (a2 * c - bz) * inv
            be2 = (by * A - bx * B * uy) * inv
        else:
            be1 = bx
            be2 = by * a2
    else:
        s2 = uy * uy + uz * uz
        if s2 > 0.0:
            inv = 1.0 / math.sqrt(s2)
            # b·m̂ = (b_y u_y + b_z u_z)/s, e1 = −sin β x̂ + cos β m̂
            # (sin β = B s, cos β = A), e2 = x̂ × m̂
            bu = by * uy + bz * uz
            be1 = A * bu * inv - B * bx * s2 * inv
            be2 = (bz * uy - by * uz) * inv
        else:
            be1 = A * by
            be2 = bz
    if mode == MODE_RATIO:
        cb = p[P_RB0] * c + p[P_RB1] * be1 + p[P_RB2] * be2
        return _lut_lookup(lut, c) / _lut_lookup(lut, cb)
    cp = p[P_COS_PSI]
    sp = p[P_SIN_PSI]
    return _cube_lookup(cube, cp * be1 + sp * be2, cp * be2 - sp * be1, c)


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
def _pattern_equirect(cos_el, sin_el, cos_az, sin_az, R_head_view, R_eye_view, eye_params,
                     b_eye, lut, cubes, pick, out):
    """Signal on an equirectangular grid whose directions are in the view frame.

    ``out`` (H, W) float64 is filled; NaN where no eye sees.
    """
    H = cos_el.shape[0]
    W = cos_az.shape[0]
    for i in prange(H):
        ce = cos_el[i]
        vz = -sin_el[i]
        for j in range(W):
            vx = ce * cos_az[j]
            vy = ce * sin_az[j]
            out[i, j] = _signal(vx, vy, vz, R_eye_view, eye_params, b_eye, lut, cubes, pick)


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


@njit(parallel=True, cache=True, fastmath=FASTMATH)
def _composite_world_aligned(scene, cos_el, sin_el, cos_az, sin_az, R_head_view, R_eye_view,
                            eye_params, b_eye, lut, cubes, pick, inv_mean, gain, outside, out):
    """Composite a world panorama whose pixel grid coincides with the scene's.

    ``scene`` and ``out`` (H, W, C) float32 linear light.  Modulation
    m = gain·(s/mean − 1) multiplies every channel (luminance, chromaticity kept);
    unseen pixels are multiplied by ``outside``.
    """
    H = cos_el.shape[0]
    W = cos_az.shape[0]
    for i in prange(H):
        ce = cos_el[i]
        vz = -sin_el[i]
        for j in range(W):
            vx = ce * cos_az[j]
            vy = ce * sin_az[j]
            s = _signal(vx, vy, vz, R_eye_view, eye_params, b_eye, lut, cubes, pick)
            _modulate(scene[i, j], s, inv_mean, gain, outside, out[i, j])


@njit(parallel=True, cache=True, fastmath=FASTMATH)
def _composite_resampled(scene, north_col, cos_el, sin_el, cos_az, sin_az, R_head_view,
                        R_world_view, R_eye_view, eye_params, b_eye, lut, cubes, pick, inv_mean,
                         gain, outside, out):
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
            s = _signal(vx, vy, vz, R_eye_view, eye_params, b_eye, lut, cubes, pick)
            _modulate(px, s, inv_mean, gain, outside, out[i, j])


@njit(parallel=True, cache=True, fastmath=FASTMATH)
def _composite_dirs(scene, north_col, dirs, R_head_view, R_world_view, R_eye_view, eye_params,
                   b_eye, lut, cubes, pick, inv_mean, gain, outside, out):
    """Composite for explicit view directions ``dirs`` (N, 3); ``out`` (N, C) float32.

    Rows of ``dirs`` that are NaN (outside a view's footprint) give 0.
    """
    SH = scene.shape[0]
    SW = scene.shape[1]
    C = scene.shape[2]
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
        _bilinear(scene, north_col + az * (SW / (2.0 * math.pi)), (0.5 * math.pi - el) * (SH / math.pi),
                  px)
        s = _signal(vx, vy, vz, R_eye_view, eye_params, b_eye, lut, cubes, pick)
        _modulate(px, s, inv_mean, gain, outside, out[n])


# ---------------------------------------------------------------------------
# public entry points: normalise the tables, then call the compiled kernels
# ---------------------------------------------------------------------------

def _fold(R_eye_head, R_head_view):
    """R_eye_view = R_eye_head @ R_head_view per eye, (E, 3, 3): the kernels rotate each
    view direction once, straight into every eye's frame."""
    return np.ascontiguousarray(np.einsum("eij,jk->eik", np.asarray(R_eye_head, np.float64),
                                          np.asarray(R_head_view, np.float64)))


def _tables(eye_params, lut, cubes):
    lut = np.asarray(lut, dtype=np.float64)
    if lut.ndim == 1:
        lut = lut[None, :]
    lut = np.ascontiguousarray(lut)
    rows = eye_params[:, P_LUT]
    if rows.size and (rows.min() < 0 or rows.max() >= lut.shape[0]):
        raise ValueError(f"eye_params ask for response-table rows up to {int(rows.max())} but "
                         f"lut has {lut.shape[0]} row(s); pass the stacked tables from "
                         f"pipeline.prepare (ShotInputs.lut)")
    needs_cube = eye_params[:, P_MODE] >= MODE_FULL_MERIDIAN
    if cubes is None:
        if needs_cube.any():
            raise ValueError("a full-frame alignment needs its cube-map tables: pass "
                             "cubes=ShotInputs.cubes")
        cubes = _NO_CUBES
    cubes = np.ascontiguousarray(cubes, dtype=np.float64)
    if needs_cube.any() and eye_params[needs_cube, P_CUBE].max() >= cubes.shape[0]:
        raise ValueError("eye_params ask for a cube-map table that is not in cubes")
    return lut, cubes


def pattern_equirect(cos_el, sin_el, cos_az, sin_az, R_head_view, R_eye_head, eye_params, b_eye,
                     lut, pick, out, cubes=None):
    """Signal on an equirectangular grid whose directions are in the view frame.

    ``out`` (H, W) float64 is filled; NaN where no eye sees.
    """
    lut, cubes = _tables(eye_params, lut, cubes)
    _pattern_equirect(cos_el, sin_el, cos_az, sin_az, R_head_view, _fold(R_eye_head, R_head_view),
                      eye_params, b_eye,
                      lut, cubes, pick, out)


def pattern_dirs(dirs, R_head_view, R_eye_head, eye_params, b_eye, lut, pick, out, cubes=None):
    """Signal for explicit unit directions ``dirs`` (N, 3) in the view frame -> ``out`` (N,)."""
    lut, cubes = _tables(eye_params, lut, cubes)
    _pattern_dirs(dirs, R_head_view, _fold(R_eye_head, R_head_view), eye_params, b_eye, lut, cubes,
                  pick, out)


def composite_world_aligned(scene, cos_el, sin_el, cos_az, sin_az, R_head_view, R_eye_head,
                            eye_params, b_eye, lut, pick, inv_mean, gain, outside, out,
                            cubes=None):
    """Composite a world panorama whose pixel grid coincides with the scene's.

    ``scene`` and ``out`` (H, W, C) float32 linear light.  Modulation
    m = gain·(s/mean − 1) multiplies every channel (luminance, chromaticity kept);
    unseen pixels are multiplied by ``outside``.
    """
    lut, cubes = _tables(eye_params, lut, cubes)
    _composite_world_aligned(scene, cos_el, sin_el, cos_az, sin_az, R_head_view,
                             _fold(R_eye_head, R_head_view),
                             eye_params, b_eye, lut, cubes, pick, inv_mean, gain, outside, out)


def composite_resampled(scene, north_col, cos_el, sin_el, cos_az, sin_az, R_head_view,
                        R_world_view, R_eye_head, eye_params, b_eye, lut, pick, inv_mean, gain,
                        outside, out, cubes=None):
    """Composite an equirectangular view (any frame) over a resampled scene.

    The scene is a 2:1 world panorama with geographic north at continuous column
    ``north_col``; each output pixel's direction is rotated into the world frame by
    ``R_world_view`` and the scene sampled bilinearly.
    """
    lut, cubes = _tables(eye_params, lut, cubes)
    _composite_resampled(scene, north_col, cos_el, sin_el, cos_az, sin_az, R_head_view,
                         R_world_view, _fold(R_eye_head, R_head_view), eye_params, b_eye, lut, cubes,
                         pick, inv_mean,
                         gain, outside, out)


def composite_dirs(scene, north_col, dirs, R_head_view, R_world_view, R_eye_head, eye_params,
                   b_eye, lut, pick, inv_mean, gain, outside, out, cubes=None):
    """Composite for explicit view directions ``dirs`` (N, 3); ``out`` (N, C) float32.

    Rows of ``dirs`` that are NaN (outside a view's footprint) give 0.
    """
    lut, cubes = _tables(eye_params, lut, cubes)
    _composite_dirs(scene, north_col, dirs, R_head_view, R_world_view,
                    _fold(R_eye_head, R_head_view), eye_params,
                    b_eye, lut, cubes, pick, inv_mean, gain, outside, out)


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


def cube_lookup_numpy(cube, dirs):
    """NumPy twin of the cube-map lookup: (6, n, n) table, (N, 3) directions -> (N,)."""
    d = np.asarray(dirs, dtype=np.float64)
    ad = np.abs(d)
    k = np.where((ad[:, 0] >= ad[:, 1]) & (ad[:, 0] >= ad[:, 2]), 0,
                 np.where(ad[:, 1] >= ad[:, 2], 1, 2))
    idx = np.arange(d.shape[0])
    major = d[idx, k]
    face = 2 * k + (major <= 0.0)
    m = np.abs(major)
    minor0 = np.where(k == 0, 1, 0)
    minor1 = np.where(k == 2, 1, 2)
    n1 = cube.shape[2] - 1
    xu = (d[idx, minor0] / m + 1.0) * 0.5 * n1
    xv = (d[idx, minor1] / m + 1.0) * 0.5 * n1
    i = np.clip(xu.astype(np.int64), 0, n1 - 1)
    j = np.clip(xv.astype(np.int64), 0, n1 - 1)
    fu = xu - i
    fv = xv - j
    t = cube[face, i, j] * (1 - fv) + cube[face, i, j + 1] * fv
    b = cube[face, i + 1, j] * (1 - fv) + cube[face, i + 1, j + 1] * fv
    return t * (1 - fu) + b * fu


def _visible_twin(u, p):
    from .eye.eye import _visible_numpy

    if p[P_FULL] != 0.0:
        return np.ones(u.shape[0], bool)
    return _visible_numpy(u, p[P_NASAL:P_VENTRAL + 1], p[P_SIGN])


def receptor_frames_numpy(u, p):
    """Base axis a and in-plane frame (e1, e2) of the receptors, each (N, 3), eye frame,
    for eye-frame view directions ``u`` (N, 3) and one eye's packed parameters."""
    from .eye.optics import normal_coefficients

    A, B = normal_coefficients(u[:, 0], p[P_Q], p[P_E2])
    a = B[:, None] * u
    a[:, 0] = A
    if p[P_MODE] == MODE_FULL_FIXED:
        g = np.array([0.0, 0.0, -1.0])
        r = g - (a @ g)[:, None] * a
        nr = np.linalg.norm(r, axis=1, keepdims=True)
        e1 = np.where(nr > 1e-12, r / np.where(nr > 1e-12, nr, 1.0), np.array([1.0, 0.0, 0.0]))
    else:
        s = np.hypot(u[:, 1], u[:, 2])[:, None]
        m = np.where(s > 0, np.concatenate([np.zeros_like(s), u[:, 1:]], 1) / np.where(s > 0, s, 1),
                     np.array([0.0, 1.0, 0.0]))
        e1 = -np.sum(a * m, 1)[:, None] * np.array([1.0, 0.0, 0.0]) + a[:, :1] * m
    e2 = np.cross(a, e1)
    return a, e1, e2


def signal_numpy(dirs_head, R_eye_head, eye_params, b_eye, lut, pick=-1, cubes=None):
    """NumPy twin of the per-direction signal: (N, 3) head-frame unit dirs -> (N,)."""
    luts, cubes = _tables(eye_params, lut, cubes)
    d = np.asarray(dirs_head, dtype=np.float64)
    acc = np.zeros(d.shape[0])
    cnt = np.zeros(d.shape[0])
    for e in range(R_eye_head.shape[0]):
        if pick >= 0 and e != pick:
            continue
        u = d @ R_eye_head[e].T
        p = eye_params[e]
        vis = _visible_twin(u, p)
        a, e1, e2 = receptor_frames_numpy(u, p)
        b = b_eye[e]
        c = a @ b
        table = luts[int(p[P_LUT])]
        mode = p[P_MODE]
        if mode == MODE_AXIAL:
            val = lut_lookup_numpy(table, c)
        elif mode == MODE_RATIO:
            cb = p[P_RB0] * c + p[P_RB1] * (e1 @ b) + p[P_RB2] * (e2 @ b)
            val = lut_lookup_numpy(table, c) / lut_lookup_numpy(table, cb)
        else:
            cp, sp = p[P_COS_PSI], p[P_SIN_PSI]
            x = cp * e1 + sp * e2
            y = cp * e2 - sp * e1
            b_mol = np.stack([x @ b, y @ b, c], axis=1)
            val = cube_lookup_numpy(cubes[int(p[P_CUBE])], b_mol)
        acc += np.where(vis, val, 0.0)
        cnt += vis
    with np.errstate(invalid="ignore"):
        return np.where(cnt > 0, acc / np.maximum(cnt, 1), np.nan)


def pattern_numpy(dirs_view, R_head_view, R_eye_head, eye_params, b_eye, lut, pick=-1,
                  cubes=None):
    """NumPy twin of :func:`pattern_dirs`."""
    d = np.asarray(dirs_view, dtype=np.float64)
    return signal_numpy(d @ np.asarray(R_head_view).T, R_eye_head, eye_params, b_eye, lut, pick,
                        cubes)


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
