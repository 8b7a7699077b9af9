"""Plain NumPy reference twins of the kernels, and the reference eye geometry.

For: the same maths as the compiled kernels on explicit direction arrays, written for
clarity: the reference in tests/kernels, the baseline in ``bench/``, and the receptor
signal that :mod:`renderer.predict` builds on.  The NumPy geometry the eye package uses
for its own receptor axes (:func:`ray_parameter`, :func:`normal_coefficients`,
:func:`visible_numpy`) lives here too, so the twins need nothing above the kernel layer.
Not for: speed (the kernels), or anything that reads an Eye or a Layout object.
"""

from __future__ import annotations

import numpy as np

from ..frames import unit_vec_to_azel_rad
from .filtering import LOD_SCALE, build_pyramid, ntaps_for
from .layout import (MODE_AXIAL, MODE_FULL_FIXED, MODE_FULL_MERIDIAN, MODE_RATIO, P_COS_PSI,
                     P_CUBE, P_E2, P_FULL, P_LUT, P_MODE, P_NASAL, P_Q, P_RB0, P_RB1, P_RB2,
                     P_SIGN, P_SIN_PSI, P_VENTRAL, _tables)


# ---------------------------------------------------------------------------
# reference eye geometry (the eye package's own receptor axes use these too)
# ---------------------------------------------------------------------------

def ray_parameter(ux, q, e2=1.0):
    """Distance t (units of b) from the nodal point to the retina along −u.

    Parameters
    ----------
    ux : array_like
        cos α, the view direction's component along the optic axis.
    q : float
        Nodal offset d/b (|q| < a/b: the nodal point inside the eye).
    e2 : float
        (b/a)², 1 for a spherical retina.

    Returns
    -------
    ndarray
        t > 0 with P = (q − t·ux, −t·u⊥) on the retina.
    """
    ux = np.clip(np.asarray(ux, dtype=np.float64), -1.0, 1.0)
    s2 = 1.0 - ux * ux
    # (q − t ux)² e2 + t² s2 = 1  →  k t² − 2 q e2 ux t + (q² e2 − 1) = 0,
    # k = e2 ux² + s2
    k = e2 * ux * ux + s2
    half_b = q * e2 * ux
    disc = half_b * half_b - k * (q * q * e2 - 1.0)
    return (half_b + np.sqrt(disc)) / k


def normal_coefficients(ux, q, e2=1.0):
    """(A, B): the inward retinal normal at the ray's hit point is A·x̂ + B·u⊥.

    Parameters
    ----------
    ux : array_like
        cos α.
    q, e2 : float
        As :func:`ray_parameter`.

    Returns
    -------
    A, B : ndarray
        Same shape as ``ux``.  For a sphere (e2 = 1) A = t·ux − q, B = t.
    """
    ux = np.clip(np.asarray(ux, dtype=np.float64), -1.0, 1.0)
    t = ray_parameter(ux, q, e2)
    ax = (t * ux - q) * e2
    bt = t
    norm = np.sqrt(ax * ax + bt * bt * (1.0 - ux * ux))
    return ax / norm, bt / norm


def visible_numpy(u, half_widths, nasal_sign):
    """NumPy twin of the kernels' field-of-view test (:func:`renderer.kernels.leaf._visible`).

    A direction at angle α from the optic axis, in the meridian whose unit transverse
    components towards nose and top are (cos φ, sin φ), is visible if
    α ≤ w(φ) with w(φ)⁻² = cos²φ/w_h² + sin²φ/w_v², w_h the nasal or temporal and
    w_v the dorsal or ventral half-width of that quadrant.  Since w(φ) lies between
    the smallest and largest half-width, cos α ≥ cos w_min is visible and
    cos α < cos w_max is not without computing α (the kernels' fast path).
    """
    nas, tem, dor, ven = (float(x) for x in half_widths)
    ux = np.clip(u[..., 0], -1.0, 1.0)
    h = nasal_sign * u[..., 1]
    v = -u[..., 2]
    s2 = h * h + v * v
    alpha = np.arctan2(np.sqrt(s2), ux)
    wh = np.where(h >= 0, nas, tem)
    wv = np.where(v >= 0, dor, ven)
    lim = (h * h / (wh * wh) + v * v / (wv * wv)) * alpha * alpha
    on_axis = s2 == 0.0
    full = min(nas, tem, dor, ven) >= np.pi - 1e-12
    exact = np.where(on_axis, (ux > 0) | full, lim <= s2)
    c_in, c_out = np.cos(min(nas, tem, dor, ven)), np.cos(max(nas, tem, dor, ven))
    return np.where(ux >= c_in, True, np.where(ux < c_out, False, exact)) | full


# ---------------------------------------------------------------------------
# twins of the kernels
# ---------------------------------------------------------------------------

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
    if p[P_FULL] != 0.0:
        return np.ones(u.shape[0], bool)
    return visible_numpy(u, p[P_NASAL:P_VENTRAL + 1], p[P_SIGN])


