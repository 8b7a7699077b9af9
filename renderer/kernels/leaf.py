"""Leaf helpers shared by several kernel families (numba, inlined into their callers).

For: the small per-value routines that both the per-pixel kernels
(:mod:`renderer.kernels.pixels`) and the row passes (:mod:`renderer.kernels.rows`) call:
table lookups, the fast angle and the exact field-of-view test, and the fast-math flags
every kernel module compiles with.  Each is written once here so the families cannot
drift apart.  Not for: whole-image loops, or anything that allocates.
"""

from __future__ import annotations

import math

from numba import njit

from .layout import (P_COS_IN, P_COS_OUT, P_DORSAL, P_FULL, P_NASAL, P_SIGN, P_TEMPORAL,
                     P_VENTRAL)


#: LLVM fast-math flags safe for this module: no 'nnan'/'ninf', because NaN marks unseen
#: pixels and is tested for; no "afn" either, so atan2 and sqrt stay exact (the visibility
#: test relies on that).  Contraction to FMA and reciprocals only.
FASTMATH = {"contract", "arcp", "nsz"}


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


# ---------------------------------------------------------------------------
# the per-mode receptor signal: the field in the frame a mode reads
# ---------------------------------------------------------------------------
# Written once for both families: the per-pixel kernels call these per pixel, the row
# passes inside their tile loops (inlined, so each caller's error model and fast-math
# flags apply, and the loops still vectorise: the branches are selects).  The NumPy
# version is renderer.kernels.twins.mode_axes_numpy.

@njit(cache=True, inline="always", fastmath=FASTMATH)
def _inplane_field(fixed, A, B, uy, uz, bx, by, bz, c):
    """The unit field's components (b·e1, b·e2) on the receptor's in-plane frame.

    Receptor axis a = A·x̂ + B·u⊥ (eye frame, u = (u_x, uy, uz) the view direction),
    c = b·a.  ``fixed`` False: e1 on the meridian, away from the posterior pole, e2 = x̂ × m̂
    along the parallel (sin β = B·s, cos β = A, m̂ = u⊥/s); True: e1 the eye's dorsal
    direction (0, 0, −1) projected on the membrane, r = (a_z a − ẑ)/√(1 − a_z²), and
    e2 = a × r, so b·r = (a_z c − b_z)/n and b·(a × r) = (b_y a_x − b_x a_y)/n.  Where the
    frame is undefined (on the optic axis, or a along ẑ) a fixed fallback is used.
    """
    if fixed:
        a2 = B * uz
        n2 = 1.0 - a2 * a2
        ok = n2 > 1e-24
        inv = 1.0 / math.sqrt(n2 if ok else 1.0)
        be1 = (a2 * c - bz) * inv if ok else bx
        be2 = (by * A - bx * B * uy) * inv if ok else by * a2
    else:
        s2 = uy * uy + uz * uz
        ok = s2 > 0.0
        inv = 1.0 / math.sqrt(s2 if ok else 1.0)
        bu = by * uy + bz * uz
        be1 = A * bu * inv - B * bx * s2 * inv if ok else A * by
        be2 = (bz * uy - by * uz) * inv if ok else bz
    return be1, be2


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _ratio_cos(r0, r1, r2, c, be1, be2):
    """Ratio mode: cos θ of population B, whose axis is r0·a + r1·e1 + r2·e2
    (slots P_RB0..P_RB2), from the field's components on a, e1, e2."""
    return r0 * c + r1 * be1 + r2 * be2


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _molecular_xy(cp, sp, be1, be2):
    """Full-frame modes: the field's molecular x and y components, molecular x =
    cos ψ·e1 + sin ψ·e2 and y = z × x (slots P_COS_PSI, P_SIN_PSI); its z component is c."""
    return cp * be1 + sp * be2, cp * be2 - sp * be1
