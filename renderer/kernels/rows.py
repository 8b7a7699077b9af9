"""Row passes: the signal of equirectangular views a row at a time, vectorised.

For: world and head panoramas and every view described by per-row and per-column cos/sin
tables (:mod:`renderer.kernels.tables`): block visibility decisions, the shared-value
fast path, per-eye passes in chunks, and the modulation of a world-aligned scene row.
The notes below say how.  Not for: explicit direction arrays (:mod:`renderer.kernels.pixels`)
or resampling a scene (:mod:`renderer.kernels.sampling`, which reuses the row signal).

Row-pass notes.  :func:`_row_signal` computes one row:

1. Visibility per eye and block of SUB = 64 columns (``_row_decide``, one vectorised loop
   over the row's blocks): a cone test, then a Lipschitz bound on g = cos α − cos w(φ)
   around the block's centre (``_fov_slope`` bounds |dw/dφ|).  Each run of blocks it
   cannot settle gets one call of ``_block_pixels`` (the same test per pixel, cos w from
   the polynomial ``_cos_sqrt``), and inside COS_MARGIN the exact ``_visible``, so the
   masks equal the twin's (tests/kernels/test_rows.py).
2. When every eye in use has the chief-ray geometry (q = 0, e2 = 1, axial mode, one
   table row: :func:`_shared_group`), the signal is one value f(v·b) wherever any of
   them sees (``_row_shared``).  Otherwise ``_row_general`` runs each eye over the runs
   of blocks it sees, in chunks of EYE_CHUNK columns (``_eye_values``), and divides the
   sums by the counts.  A new kernel mode adds its pass there in the same style: one
   loop of selects only (no branches, no table reads) computing indices and fractions,
   then a scalar loop doing the table reads into ``rb[RB_VAL]``.
3. Response tables are read as (value, step) pairs (``_pair_tables``) at a continuous
   index; cube tables are float32.
4. ``_row_modulate3`` applies the factor in float32 (within one float32 rounding of the
   twin's float64 product).
5. Work items are blocks of ROW_BLOCK consecutive rows dealt to the threads round-robin
   (:func:`_item_order`); the wrappers pass ``numba.get_num_threads()``, since reading
   it inside a compiled function stops numba caching it.  Results do not depend on the
   thread count (tested bitwise).
6. Loop helpers carry ``error_model="numpy"`` and FASTMATH so that LLVM vectorises them;
   what the measurements taught about keeping them vectorised is in bench/README.md.
"""

from __future__ import annotations

import math

import numpy as np
from numba import get_num_threads, njit, prange

from .layout import (MODE_AXIAL, MODE_FULL_FIXED, MODE_RATIO, P_COS_PSI, P_CUBE, P_DORSAL, P_E2,
                     P_FULL, P_LUT, P_MODE, P_NASAL, P_Q, P_RB0, P_RB1, P_RB2, P_SIGN,
                     P_SIN_PSI, P_TEMPORAL, P_VENTRAL, P_COS_IN, P_COS_OUT, _fold, _tables)
from .leaf import FASTMATH, _inplane_field, _molecular_xy, _ratio_cos, _visible


# ---------------------------------------------------------------------------
# row passes of equirectangular views
# ---------------------------------------------------------------------------
# The per-pixel kernels above branch per eye (early reject, visibility band, mode), which
# keeps LLVM from vectorising them.  Equirectangular views (world panorama, the signal of
# resampled views, patterns) are instead computed a row at a time:
#
# 1. Visibility is decided per eye for whole blocks of SUB columns where that can be
#    proved (:func:`_row_decide`, one vectorised loop over the row's blocks), and pixel
#    by pixel only in the few blocks the field-of-view boundary crosses
#    (:func:`_row_pixels`, one vectorised call per run of such blocks).
# 2. Over the runs of blocks an eye sees, in chunks of CHUNK columns that stay in L1
#    cache: the receptor axis, cos θ and the table index in simple loops that LLVM
#    vectorises; the table reads in a separate scalar loop (LLVM does not vectorise
#    them, and one read in a loop stops it vectorising the rest; hand-written AVX-512
#    gathers were measured slower than the scalar reads on the AMD Zen 5 machine this
#    was tuned on); then the values are added up per block, with the per-pixel
#    visibility only where a block is undecided.
# 3. Eyes whose receptor axis is the view direction itself (chief-ray geometry: nodal
#    point at the retina's centre, or the chief-ray alignment) and that read the same
#    table give the same value wherever they see: cos θ = v·b is the same in every eye's
#    frame.  When every eye in use is such an eye (the common case), the row's signal is
#    that one value wherever any of them sees (:func:`_row_shared`): the mean of equal
#    values is the value.
#
# ``error_model="numpy"``: numba's default checks every float division for zero (to raise
# ZeroDivisionError), and that branch alone stops vectorisation; no divisor here can be
# zero (guarded by selects), so nothing observable changes.  Same maths as ``_signal``
# (and its NumPy twin), only the order differs; the tests compare both.

#: Columns per visibility block.
SUB = 64
#: Columns per chunk of the shared group's value pass (a whole row at the usual widths:
#: every call of a compiled helper costs of the order of 100 ns, more than the cache
#: misses saved by smaller chunks), and of the per-eye passes (their ten float64 buffers
#: then take 80 KiB, in L2 rather than L1 cache, but the five to eight helper calls per
#: chunk cost more: 1024 columns ran the d = 1.5 mm modes about a fifth faster than 256).
CHUNK = 4096
EYE_CHUNK = 1024
#: Rows per parallel work item (consecutive rows: their table reads hit the same cache
#: lines), so the row buffers are allocated once per item.  See :func:`_item_order`.
ROW_BLOCK = 8

