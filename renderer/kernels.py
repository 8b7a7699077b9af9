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

    ``out`` (H, W) float64 is filled; NaN where no eye sees.  Computed by the row-tile
    passes (see :func:`_tile_signal`).
    """
    H = cos_el.shape[0]
    W = cos_az.shape[0]
    chord = _block_chords(cos_az, sin_az)
    nblk = (H + ROW_BLOCK - 1) // ROW_BLOCK
    for blk in prange(nblk):
        buf = np.empty((11, TILE))
        ibuf = np.empty((2, TILE), dtype=np.int64)
        for i in range(blk * ROW_BLOCK, min(H, (blk + 1) * ROW_BLOCK)):
            for j0 in range(0, W, TILE):
                j1 = min(W, j0 + TILE)
                _tile_signal(cos_el[i], -sin_el[i], cos_az[j0:j1], sin_az[j0:j1],
                             chord[j0 // SUB:], R_eye_view, eye_params, b_eye, lut, cubes, pick,
                             buf, ibuf)
                for j in range(j0, j1):
                    k = buf[8, j - j0]
                    out[i, j] = buf[7, j - j0] / k if k > 0.0 else np.nan


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


# ---------------------------------------------------------------------------
# row-tile composites of equirectangular views
# ---------------------------------------------------------------------------
# The per-pixel kernels above branch per eye (early reject, visibility band, mode), which
# keeps LLVM from vectorising them.  For the composited equirectangular views (world
# panorama, and the signal of resampled views) the work is instead done per tile of a row and per eye in simple, branch-free
# loops over buffers that stay in L1 cache: selects replace branches, loop-invariant
# choices (mode, geometry, full sphere) are taken once per tile, and the rare directions
# the fast visibility test cannot decide are settled afterwards by the exact scalar
# ``_visible``.  ``error_model="numpy"``: numba's default checks every float division for
# zero (to raise ZeroDivisionError), and that branch alone stops vectorisation; no divisor
# here can be zero (guarded by selects), so nothing observable changes.  Same maths as
# ``_signal`` (and its NumPy twin), only the order differs; the tests compare both.

#: Margin (rad) of the float32 fast angle of the tile pass.  Its error: float32 rounding
#: of s², √, |u_x| and the quotient (≈ 4·2⁻²⁴ relative in t, ≤ 2.4e-7 rad in atan t),
#: Horner evaluation in float32 (≲ 10·2⁻²⁴ ≈ 6e-7 rad), coefficients rounded to float32
#: (Σ|c_k|·2⁻²⁴ ≈ 1.1e-7) and the fit (3.8e-8): under 1e-6 rad, a tenth of the margin.
#: Directions within it of the boundary (1.5e-5 of the pixel-eye pairs of bench/frame.py)
#: go to the exact test.  (s² underflowing in float32 only shrinks t and its error.)
ATAN32_MARGIN = 1e-5
_F0, _F1, _F2, _F3, _F4, _F5, _F6, _F7 = (np.float32(c) for c in ATAN_COEFFS)


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _fast_atan32(x):
    """``_fast_atan`` in float32 (x float32)."""
    z = x * x
    p = _F5 + z * (_F6 + z * _F7)
    return x * (_F0 + z * (_F1 + z * (_F2 + z * (_F3 + z * (_F4 + z * p)))))


#: Columns per tile: the eleven float64 tile buffers take 11·256·8 B = 22 KiB (L1-resident).
TILE = 256
#: Columns per visibility block (see _tile_visibility); TILE is a multiple of it.
SUB = 64
#: Rows per parallel work item, so the tile buffers are allocated once per block.
ROW_BLOCK = 8
_PI = math.pi
_HALF_PI = 0.5 * math.pi


@njit(cache=True)
def _block_chords(cos_az, sin_az):
    """Per block of SUB columns: the largest distance of a column's (cos az, sin az) from
    the block's centre column's (centre = first + (length − 1) // 2)."""
    W = cos_az.shape[0]
    out = np.empty((W + SUB - 1) // SUB)
    for b0 in range(0, W, SUB):
        b1 = min(W, b0 + SUB)
        jc = b0 + (b1 - b0 - 1) // 2
        m = 0.0
        for j in range(b0, b1):
            dc = cos_az[j] - cos_az[jc]
            ds = sin_az[j] - sin_az[jc]
            m = max(m, math.sqrt(dc * dc + ds * ds))
        out[b0 // SUB] = m
    return out


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_visibility(ce, vz, caz, saz, chord, R, p, ux, uy, uz, st):
    """Eye-frame directions of one tile (``caz``, ``saz`` its column tables) and their
    visibility state ``st``: 1 seen, 0 not, 2 left to the exact test; returns the number
    of 2s and of 1s.

    As in ``_visible``, a fast angle decides unless it lies within its error margin of the
    boundary (here the float32 angle and ATAN32_MARGIN), so every decision taken equals
    the exact atan2 test's; the branch-free atan form (min/max ratio, then reflections)
    is ``fast_angle``'s three cases.  On-axis directions (s² = 0) go to ``_visible``.

    Blocks of SUB columns lie within ``chord[b]`` (the largest distance of a block's
    (cos az, sin az) from its centre pixel's) of that pixel, so their u_x is within
    cos(el)·|(R00, R01)|·chord[b] of the centre's: a block wholly inside the smallest or
    outside the largest half-width is settled without the angle (most of the sphere).
    """
    n = caz.shape[0]
    r00, r01, r02 = R[0, 0], R[0, 1], R[0, 2]
    full = p[P_FULL] != 0.0
    # a full-sphere eye sees everything: every direction passes the inner-cone test
    cin = -np.inf if full else p[P_COS_IN]
    cout = p[P_COS_OUT]
    sg = p[P_SIGN]
    # 1/w² per quadrant, picked by adding a difference rather than by a select: LLVM turns
    # a select of two reciprocals into a division per pixel.  The rounding this adds to k
    # (~1e-16 relative) is far inside ATAN_MARGIN, so the decisions do not change.
    i_tem = 1.0 / (p[P_TEMPORAL] * p[P_TEMPORAL])
    d_nas = 1.0 / (p[P_NASAL] * p[P_NASAL]) - i_tem
    i_ven = 1.0 / (p[P_VENTRAL] * p[P_VENTRAL])
    d_dor = 1.0 / (p[P_DORSAL] * p[P_DORSAL]) - i_ven
    rho = abs(ce) * math.sqrt(r00 * r00 + r01 * r01)
    undecided = 0
    seen = 0
    for b0 in range(0, n, SUB):
        b1 = min(n, b0 + SUB)
        jc = b0 + (b1 - b0 - 1) // 2
        xc = r00 * (ce * caz[jc]) + r01 * (ce * saz[jc]) + r02 * vz
        # 1e-12 covers the rounding of the computed u_x (~1e-16)
        bnd = rho * chord[b0 // SUB] + 1e-12
        if xc - bnd >= cin or xc + bnd < cout:
            whole = 1.0 if xc - bnd >= cin else 0.0
            _block_rotate(ce, vz, caz[b0:b1], saz[b0:b1], R, ux[b0:b1], uy[b0:b1], uz[b0:b1],
                          st[b0:b1], whole)
            if whole == 1.0:
                seen += b1 - b0
        else:
            # a separate function: LLVM vectorises the loop only outside the block loop
            u, v = _block_band(ce, vz, caz[b0:b1], saz[b0:b1], R, cin, cout, sg, i_tem,
                               d_nas, i_ven, d_dor, ux[b0:b1], uy[b0:b1], uz[b0:b1], st[b0:b1])
            undecided += u
            seen += v
    return undecided, seen


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _block_rotate(ce, vz, caz, saz, R, ux, uy, uz, st, whole):
    r00, r01, r02 = R[0, 0], R[0, 1], R[0, 2]
    r10, r11, r12 = R[1, 0], R[1, 1], R[1, 2]
    r20, r21, r22 = R[2, 0], R[2, 1], R[2, 2]
    for j in range(caz.shape[0]):
        vx = ce * caz[j]
        vy = ce * saz[j]
        ux[j] = r00 * vx + r01 * vy + r02 * vz
        uy[j] = r10 * vx + r11 * vy + r12 * vz
        uz[j] = r20 * vx + r21 * vy + r22 * vz
        st[j] = whole


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _block_band(ce, vz, caz, saz, R, cin, cout, sg, i_tem, d_nas, i_ven, d_dor, ux, uy, uz, st):
    """The visibility test of :func:`_tile_visibility` for a block in the band."""
    r00, r01, r02 = R[0, 0], R[0, 1], R[0, 2]
    r10, r11, r12 = R[1, 0], R[1, 1], R[1, 2]
    r20, r21, r22 = R[2, 0], R[2, 1], R[2, 2]
    undecided = 0
    seen = 0
    for j in range(caz.shape[0]):
        vx = ce * caz[j]
        vy = ce * saz[j]
        x = r00 * vx + r01 * vy + r02 * vz
        y = r10 * vx + r11 * vy + r12 * vz
        z = r20 * vx + r21 * vy + r22 * vz
        ux[j] = x
        uy[j] = y
        uz[j] = z
        h = sg * y
        v = -z
        hh = h * h
        vv = v * v
        s2 = hh + vv
        k = hh * (i_tem + d_nas * (h >= 0.0)) + vv * (i_ven + d_dor * (v >= 0.0))
        # the angle in float32 (twice the lanes through the divider, which bounds this
        # loop), min/max as selects before the one division (inside the quotient, LLVM
        # speculated a division per branch); the comparison stays float64
        r = math.sqrt(np.float32(s2))
        ax = abs(np.float32(x))
        mn = min(r, ax)
        mx = max(r, ax)
        a = np.float64(_fast_atan32(mn / mx))
        a = _HALF_PI - a if r > ax else a
        a = _PI - a if x < 0.0 else a
        hi = a + ATAN32_MARGIN
        lo = a - ATAN32_MARGIN
        yes = k * hi * hi <= s2
        no = (lo > 0.0) & (k * lo * lo > s2)
        band = 1.0 if yes else (0.0 if no else 2.0)
        band = 2.0 if s2 == 0.0 else band
        sj = 1.0 if x >= cin else (0.0 if x < cout else band)
        st[j] = sj
        undecided += sj == 2.0
        seen += sj == 1.0
    return undecided, seen


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_axis(p, b, ux, uy, uz, A, B, c):
    """Base receptor axis A·x̂ + B·u⊥ and c = cos θ to the field, as in ``_signal``;
    the chief-ray geometry (q = 0, e2 = 1: A = u_x, B = 1 exactly) skips the square root."""
    n = ux.shape[0]
    q = p[P_Q]
    e2 = p[P_E2]
    bx, by, bz = b[0], b[1], b[2]
    if q == 0.0 and e2 == 1.0:
        for j in range(n):
            x = ux[j]
            xc = 1.0 if x > 1.0 else (-1.0 if x < -1.0 else x)
            A[j] = xc
            B[j] = 1.0
            c[j] = xc * bx + (uy[j] * by + uz[j] * bz)
    elif e2 == 1.0:
        qq = q * q
        for j in range(n):
            x = ux[j]
            xc = 1.0 if x > 1.0 else (-1.0 if x < -1.0 else x)
            s2 = 1.0 - xc * xc
            Bj = q * xc + math.sqrt(1.0 - qq * s2)
            Aj = Bj * xc - q
            A[j] = Aj
            B[j] = Bj
            c[j] = Aj * bx + Bj * (uy[j] * by + uz[j] * bz)
    else:
        for j in range(n):
            x = ux[j]
            xc = 1.0 if x > 1.0 else (-1.0 if x < -1.0 else x)
            s2 = 1.0 - xc * xc
            kk = e2 * xc * xc + s2
            hb = q * e2 * xc
            t = (hb + math.sqrt(hb * hb - kk * (q * q * e2 - 1.0))) / kk
            axx = (t * xc - q) * e2
            inv = 1.0 / math.sqrt(axx * axx + t * t * s2)
            Aj = axx * inv
            Bj = t * inv
            A[j] = Aj
            B[j] = Bj
            c[j] = Aj * bx + Bj * (uy[j] * by + uz[j] * bz)


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_lut_index(lut, c, idx, frac):
    """Cell index and fraction of ``_lut_lookup`` for a tile (clamps as selects).

    At c >= 1 this gives cell n1 - 1 with fraction 1, i.e. lut[n1] up to rounding.  The
    table reads themselves are left to :func:`_tile_lut_acc`: LLVM does not emit vector
    gathers for this CPU family, and a gather inside the loop would keep the arithmetic
    here from vectorising.
    """
    n1 = lut.shape[0] - 1
    top = n1 - 1
    for j in range(c.shape[0]):
        x = (c[j] + 1.0) * 0.5 * n1
        x = 0.0 if x < 0.0 else (float(n1) if x > n1 else x)
        i = int(x)
        i = top if i > top else i
        idx[j] = i
        frac[j] = x - i


@njit(cache=True, inline="always")
def _lut_at(lut, i, f):
    a = lut[i]
    return a + f * (lut[i + 1] - a)


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_lut_acc(lut, idx, frac, st, acc, cnt):
    """Axial modes: add the interpolated table value of every seen pixel (scalar reads)."""
    for j in range(idx.shape[0]):
        if st[j] == 1.0:
            acc[j] += _lut_at(lut, idx[j], frac[j])
            cnt[j] += 1.0


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_frame(p, b, ux, uy, uz, A, B, c, be1, be2):
    """Field components on the receptor's in-plane frame (e1, e2), as in ``_frame_signal``."""
    n = ux.shape[0]
    bx, by, bz = b[0], b[1], b[2]
    if p[P_MODE] == MODE_FULL_FIXED:
        for j in range(n):
            a2 = B[j] * uz[j]
            n2 = 1.0 - a2 * a2
            ok = n2 > 1e-24
            inv = 1.0 / math.sqrt(n2 if ok else 1.0)
            be1[j] = (a2 * c[j] - bz) * inv if ok else bx
            be2[j] = (by * A[j] - bx * B[j] * uy[j]) * inv if ok else by * a2
    else:
        for j in range(n):
            y = uy[j]
            z = uz[j]
            s2 = y * y + z * z
            ok = s2 > 0.0
            inv = 1.0 / math.sqrt(s2 if ok else 1.0)
            bu = by * y + bz * z
            be1[j] = A[j] * bu * inv - B[j] * bx * s2 * inv if ok else A[j] * by
            be2[j] = (bz * y - by * z) * inv if ok else bz


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_ratio_arg(p, c, be1, be2, cb):
    """Ratio mode: cos θ of population B, RB0·c + RB1·(b·e1) + RB2·(b·e2)."""
    r0, r1, r2 = p[P_RB0], p[P_RB1], p[P_RB2]
    for j in range(c.shape[0]):
        cb[j] = r0 * c[j] + r1 * be1[j] + r2 * be2[j]


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_ratio_acc(lut, idx_a, frac_a, idx_b, frac_b, st, acc, cnt):
    for j in range(idx_a.shape[0]):
        if st[j] == 1.0:
            acc[j] += _lut_at(lut, idx_a[j], frac_a[j]) / _lut_at(lut, idx_b[j], frac_b[j])
            cnt[j] += 1.0


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_cube_index(p, m, c, be1, be2, idx, fu_out, fv_out):
    """Full-frame modes: ``_cube_lookup``'s face, cell and fractions for a tile, the
    face choice as selects; ``idx`` is the cell's first node in the flattened table
    (6, m, m).  The reads are in :func:`_tile_cube_acc`."""
    cp = p[P_COS_PSI]
    sp = p[P_SIN_PSI]
    mm = m * m
    h = 0.5 * (m - 1)
    n2 = m - 2
    for j in range(c.shape[0]):
        e1 = be1[j]
        e2 = be2[j]
        x = cp * e1 + sp * e2
        y = cp * e2 - sp * e1
        z = c[j]
        ax = abs(x)
        ay = abs(y)
        az = abs(z)
        isx = (ax >= ay) & (ax >= az)
        isy = ay >= az
        f = ((0 if x > 0.0 else 1) if isx
             else ((2 if y > 0.0 else 3) if isy else (4 if z > 0.0 else 5)))
        inv = 1.0 / (ax if isx else (ay if isy else az))
        u = y if isx else x
        v = z if (isx or isy) else y
        xu = (u * inv + 1.0) * h
        xv = (v * inv + 1.0) * h
        iu = int(xu)
        iv = int(xv)
        iu = 0 if iu < 0 else (n2 if iu > n2 else iu)
        iv = 0 if iv < 0 else (n2 if iv > n2 else iv)
        fu_out[j] = xu - iu
        fv_out[j] = xv - iv
        idx[j] = f * mm + iu * m + iv


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_cube_acc(flat, m, idx, fu, fv, st, acc, cnt):
    for j in range(idx.shape[0]):
        if st[j] == 1.0:
            k0 = idx[j]
            g = fv[j]
            t00 = flat[k0]
            t10 = flat[k0 + m]
            t = t00 + g * (flat[k0 + 1] - t00)
            bb = t10 + g * (flat[k0 + m + 1] - t10)
            acc[j] += t + fu[j] * (bb - t)
            cnt[j] += 1.0


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_modulate(scene_row, acc, cnt, inv_mean, gain, outside, C, out_row):
    """``_modulate`` for one tile of flattened (n·C,) rows: seen pixels scaled by
    1 + gain·(s/mean − 1) and clipped to [0, 1], unseen ones (cnt = 0, s = NaN)
    multiplied by ``outside``, unclipped."""
    for j in range(acc.shape[0]):
        n = cnt[j]
        seen = n > 0.0
        s = acc[j] / (n if seen else 1.0)
        kk = 1.0 + gain * (s * inv_mean - 1.0) if seen else outside
        for ch in range(C):
            w = scene_row[j * C + ch] * kk
            w = (0.0 if w < 0.0 else (1.0 if w > 1.0 else w)) if seen else w
            out_row[j * C + ch] = w


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_modulate3(scene_row, acc, cnt, inv_mean, gain, outside, out_row):
    """``_tile_modulate`` for three channels, unrolled so the pixel loop vectorises."""
    for j in range(acc.shape[0]):
        n = cnt[j]
        seen = n > 0.0
        s = acc[j] / (n if seen else 1.0)
        kk = 1.0 + gain * (s * inv_mean - 1.0) if seen else outside
        w0 = scene_row[3 * j] * kk
        w1 = scene_row[3 * j + 1] * kk
        w2 = scene_row[3 * j + 2] * kk
        c0 = 0.0 if w0 < 0.0 else (1.0 if w0 > 1.0 else w0)
        c1 = 0.0 if w1 < 0.0 else (1.0 if w1 > 1.0 else w1)
        c2 = 0.0 if w2 < 0.0 else (1.0 if w2 > 1.0 else w2)
        out_row[3 * j] = c0 if seen else w0
        out_row[3 * j + 1] = c1 if seen else w1
        out_row[3 * j + 2] = c2 if seen else w2


@njit(cache=True, fastmath=FASTMATH)
def _tile_signal(ce, vz, caz, saz, chord, R_eye_view, eye_params, b_eye, lut, cubes, pick, buf,
                 ibuf):
    """Per-eye tile passes for one row tile: ``buf[7]`` gets the sum of the signals of the
    eyes that see each direction, ``buf[8]`` their number (``_signal`` = sum / number, NaN
    at 0).  ``buf`` (11, ≥ n) float64 and ``ibuf`` (2, ≥ n) int64 are scratch; ``chord``
    from :func:`_block_chords`, starting at this tile's first block."""
    n = caz.shape[0]
    ux = buf[0, :n]
    uy = buf[1, :n]
    uz = buf[2, :n]
    st = buf[3, :n]
    A = buf[4, :n]
    B = buf[5, :n]
    c = buf[6, :n]
    acc = buf[7, :n]
    cnt = buf[8, :n]
    be1 = buf[9, :n]
    be2 = buf[10, :n]
    ia = ibuf[0, :n]
    ib = ibuf[1, :n]
    acc[:] = 0.0
    cnt[:] = 0.0
    for e in range(R_eye_view.shape[0]):
        if pick >= 0 and e != pick:
            continue
        p = eye_params[e]
        undecided, seen = _tile_visibility(ce, vz, caz, saz, chord, R_eye_view[e], p, ux, uy,
                                           uz, st)
        if undecided + seen == 0:
            continue  # this eye sees none of the tile
        if undecided:
            for j in range(n):
                if st[j] == 2.0:
                    st[j] = 1.0 if _visible(ux[j], uy[j], uz[j], p) else 0.0
        _tile_axis(p, b_eye[e], ux, uy, uz, A, B, c)
        table = lut[int(p[P_LUT])]
        mode = p[P_MODE]
        if mode == MODE_AXIAL:
            _tile_lut_index(table, c, ia, ux)
            _tile_lut_acc(table, ia, ux, st, acc, cnt)
            continue
        _tile_frame(p, b_eye[e], ux, uy, uz, A, B, c, be1, be2)
        # the eye-frame direction is spent now: its buffers take the fractions
        if mode == MODE_RATIO:
            _tile_ratio_arg(p, c, be1, be2, uz)
            _tile_lut_index(table, c, ia, ux)
            _tile_lut_index(table, uz, ib, uy)
            _tile_ratio_acc(table, ia, ux, ib, uy, st, acc, cnt)
        else:
            cube = cubes[int(p[P_CUBE])]
            m = cube.shape[2]
            _tile_cube_index(p, m, c, be1, be2, ia, ux, uy)
            _tile_cube_acc(cube.reshape(-1), m, ia, ux, uy, st, acc, cnt)


@njit(parallel=True, cache=True, fastmath=FASTMATH)
def _composite_world_aligned(scene, cos_el, sin_el, cos_az, sin_az, R_head_view, R_eye_view,
                            eye_params, b_eye, lut, cubes, pick, inv_mean, gain, outside, out):
    """Composite a world panorama whose pixel grid coincides with the scene's.

    ``scene`` and ``out`` (H, W, C) float32 linear light, C-contiguous.  Modulation
    m = gain·(s/mean − 1) multiplies every channel (luminance, chromaticity kept);
    unseen pixels are multiplied by ``outside``.  Computed per row tile (see above).
    """
    H = cos_el.shape[0]
    W = cos_az.shape[0]
    C = scene.shape[2]
    chord = _block_chords(cos_az, sin_az)
    nblk = (H + ROW_BLOCK - 1) // ROW_BLOCK
    for blk in prange(nblk):
        buf = np.empty((11, TILE))
        ibuf = np.empty((2, TILE), dtype=np.int64)
        for i in range(blk * ROW_BLOCK, min(H, (blk + 1) * ROW_BLOCK)):
            scene_row = scene[i].reshape(-1)
            out_row = out[i].reshape(-1)
            for j0 in range(0, W, TILE):
                j1 = min(W, j0 + TILE)
                n = j1 - j0
                _tile_signal(cos_el[i], -sin_el[i], cos_az[j0:j1], sin_az[j0:j1],
                             chord[j0 // SUB:], R_eye_view, eye_params, b_eye, lut, cubes, pick,
                             buf, ibuf)
                if C == 3:
                    _tile_modulate3(scene_row[3 * j0:3 * j1], buf[7, :n], buf[8, :n], inv_mean,
                                    gain, outside, out_row[3 * j0:3 * j1])
                else:
                    _tile_modulate(scene_row[C * j0:C * j1], buf[7, :n], buf[8, :n], inv_mean,
                                   gain, outside, C, out_row[C * j0:C * j1])


@njit(parallel=True, cache=True, fastmath=FASTMATH)
def _composite_resampled(scene, north_col, cos_el, sin_el, cos_az, sin_az, R_head_view,
                        R_world_view, R_eye_view, eye_params, b_eye, lut, cubes, pick, inv_mean,
                         gain, outside, out):
    """Composite an equirectangular view (any frame) over a resampled scene.

    The scene is a 2:1 world panorama with geographic north at continuous column
    ``north_col``; each output pixel's direction is rotated into the world frame by
    ``R_world_view`` and the scene sampled bilinearly.  The signal comes from the row-tile
    passes of the world composite; the scene lookup stays per pixel.
    """
    H = cos_el.shape[0]
    W = cos_az.shape[0]
    SH = scene.shape[0]
    SW = scene.shape[1]
    C = scene.shape[2]
    Q = R_world_view
    chord = _block_chords(cos_az, sin_az)
    nblk = (H + ROW_BLOCK - 1) // ROW_BLOCK
    for blk in prange(nblk):
        buf = np.empty((11, TILE))
        ibuf = np.empty((2, TILE), dtype=np.int64)
        px = np.empty(C, dtype=np.float32)
        for i in range(blk * ROW_BLOCK, min(H, (blk + 1) * ROW_BLOCK)):
            ce = cos_el[i]
            vz = -sin_el[i]
            for j0 in range(0, W, TILE):
                j1 = min(W, j0 + TILE)
                _tile_signal(ce, vz, cos_az[j0:j1], sin_az[j0:j1], chord[j0 // SUB:], R_eye_view,
                             eye_params, b_eye, lut, cubes, pick, buf, ibuf)
                for j in range(j0, j1):
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
                    k = buf[8, j - j0]
                    s = buf[7, j - j0] / k if k > 0.0 else np.nan
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
    # the kernel walks rows as flat (W·C,) arrays, which needs C-contiguous images
    scene = np.ascontiguousarray(scene)
    dest = out if out.flags.c_contiguous else np.empty(out.shape, out.dtype)
    _composite_world_aligned(scene, cos_el, sin_el, cos_az, sin_az, R_head_view,
                             _fold(R_eye_head, R_head_view),
                             eye_params, b_eye, lut, cubes, pick, inv_mean, gain, outside, dest)
    if dest is not out:
        out[...] = dest


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