def receptor_frames_numpy(u, p):
    """Base axis a and in-plane frame (e1, e2) of the receptors, each (N, 3), eye frame,
    for eye-frame view directions ``u`` (N, 3) and one eye's packed parameters."""
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


def mode_axes_numpy(p, a, e1, e2):
    """The receptor axes an eye's kernel mode reads, from its base axes and in-plane frame.

    The one NumPy statement of the per-mode receptor geometry (the kernels' is
    :func:`renderer.kernels.leaf._inplane_field` and the helpers after it; the Fisher
    information of :mod:`renderer.predict.fisher` builds on this one).

    Parameters
    ----------
    p : ndarray, shape (PARAMS,)
        One eye's packed parameters (:func:`renderer.kernels.layout.pack_eyes`).
    a, e1, e2 : ndarray, shape (N, 3), eye frame
        Base receptor axes and in-plane frame (:func:`receptor_frames_numpy`).  The map is
        linear, so passing the field's components b·a, b·e1, b·e2, each (N,), gives the
        field's components on the returned axes instead.

    Returns
    -------
    tuple of ndarray
        Axial modes: ``(a,)``; ratio: ``(a, a_B)``, population B's axis
        a_B = RB0·a + RB1·e1 + RB2·e2; full frame: ``(x, y, z)``, the molecular axes
        x = cos ψ·e1 + sin ψ·e2, y = cos ψ·e2 − sin ψ·e1, z = a.
    """
    mode = p[P_MODE]
    if mode == MODE_RATIO:
        return a, p[P_RB0] * a + p[P_RB1] * e1 + p[P_RB2] * e2
    if mode in (MODE_FULL_MERIDIAN, MODE_FULL_FIXED):
        cp, sp = p[P_COS_PSI], p[P_SIN_PSI]
        return cp * e1 + sp * e2, cp * e2 - sp * e1, a
    return (a,)


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
            # on the field's components, in the kernels' order of operations
            _, cb = mode_axes_numpy(p, c, e1 @ b, e2 @ b)
            val = lut_lookup_numpy(table, c) / lut_lookup_numpy(table, cb)
        else:
            x, y, _ = mode_axes_numpy(p, a, e1, e2)
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
    az, el = unit_vec_to_azel_rad(dirs_world)
    return _level_bilinear_numpy(scene, north_col + az * (SW / (2 * np.pi)),
                                 (0.5 * np.pi - el) * (SH / np.pi))


def _level_bilinear_numpy(level, x, y):
    """Bilinear read of one pyramid level (or a whole scene) at continuous texel
    coordinates (N,): x wraps, y is clamped, texel centres at half-integers."""
    Hl, Wl = level.shape[:2]
    xs = x - 0.5
    ys = np.clip(y - 0.5, 0.0, Hl - 1.0)
    x0f = np.floor(xs)
    fx = (xs - x0f)[:, None]
    x0 = x0f.astype(np.int64) % Wl
    x1 = (x0 + 1) % Wl
    y0 = np.minimum(ys.astype(np.int64), max(Hl - 2, 0))
    fy = (ys - y0)[:, None]
    y1 = np.minimum(y0 + 1, Hl - 1)
    s = level.astype(np.float64)
    top = s[y0, x0] * (1 - fx) + s[y0, x1] * fx
    bot = s[y1, x0] * (1 - fx) + s[y1, x1] * fx
    return top * (1 - fy) + bot * fy


def modulate_numpy(px, s, inv_mean, gain, outside):
    """NumPy twin of the modulation step: px (N, C), s (N,) -> (N, C)."""
    k = 1.0 + gain * (s * inv_mean - 1.0)
    seen = ~np.isnan(s)
    out = np.where(seen[:, None], np.clip(px * k[:, None], 0.0, 1.0), px * outside)
    return out


# ---------------------------------------------------------------------------
# twins of the prefiltered scene lookup (renderer.kernels.filtering)
# ---------------------------------------------------------------------------

def grid_tangents_numpy(dirs_grid):
    """Per-pixel direction steps of an (H, W, 3) direction grid (NaN outside a view's
    footprint): (d_col, d_row), each (H, W, 3), the change of the direction for one
    pixel step right and one step down.  Central differences where both neighbours
    exist, one-sided where only one does, 0 where neither (the kernels' rule)."""
    d = np.asarray(dirs_grid, dtype=np.float64)

    def steps(a):
        # a: (..., n, 3), differences along axis -2
        ok = ~np.isnan(a[..., 0])
        nxt = np.full_like(a, np.nan)
        prv = np.full_like(a, np.nan)
        nxt[..., :-1, :] = a[..., 1:, :]
        prv[..., 1:, :] = a[..., :-1, :]
        okn = ~np.isnan(nxt[..., 0]) & ok
        okp = ~np.isnan(prv[..., 0]) & ok
        both = (okn & okp)[..., None]
        out = np.where(both, 0.5 * (nxt - prv),
                       np.where(okn[..., None], nxt - a, np.where(okp[..., None], a - prv, 0.0)))
        return np.where(ok[..., None], out, 0.0)

    d_col = steps(d)
    d_row = np.swapaxes(steps(np.swapaxes(d, 0, 1)), 0, 1)
    return d_col, d_row