#: Rows of the float64 row buffer (then one row of per-pixel visibility per eye).
RB_UX, RB_UY, RB_UZ, RB_A, RB_B, RB_C, RB_E1, RB_E2, RB_VAL, RB_FRAC, RB_ACC, RB_CNT = range(12)
_NROW = 12


@njit(cache=True)
def _block_bounds(cos_az, sin_az, size):
    """Per block of ``size`` columns (centre = first + (length − 1) // 2), (4, nblocks):
    row 0 the largest distance of a column's (cos az, sin az) from the centre column's,
    row 1 the largest angle between them, 2·asin(row 0 / 2), rows 2 and 3 the centre
    column's cos az and sin az.

    At elevation el the directions (cos el·cos az, cos el·sin az, sin el) of a block lie
    within |cos el|·row 0 of the centre's, and within |cos el|·row 1 in angle (asin x / x
    grows with x, so scaling the chord by |cos el| ≤ 1 scales the angle by at most that).
    """
    W = cos_az.shape[0]
    out = np.empty((4, (W + size - 1) // size))
    for b0 in range(0, W, size):
        b1 = min(W, b0 + size)
        jc = b0 + (b1 - b0 - 1) // 2
        m = 0.0
        for j in range(b0, b1):
            dc = cos_az[j] - cos_az[jc]
            ds = sin_az[j] - sin_az[jc]
            m = max(m, math.sqrt(dc * dc + ds * ds))
        k = b0 // size
        out[0, k] = m
        out[1, k] = 2.0 * math.asin(min(1.0, 0.5 * m))
        out[2, k] = cos_az[jc]
        out[3, k] = sin_az[jc]
    return out


#: Slots of the per-eye visibility constants of :func:`_eye_consts`.
K_CIN, K_COUT, K_SIGN, K_ITEM, K_DNAS, K_IVEN, K_DDOR, K_SLOPE, K_FULL = range(9)


@njit(cache=True)
def _fov_slope(p):
    """An upper bound of |dw/dφ| for the half-width w(φ) of ``_visible``.

    In a quadrant with half-widths a (nasal or temporal) and b (dorsal or ventral),
    w(φ)⁻² = cos²φ/a² + sin²φ/b², so dw/dφ = w³·cos φ·sin φ·(1/a² − 1/b²), at most
    max(a, b)³·|1/a² − 1/b²|/2 in size.  w is continuous where quadrants meet (it is a
    at φ = 0 and b at φ = ±π/2 on both sides), so the largest quadrant bound holds for
    the whole circle.
    """
    d = 0.0
    for a in (p[P_NASAL], p[P_TEMPORAL]):
        for b in (p[P_DORSAL], p[P_VENTRAL]):
            m = max(a, b)
            d = max(d, m * m * m * 0.5 * abs(1.0 / (a * a) - 1.0 / (b * b)))
    return d


@njit(cache=True)
def _eye_consts(eye_params):
    """Per eye, the constants of the row visibility test, (E, 9) (slots K_*): cos of the
    smallest and largest half-width, nasal sign, 1/w² per quadrant as a base and a
    difference (picked by adding the difference rather than by a select: LLVM turns a
    select of two reciprocals into a division per pixel), :func:`_fov_slope`, and the
    full-sphere flag (whose inner-cone cosine is then −inf: everything passes it)."""
    E = eye_params.shape[0]
    out = np.empty((E, 9))
    for e in range(E):
        p = eye_params[e]
        full = p[P_FULL] != 0.0
        out[e, K_CIN] = -np.inf if full else p[P_COS_IN]
        out[e, K_COUT] = p[P_COS_OUT]
        out[e, K_SIGN] = p[P_SIGN]
        i_tem = 1.0 / (p[P_TEMPORAL] * p[P_TEMPORAL])
        i_ven = 1.0 / (p[P_VENTRAL] * p[P_VENTRAL])
        out[e, K_ITEM] = i_tem
        out[e, K_DNAS] = 1.0 / (p[P_NASAL] * p[P_NASAL]) - i_tem
        out[e, K_IVEN] = i_ven
        out[e, K_DDOR] = 1.0 / (p[P_DORSAL] * p[P_DORSAL]) - i_ven
        out[e, K_SLOPE] = _fov_slope(p)
        out[e, K_FULL] = 1.0 if full else 0.0
    return out


#: cos(√t) ≈ Σ c_k t^k on 0 ≤ t ≤ π² (degree-9 Chebyshev interpolant, converted to powers
#: of t, made for this module); |error| ≤ 9e-15, checked on a dense grid in tests/kernels.
COS_SQRT_COEFFS = (0.9999999999999956, -0.49999999999989997, 0.0416666666663069,
                   -0.0013888888884010747, 2.4801586970278462e-05, -2.7557306391471175e-07,
                   2.087645547808322e-09, -1.14663654715549e-11, 4.7409456845093656e-14,
                   -1.372600639681756e-16)
#: Margin inside which the per-pixel test of :func:`_block_pixels` defers to the exact one:
#: far above the polynomial's error and the rounding of u_x and w² (~1e-15).
COS_MARGIN = 1e-9
_C0, _C1, _C2, _C3, _C4, _C5, _C6, _C7, _C8, _C9 = COS_SQRT_COEFFS


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _cos_sqrt(t):
    p = _C7 + t * (_C8 + t * _C9)
    return _C0 + t * (_C1 + t * (_C2 + t * (_C3 + t * (_C4 + t * (_C5 + t * (_C6 + t * p))))))


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _row_decide(ce, vz, chord, ang, cc, sc, R, kc, dec):
    """Visibility of whole blocks of one row for one eye: ``dec[b]`` 1.0 every pixel of
    block b seen, 0.0 none, −1.0 undecided.  One branch-free loop over the blocks.

    ``chord``, ``ang``, ``cc``, ``sc``: the rows of :func:`_block_bounds` (for the blocks
    at hand); ``kc`` the eye's :func:`_eye_consts` row.  First the cones: a block's u_x
    lies within rho·chord (rho = |cos el|·|(R00, R01)|) of its centre's, and u_x ≥ cos of
    the smallest half-width is seen, u_x < cos of the largest is not.  Then the boundary,
    in cosines as in :func:`_block_pixels`: with α the angle from the optic axis and φ
    the meridian, a pixel is seen iff g = cos α − cos w(φ) ≥ 0.  Every pixel lies within
    δ = |cos el|·ang of the centre in angle, so its α within δ of the centre's and its φ
    within δ/sin α_min (the sphere's metric is dα² + sin²α dφ², and sin α ≥ sin α_c − δ
    along the way); cos is 1-Lipschitz, so g differs from the centre's by at most
    δ·(1 + slope/(sin α_c − δ)), slope from :func:`_fov_slope`.  A centre value beyond
    that (plus COS_MARGIN) settles the block; near the optic axis or its opposite pole
    (sin α_c − δ ≤ 1e-3) it is left to the pixels unless a cone settles it.
    """
    nb = dec.shape[0]
    if kc[K_FULL] != 0.0:
        for b in range(nb):
            dec[b] = 1.0
        return
    r00, r01, r02 = R[0, 0], R[0, 1], R[0, 2]
    r10, r11, r12 = R[1, 0], R[1, 1], R[1, 2]
    r20, r21, r22 = R[2, 0], R[2, 1], R[2, 2]
    cin = kc[K_CIN]
    cout = kc[K_COUT]
    sg = kc[K_SIGN]
    i_tem = kc[K_ITEM]
    d_nas = kc[K_DNAS]
    i_ven = kc[K_IVEN]
    d_dor = kc[K_DDOR]
    slope = kc[K_SLOPE]
    ace = abs(ce)
    rho = ace * math.sqrt(r00 * r00 + r01 * r01)
    for b in range(nb):
        vx = ce * cc[b]
        vy = ce * sc[b]
        ux = r00 * vx + r01 * vy + r02 * vz
        uy = r10 * vx + r11 * vy + r12 * vz
        uz = r20 * vx + r21 * vy + r22 * vz
        bd = rho * chord[b] + 1e-12  # 1e-12 covers the rounding of the computed u_x
        h = sg * uy
        v = -uz
        hh = h * h
        vv = v * v
        s2 = hh + vv
        delta = ace * ang[b]
        smin = math.sqrt(s2) - delta
        ok = smin > 1e-3
        k = hh * (i_tem + d_nas * (h >= 0.0)) + vv * (i_ven + d_dor * (v >= 0.0))
        g = ux - _cos_sqrt(s2 / (k if k > 0.0 else 1.0))
        lim = delta * (1.0 + slope / (smin if ok else 1.0)) + COS_MARGIN
        d = 1.0 if g > lim else (0.0 if g < -lim else -1.0)
        d = d if ok else -1.0
        d = 1.0 if ux - bd >= cin else (0.0 if ux + bd < cout else d)
        dec[b] = d


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _block_pixels(ce, vz, caz, saz, R, kc, st):
    """The per-pixel visibility test of a block the boundary crosses, as one vectorised
    loop: ``st`` 1 seen, 0 not, 2 left to the exact test; returns the number of 2s.

    ``_visible``'s test α ≤ w(φ) (α the angle from the optic axis, w the half-width of
    the meridian, both in [0, π]) is taken in cosines, where it needs neither the angle
    nor a square root: u_x = cos α ≥ cos w, and cos w = cos √(w²) with w² = s²/k is
    :func:`_cos_sqrt` of w².  Since |cos α − cos w| ≤ |α − w|, a decision taken outside
    COS_MARGIN is that of the exact test; the rest, and on-axis directions (s² = 0),
    are left to it.  The cones come first, as in ``_visible``.
    """
    r00, r01, r02 = R[0, 0], R[0, 1], R[0, 2]
    r10, r11, r12 = R[1, 0], R[1, 1], R[1, 2]
    r20, r21, r22 = R[2, 0], R[2, 1], R[2, 2]
    cin = kc[K_CIN]
    cout = kc[K_COUT]
    sg = kc[K_SIGN]
    i_tem = kc[K_ITEM]
    d_nas = kc[K_DNAS]
    i_ven = kc[K_IVEN]
    d_dor = kc[K_DDOR]
    undecided = 0
    for j in range(caz.shape[0]):
        vx = ce * caz[j]
        vy = ce * saz[j]
        x = r00 * vx + r01 * vy + r02 * vz
        y = r10 * vx + r11 * vy + r12 * vz
        z = r20 * vx + r21 * vy + r22 * vz
        h = sg * y
        v = -z
        hh = h * h
        vv = v * v
        s2 = hh + vv
        k = hh * (i_tem + d_nas * (h >= 0.0)) + vv * (i_ven + d_dor * (v >= 0.0))
        cw = _cos_sqrt(s2 / (k if k > 0.0 else 1.0))
        band = 1.0 if x >= cw + COS_MARGIN else (0.0 if x < cw - COS_MARGIN else 2.0)
        band = 2.0 if s2 == 0.0 else band
        sj = 1.0 if x >= cin else (0.0 if x < cout else band)
        st[j] = sj
        undecided += sj == 2.0
    return undecided


@njit(cache=True, inline="always", fastmath=FASTMATH, error_model="numpy")
def _row_pixels(ce, vz, cos_az, sin_az, R, p, kc, dec, pix):
    """Per-pixel visibility ``pix`` (1.0/0.0) over the undecided blocks of one row and
    eye (``pix`` elsewhere is left as it was).

    Each run of undecided blocks gets one call of :func:`_block_pixels` on slices of the
    row (slices starting at 0 let LLVM prove the indices non-negative and vectorise;
    a loop over range(j0, j1) of the whole row ran about 3× slower), then the exact
    ``_visible`` settles the few pixels it leaves (the NumPy twin's test).
    """
    W = cos_az.shape[0]
    nb = dec.shape[0]
    b = 0
    while b < nb:
        if dec[b] != -1.0:
            b += 1
            continue
        b2 = b + 1
        while b2 < nb and dec[b2] == -1.0:
            b2 += 1
        j0 = b * SUB
        j1 = min(W, b2 * SUB)
        b = b2
        if _block_pixels(ce, vz, cos_az[j0:j1], sin_az[j0:j1], R, kc, pix[j0:j1]) == 0:
            continue
        for j in range(j0, j1):
            if pix[j] == 2.0:
                vx = ce * cos_az[j]
                vy = ce * sin_az[j]
                x = R[0, 0] * vx + R[0, 1] * vy + R[0, 2] * vz
                y = R[1, 0] * vx + R[1, 1] * vy + R[1, 2] * vz
                z = R[2, 0] * vx + R[2, 1] * vy + R[2, 2] * vz
                pix[j] = 1.0 if _visible(x, y, z, p) else 0.0


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_rotate(ce, vz, caz, saz, R, ux, uy, uz):
    """Eye-frame directions of a run of columns of one row."""
    r00, r01, r02 = R[0, 0], R[0, 1], R[0, 2]
    r10, r11, r12 = R[1, 0], R[1, 1], R[1, 2]
    r20, r21, r22 = R[2, 0], R[2, 1], R[2, 2]
    for j in range(caz.shape[0]):
        vx = ce * caz[j]
        vy = ce * saz[j]
        ux[j] = r00 * vx + r01 * vy + r02 * vz
        uy[j] = r10 * vx + r11 * vy + r12 * vz
        uz[j] = r20 * vx + r21 * vy + r22 * vz


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
def _tile_frame(p, b, ux, uy, uz, A, B, c, be1, be2):
    """Field components on the receptor's in-plane frame (e1, e2), as in ``_frame_signal``."""
    n = ux.shape[0]
    bx, by, bz = b[0], b[1], b[2]
    if p[P_MODE] == MODE_FULL_FIXED:
        for j in range(n):
            be1[j], be2[j] = _inplane_field(True, A[j], B[j], uy[j], uz[j], bx, by, bz, c[j])
    else:
        for j in range(n):
            be1[j], be2[j] = _inplane_field(False, A[j], B[j], uy[j], uz[j], bx, by, bz, c[j])


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_ratio_arg(p, c, be1, be2, cb):
    """Ratio mode: cos θ of population B, RB0·c + RB1·(b·e1) + RB2·(b·e2)."""
    r0, r1, r2 = p[P_RB0], p[P_RB1], p[P_RB2]
    for j in range(c.shape[0]):
        cb[j] = _ratio_cos(r0, r1, r2, c[j], be1[j], be2[j])


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_cube_index(p, m, c, be1, be2, idx, fu_out, fv_out):
    """Full-frame modes: ``_cube_lookup``'s face, cell and fractions for a tile, the
    face choice as selects; ``idx`` is the cell's first node in the flattened table
    (6, m, m).  The reads are in :func:`_tile_cube_vals`."""
    cp = p[P_COS_PSI]
    sp = p[P_SIN_PSI]
    mm = m * m
    h = 0.5 * (m - 1)
    n2 = m - 2
    for j in range(c.shape[0]):
        x, y = _molecular_xy(cp, sp, be1[j], be2[j])
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


@njit(cache=True)
def _pair_tables(lut):
    """Response tables (K, L) as (K, 2L) pairs (value, step to the next value), the last
    step 0: ``_lut_lookup`` at continuous index x = (c + 1)·(L − 1)/2, clamped to
    [0, L − 1], is then pair[2i] + (x − i)·pair[2i + 1] with i = int(x), the same
    arithmetic as before (one fewer read per pixel, adjacent in memory)."""
    K = lut.shape[0]
    L = lut.shape[1]
    out = np.empty((K, 2 * L))
    for k in range(K):
        for i in range(L - 1):
            out[k, 2 * i] = lut[k, i]
            out[k, 2 * i + 1] = lut[k, i + 1] - lut[k, i]
        out[k, 2 * L - 2] = lut[k, L - 1]
        out[k, 2 * L - 1] = 0.0
    return out


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_lut_x(n1, c, X):
    """Continuous table index (c + 1)·n1/2 clamped to [0, n1] (n1 = L − 1)."""
    h = 0.5 * n1
    top = float(n1)
    for j in range(c.shape[0]):
        x = (c[j] + 1.0) * h
        X[j] = 0.0 if x < 0.0 else (top if x > top else x)


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_cos_view_x(ce, vz, caz, saz, bv, n1, X):
    """:func:`_tile_cos_view` and :func:`_tile_lut_x` in one loop."""
    bx, by, bz = bv[0], bv[1], bv[2]
    cz = vz * bz
    h = 0.5 * n1
    top = float(n1)
    for j in range(caz.shape[0]):
        x = (ce * (caz[j] * bx + saz[j] * by) + cz + 1.0) * h
        X[j] = 0.0 if x < 0.0 else (top if x > top else x)


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_pair_vals(pair, X, vals):
    """Interpolated table values at continuous indices ``X`` (scalar reads)."""
    for j in range(X.shape[0]):
        x = X[j]
        i = int(x)
        vals[j] = pair[2 * i] + (x - i) * pair[2 * i + 1]


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_pair_ratio(pair, Xa, Xb, vals):
    """Ratio mode: population A's value over population B's."""
    for j in range(Xa.shape[0]):
        xa = Xa[j]
        ia = int(xa)
        xb = Xb[j]
        ib = int(xb)
        vals[j] = ((pair[2 * ia] + (xa - ia) * pair[2 * ia + 1])
                   / (pair[2 * ib] + (xb - ib) * pair[2 * ib + 1]))


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_cube_vals(flat, m, idx, fu, fv, vals):
    """Full-frame modes: bilinear cube-map values at the cells of :func:`_tile_cube_index`."""
    for j in range(idx.shape[0]):
        k0 = idx[j]
        g = fv[j]
        t00 = flat[k0]
        t10 = flat[k0 + m]
        t = t00 + g * (flat[k0 + 1] - t00)
        bb = t10 + g * (flat[k0 + m + 1] - t10)
        vals[j] = t + fu[j] * (bb - t)


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_add(w, vals, acc, cnt):
    """acc += value and cnt += 1 where w > 0 (w: 1.0 seen, 0.0 not); the value of an
    unseen pixel is never used (it may be anything, even inf)."""
    for j in range(w.shape[0]):
        seen = w[j] > 0.0
        acc[j] += vals[j] if seen else 0.0
        cnt[j] += 1.0 if seen else 0.0


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _tile_add_all(vals, acc, cnt):
    for j in range(vals.shape[0]):
        acc[j] += vals[j]
        cnt[j] += 1.0


@njit(cache=True, fastmath=FASTMATH)
def _eye_values(ce, vz, cos_az, sin_az, R, p, b, pairs, cubes, rb, ib, k0, k1):
    """One eye's signal values ``rb[RB_VAL, k0:k1]`` over a chunk of columns of a row,
    whatever the visibility (the caller adds only the seen ones); ``pairs`` from
    :func:`_pair_tables`."""
    caz = cos_az[k0:k1]
    saz = sin_az[k0:k1]
    xs = rb[RB_UX, k0:k1]
    ys = rb[RB_UY, k0:k1]
    zs = rb[RB_UZ, k0:k1]
    As = rb[RB_A, k0:k1]
    Bs = rb[RB_B, k0:k1]
    cs = rb[RB_C, k0:k1]
    vs = rb[RB_VAL, k0:k1]
    fs = rb[RB_FRAC, k0:k1]
    _tile_rotate(ce, vz, caz, saz, R, xs, ys, zs)
    _tile_axis(p, b, xs, ys, zs, As, Bs, cs)
    pair = pairs[int(p[P_LUT])]
    n1 = pair.shape[0] // 2 - 1
    mode = p[P_MODE]
    if mode == MODE_AXIAL:
        _tile_lut_x(n1, cs, fs)
        _tile_pair_vals(pair, fs, vs)
        return
    e1s = rb[RB_E1, k0:k1]
    e2s = rb[RB_E2, k0:k1]
    _tile_frame(p, b, xs, ys, zs, As, Bs, cs, e1s, e2s)
    # the eye-frame direction is spent now: its buffers take the indices
    if mode == MODE_RATIO:
        _tile_ratio_arg(p, cs, e1s, e2s, zs)
        _tile_lut_x(n1, cs, xs)
        _tile_lut_x(n1, zs, ys)
        _tile_pair_ratio(pair, xs, ys, vs)
    else:
        cube = cubes[int(p[P_CUBE])]
        mc = cube.shape[2]
        ia = ib[0, k0:k1]
        _tile_cube_index(p, mc, cs, e1s, e2s, ia, xs, ys)
        _tile_cube_vals(cube.reshape(-1), mc, ia, xs, ys, vs)


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _shared_values(ce, vz, cos_az, sin_az, bv, pair, j0, j1, rb, sig):
    """f(v·bv) over columns [j0, j1) of a row into ``sig``, in chunks of CHUNK."""
    n1 = pair.shape[0] // 2 - 1
    for k0 in range(j0, j1, CHUNK):
        k1 = min(j1, k0 + CHUNK)
        X = rb[RB_FRAC, k0:k1]
        _tile_cos_view_x(ce, vz, cos_az[k0:k1], sin_az[k0:k1], bv, n1, X)
        _tile_pair_vals(pair, X, sig[k0:k1])


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _row_shared(ce, vz, cos_az, sin_az, bv, pair, active, dec, pix, rb, kinds, sig):
    """The row's signal when every eye in use (``active``) belongs to the shared group:
    f(v·bv) wherever any of them sees, NaN elsewhere.  Runs of blocks some eye sees are
    computed in one go; in blocks no eye sees whole, the eyes' per-pixel visibility is
    combined (``rb[RB_ACC]`` holds it) and the unseen pixels set to NaN."""
    W = cos_az.shape[0]
    nb = kinds.shape[0]
    E = active.shape[0]
    for b in range(nb):
        kind = 0  # 0 no eye sees the block, 1 some eye sees all of it, 2 some pixels
        for e in range(E):
            if active[e] != 0.0:
                d = dec[e, b]
                if d == 1.0:
                    kind = 1
                elif d == -1.0 and kind == 0:
                    kind = 2
        kinds[b] = kind
    seen = rb[RB_ACC]
    b = 0
    while b < nb:
        b2 = b + 1
        if kinds[b] == 0:
            while b2 < nb and kinds[b2] == 0:
                b2 += 1
            sig[b * SUB:min(W, b2 * SUB)] = np.nan
            b = b2
            continue
        while b2 < nb and kinds[b2] != 0:
            b2 += 1
        _shared_values(ce, vz, cos_az, sin_az, bv, pair, b * SUB, min(W, b2 * SUB), rb, sig)
        for bb in range(b, b2):
            if kinds[bb] != 2:
                continue
            c0 = bb * SUB
            c1 = min(W, c0 + SUB)
            sb = seen[c0:c1]
            sb[:] = 0.0
            for e in range(E):
                if active[e] != 0.0 and dec[e, bb] == -1.0:
                    pe = pix[e, c0:c1]
                    for j in range(sb.shape[0]):
                        sb[j] = max(sb[j], pe[j])
            vb = sig[c0:c1]
            for j in range(vb.shape[0]):
                vb[j] = vb[j] if sb[j] > 0.0 else np.nan
        b = b2


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _sig_from_sums(acc, cnt, sig):
    for j in range(acc.shape[0]):
        n = cnt[j]
        sig[j] = acc[j] / n if n > 0.0 else np.nan


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _row_general(ce, vz, cos_az, sin_az, R_eye_view, eye_params, b_eye, pairs, cubes, active,
                 dec, pix, rb, ib, sig):
    """The row's signal in general: every eye in use on its own, over the runs of blocks
    it sees, summed and divided by the number of eyes that see each pixel."""
    W = cos_az.shape[0]
    nb = dec.shape[1]
    acc = rb[RB_ACC]
    cnt = rb[RB_CNT]
    acc[:] = 0.0
    cnt[:] = 0.0
    for e in range(active.shape[0]):
        if active[e] == 0.0:
            continue
        b = 0
        while b < nb:
            if dec[e, b] == 0.0:
                b += 1
                continue
            b2 = b + 1
            while b2 < nb and dec[e, b2] != 0.0:
                b2 += 1
            j0 = b * SUB
            j1 = min(W, b2 * SUB)
            for k0 in range(j0, j1, EYE_CHUNK):
                _eye_values(ce, vz, cos_az, sin_az, R_eye_view[e], eye_params[e], b_eye[e],
                            pairs, cubes, rb, ib, k0, min(j1, k0 + EYE_CHUNK))
            for bb in range(b, b2):
                c0 = bb * SUB
                c1 = min(W, c0 + SUB)
                if dec[e, bb] == 1.0:
                    _tile_add_all(rb[RB_VAL, c0:c1], acc[c0:c1], cnt[c0:c1])
                else:
                    _tile_add(pix[e, c0:c1], rb[RB_VAL, c0:c1], acc[c0:c1], cnt[c0:c1])
            b = b2
    _sig_from_sums(acc, cnt, sig)


@njit(cache=True, inline="always", fastmath=FASTMATH)
def _row_signal(ce, vz, cos_az, sin_az, bnd, R_eye_view, eye_params, kcs, b_eye, active,
                fast, bv, shared_row, pairs, cubes, rb, ib, dec, kinds, sig):
    """The signal of one row of an equirectangular view into ``sig`` (NaN where no eye in
    use sees).  ``active`` marks the eyes in use (all, or the picked one); ``fast``: they
    all belong to the shared group (see the notes above), whose table row is
    ``shared_row``.  ``rb``, ``ib``, ``dec``, ``kinds`` are scratch (see the callers)."""
    E = R_eye_view.shape[0]
    pix = rb[_NROW:]
    for e in range(E):
        if active[e] != 0.0:
            _row_decide(ce, vz, bnd[0], bnd[1], bnd[2], bnd[3], R_eye_view[e], kcs[e], dec[e])
            _row_pixels(ce, vz, cos_az, sin_az, R_eye_view[e], eye_params[e], kcs[e], dec[e],
                        pix[e])
    if fast:
        _row_shared(ce, vz, cos_az, sin_az, bv, pairs[shared_row], active, dec, pix, rb, kinds,
                    sig)
    else:
        _row_general(ce, vz, cos_az, sin_az, R_eye_view, eye_params, b_eye, pairs, cubes, active,
                     dec, pix, rb, ib, sig)


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _row_modulate(scene_row, sig, inv_mean, gain, outside, C, out_row):
    """``_modulate`` for one row of flattened (W·C,) pixels: seen pixels (signal not NaN)
    scaled by 1 + gain·(s/mean − 1) and clipped to [0, 1], unseen ones multiplied by
    ``outside``, unclipped."""
    for j in range(sig.shape[0]):
        s = sig[j]
        seen = s == s
        kk = 1.0 + gain * (s * inv_mean - 1.0) if seen else outside
        for ch in range(C):
            w = scene_row[j * C + ch] * kk
            w = (0.0 if w < 0.0 else (1.0 if w > 1.0 else w)) if seen else w
            out_row[j * C + ch] = w


@njit(cache=True, fastmath=FASTMATH, error_model="numpy")
def _row_modulate3(scene_row, sig, inv_mean, gain, outside, out_row):
    """``_row_modulate`` for three float32 channels, unrolled so the pixel loop
    vectorises.  The factor is computed in float64 and applied in float32 (the
    channels' own precision): the result is within one float32 rounding (6e-8
    relative) of the float64 product rounded to float32."""
    g = np.float32(0.0)
    one = np.float32(1.0)
    out32 = np.float32(outside)
    for j in range(sig.shape[0]):
        s = sig[j]
        seen = s == s
        kk = np.float32(1.0 + gain * (s * inv_mean - 1.0)) if seen else out32
        w0 = scene_row[3 * j] * kk
        w1 = scene_row[3 * j + 1] * kk
        w2 = scene_row[3 * j + 2] * kk
        c0 = g if w0 < g else (one if w0 > one else w0)
        c1 = g if w1 < g else (one if w1 > one else w1)
        c2 = g if w2 < g else (one if w2 > one else w2)
        out_row[3 * j] = c0 if seen else w0
        out_row[3 * j + 1] = c1 if seen else w1
        out_row[3 * j + 2] = c2 if seen else w2


@njit(cache=True)
def _active(E, pick):
    a = np.zeros(E)
    for e in range(E):
        a[e] = 1.0 if pick < 0 or e == pick else 0.0
    return a


@njit(cache=True)
def _fast_path(active, shared):
    """Every eye in use belongs to the shared group (and at least one is in use)."""
    any_ = False
    for e in range(active.shape[0]):
        if active[e] != 0.0:
            any_ = True
            if shared[e] == 0.0:
                return False
    return any_


@njit(cache=True)
def _shared_row(eye_params, shared):
    for e in range(shared.shape[0]):
        if shared[e] != 0.0:
            return int(eye_params[e, P_LUT])
    return 0


@njit(cache=True)
def _row_setup(H, cos_az, sin_az, eye_params, shared, lut, pick, nthreads):
    """Per-call inputs of the row passes: block bounds for SUB, the eyes'
    visibility constants, the eyes in use, whether they all share one value, the shared
    table row, the (value, step) table pairs, and the order of the ROW_BLOCK-row work
    items of an H-row image for ``nthreads`` threads (:func:`_item_order`)."""
    active = _active(eye_params.shape[0], pick)
    return (_block_bounds(cos_az, sin_az, SUB), _eye_consts(eye_params), active,
            _fast_path(active, shared), _shared_row(eye_params, shared), _pair_tables(lut),
            _item_order((H + ROW_BLOCK - 1) // ROW_BLOCK, nthreads))


@njit(cache=True, inline="always")
def _row_buffers(E, W, nb):
    """One work item's scratch for :func:`_row_signal` (E eyes, W columns, nb column
    blocks): the float64 row buffer, the index rows, the per-eye block decisions and the
    block kinds.  Inlined, so the parallel loop allocates them as it did when written out."""
    return (np.empty((_NROW + E, W)), np.empty((2, W), dtype=np.int64), np.empty((E, nb)),
            np.empty(nb))


@njit(cache=True)
def _item_order(nblk, T):
    """The block of ROW_BLOCK rows each parallel work item takes: numba's threads take
    contiguous ranges of items, and a row's cost varies with elevation (an eye sees more
    of one hemisphere), so blocks in image order left one thread idle for about a tenth
    of the time.  Thread q's items take blocks q, q + T, q + 2T, ... (T threads; the
    count comes from the caller: reading it inside a compiled function stops caching)."""
    T = max(1, T)
    out = np.empty(nblk, dtype=np.int64)
    k = 0
    for q in range(T):
        for b in range(q, nblk, T):
            out[k] = b
            k += 1
    return out


@njit(parallel=True, cache=True, fastmath=FASTMATH)
def _pattern_equirect(cos_el, sin_el, cos_az, sin_az, R_head_view, R_eye_view, eye_params,
                      b_eye, shared, bv, lut, cubes, pick, out, nthreads):
    """Signal on an equirectangular grid whose directions are in the view frame.

    ``out`` (H, W) float64 is filled; NaN where no eye sees.  Computed a row at a time
    (see the row-pass notes).
    """
    H = cos_el.shape[0]
    W = cos_az.shape[0]
    E = R_eye_view.shape[0]
    bnd, kcs, active, fast, srow, pairs, order = _row_setup(H, cos_az, sin_az, eye_params,
                                                            shared, lut, pick, nthreads)
    for blk in prange(order.shape[0]):
        rb, ib, dec, kinds = _row_buffers(E, W, bnd.shape[1])
        r0 = order[blk] * ROW_BLOCK
        for i in range(r0, min(H, r0 + ROW_BLOCK)):
            _row_signal(cos_el[i], -sin_el[i], cos_az, sin_az, bnd, R_eye_view,
                        eye_params, kcs, b_eye, active, fast, bv, srow, pairs, cubes, rb, ib, dec,
                        kinds, out[i])

@njit(parallel=True, cache=True, fastmath=FASTMATH)
def _composite_world_aligned(scene, cos_el, sin_el, cos_az, sin_az, R_head_view, R_eye_view,
                             eye_params, b_eye, shared, bv, lut, cubes, pick, inv_mean, gain,
                             outside, out, nthreads):
    """Composite a world panorama whose pixel grid coincides with the scene's.

    ``scene`` and ``out`` (H, W, C) float32 linear light, C-contiguous.  Modulation
    m = gain·(s/mean − 1) multiplies every channel (luminance, chromaticity kept);
    unseen pixels are multiplied by ``outside``.  Computed a row at a time (see the
    row-pass notes).
    """
    H = cos_el.shape[0]
    W = cos_az.shape[0]
    C = scene.shape[2]
    E = R_eye_view.shape[0]
    bnd, kcs, active, fast, srow, pairs, order = _row_setup(H, cos_az, sin_az, eye_params,
                                                            shared, lut, pick, nthreads)
    for blk in prange(order.shape[0]):
        rb, ib, dec, kinds = _row_buffers(E, W, bnd.shape[1])
        sig = np.empty(W)
        r0 = order[blk] * ROW_BLOCK
        for i in range(r0, min(H, r0 + ROW_BLOCK)):
            _row_signal(cos_el[i], -sin_el[i], cos_az, sin_az, bnd, R_eye_view,
                        eye_params, kcs, b_eye, active, fast, bv, srow, pairs, cubes, rb, ib, dec,
                        kinds, sig)
            if C == 3:
                _row_modulate3(scene[i].reshape(-1), sig, inv_mean, gain, outside,
                               out[i].reshape(-1))
            else:
                _row_modulate(scene[i].reshape(-1), sig, inv_mean, gain, outside, C,
                              out[i].reshape(-1))


# public entry points: normalise the tables, then call the compiled kernels


def _shared_group(R_eye_view, eye_params, b_eye):
    """The eyes that can share one value per pixel (see the row-pass notes): chief-ray
    geometry (q = 0, e2 = 1: the receptor axis is the view direction), axial mode, the
    most common table row among those, and the same field in the view frame (to 1e-12).

    Returns ``shared`` (E,) float64 (1 for a member) and ``bv`` (3,), the field in the
    view frame.  Their cos θ = a·b_e = u·b_e = v·bv is the same in every member's frame,
    so the value is too (up to rounding, ~1e-16).
    """
    E = R_eye_view.shape[0]
    shared = np.zeros(E)
    bv = np.zeros(3)
    ok = [e for e in range(E)
          if eye_params[e, P_Q] == 0.0 and eye_params[e, P_E2] == 1.0
          and eye_params[e, P_MODE] == MODE_AXIAL]
    if not ok:
        return shared, bv
    rows = [int(eye_params[e, P_LUT]) for e in ok]
    row = max(set(rows), key=lambda r: (rows.count(r), -rows.index(r)))
    members = [e for e in ok if int(eye_params[e, P_LUT]) == row]
    b_view = [R_eye_view[e].T @ np.asarray(b_eye[e], np.float64) for e in members]
    bv = b_view[0]
    for e, b in zip(members, b_view):
        if np.max(np.abs(b - bv)) <= 1e-12:
            shared[e] = 1.0
    return shared, np.ascontiguousarray(bv)


def pattern_equirect(cos_el, sin_el, cos_az, sin_az, R_head_view, R_eye_head, eye_params, b_eye,
                     lut, pick, out, cubes=None):
    """Signal on an equirectangular grid whose directions are in the view frame.

    ``out`` (H, W) float64 is filled; NaN where no eye sees.
    """
    lut, cubes = _tables(eye_params, lut, cubes)
    R_eye_view = _fold(R_eye_head, R_head_view)
    shared, bv = _shared_group(R_eye_view, eye_params, b_eye)
    # the kernel writes rows in place, which needs a C-contiguous float64 array
    dest = out if (out.flags.c_contiguous and out.dtype == np.float64) else np.empty(out.shape)
    _pattern_equirect(cos_el, sin_el, cos_az, sin_az, R_head_view, R_eye_view, eye_params, b_eye,
                      shared, bv, lut, cubes, pick, dest, get_num_threads())
    if dest is not out:
        out[...] = dest


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
    R_eye_view = _fold(R_eye_head, R_head_view)
    shared, bv = _shared_group(R_eye_view, eye_params, b_eye)
    _composite_world_aligned(scene, cos_el, sin_el, cos_az, sin_az, R_head_view, R_eye_view,
                             eye_params, b_eye, shared, bv, lut, cubes, pick, inv_mean, gain,
                             outside, dest, get_num_threads())
    if dest is not out:
        out[...] = dest