def scene_jacobian_numpy(north_col, SW, SH, dirs_world, dcol_world, drow_world):
    """Level-0 continuous scene coords (x, y) of world directions (N, 3) and the
    Jacobian's columns (ax, ay), (bx, by): texel steps for the direction steps
    ``dcol_world`` and ``drow_world`` (N, 3), by the derivatives of azimuth
    atan2(w_y, w_x) and elevation asin(−w_z)."""
    d = np.asarray(dirs_world, dtype=np.float64)
    kx = SW / (2 * np.pi)
    ky = SH / np.pi
    az, el = unit_vec_to_azel_rad(d)
    x = np.mod(north_col + az * kx, SW)
    y = (0.5 * np.pi - el) * ky
    rho2 = d[:, 0] ** 2 + d[:, 1] ** 2
    rho = np.sqrt(rho2)
    inv2 = 1.0 / np.maximum(rho2, 1e-300)
    inv = 1.0 / np.maximum(rho, 1e-300)

    def col(t):
        t = np.asarray(t, dtype=np.float64)
        return (kx * (d[:, 0] * t[:, 1] - d[:, 1] * t[:, 0]) * inv2, ky * t[:, 2] * inv)

    ax, ay = col(dcol_world)
    bx, by = col(drow_world)
    return x, y, ax, ay, bx, by


def sample_mipmap_numpy(pyramid, ntaps_max, x, y, ax, ay, bx, by):
    """NumPy twin of the footprint filter (``filtering._mip_pixel``): level-0 coords
    (N,) and Jacobian columns (N,) -> (N, C) float64."""
    x, y, ax, ay, bx, by = (np.asarray(v, dtype=np.float64) for v in (x, y, ax, ay, bx, by))
    H0, W0, C = pyramid.shape
    p = ax * ax + bx * bx
    r = ay * ay + by * by
    q = ax * ay + bx * by
    m = 0.5 * (p + r)
    h = np.sqrt((0.5 * (p - r)) ** 2 + q * q)
    s1 = np.minimum(np.sqrt(m + h), float(W0))
    s2 = np.minimum(np.sqrt(np.maximum(m - h, 0.0)), s1)
    if ntaps_max > 1:
        n = np.clip(np.ceil(s1 / np.maximum(s2, 1.0) - 1e-9), 1, ntaps_max).astype(np.int64)
    else:
        n = np.ones(x.shape, np.int64)
    lam = m + h
    ex = np.where(p >= r, lam - r, q)
    ey = np.where(p >= r, q, lam - p)
    en = np.hypot(ex, ey)
    ex, ey = np.where(en > 0, ex / np.where(en > 0, en, 1), 1.0), np.where(en > 0, ey / np.where(en > 0, en, 1), 0.0)
    w = np.where(n == 1, s1, np.maximum(s1 / n, s2))
    s = w * LOD_SCALE
    L = pyramid.levels.shape[0]
    scale = pyramid.scale
    # level l: the largest with scale[l] <= s (0 below one texel); blend to l + 1
    l = np.clip(np.searchsorted(scale, s, side="right") - 1, 0, L - 1)
    top = l + 1 >= L
    lo_scale = scale[l]
    hi_scale = scale[np.minimum(l + 1, L - 1)]
    f = np.where((s <= 1.0) | top, 0.0, (s - lo_scale) / np.where(top, 1.0, hi_scale - lo_scale))
    l = np.where(s <= 1.0, 0, l)
    out = np.zeros((x.shape[0], C))
    for k in range(int(n.max()) if n.size else 0):
        use = k < n
        t = ((k + 0.5) / n - 0.5) * s1
        tx = np.where(n == 1, x, x + t * ex)
        ty = np.where(n == 1, y, y + t * ey)
        for lev in np.unique(l[use]):
            for dl, wt in ((0, 1.0 - f), (1, f)):
                sel = use & (l == lev) & (wt > 0.0)
                if lev + dl >= L or not sel.any():
                    continue
                lv = pyramid.level(lev + dl)
                Hl, Wl = lv.shape[:2]
                val = _level_bilinear_numpy(lv, tx[sel] * (Wl / W0), ty[sel] * (Hl / H0))
                out[sel] += val * (wt[sel] / n[sel])[:, None]
    return out


def sample_filtered_numpy(scene, north_col, dirs_world, dcol_world, drow_world, filter_name,
                          pyramid=None):
    """Scene values at world directions (N, 3) under a named filter: the plain bilinear
    twin, or the footprint filter with the direction steps of one pixel (N, 3)."""
    if filter_name == "bilinear":
        return sample_equirect_numpy(scene, north_col, dirs_world)
    SH, SW = scene.shape[:2]
    pyr = build_pyramid(scene) if pyramid is None else pyramid
    x, y, ax, ay, bx, by = scene_jacobian_numpy(north_col, SW, SH, dirs_world, dcol_world,
                                                drow_world)
    return sample_mipmap_numpy(pyr, ntaps_for(filter_name), x, y, ax, ay, bx, by)
