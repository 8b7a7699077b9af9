"""Prefiltered scene lookups: a mipmap pyramid of the scene and footprint-driven sampling.

For: anti-aliased reads of a 2:1 world-panorama scene by views whose pixels do not
coincide with the scene's texels.  The pyramid (Williams 1983, "Pyramidal parametrics",
SIGGRAPH) is built once per scene in linear light by exact area averaging (each level
halves both sides, rounding up); a pixel's footprint on the scene is the image of the
unit pixel square under the Jacobian J of the view's pixel → scene-texel mapping (two
columns: the texel steps of one pixel step right and one pixel step down).  Its
singular values s1 ≥ s2 are the axes of the footprint ellipse (Heckbert 1989,
"Fundamentals of texture mapping and image warping", ch. 3); near the poles of the
equirectangular scene, where longitude is compressed, the ellipse gets long along the
rows.  The filter takes N = ⌈s1 / max(s2, 1)⌉ (at most ``ntaps_max``) trilinear taps
spread evenly along the major axis, each with footprint w = max(s1/N, s2) (the
"Feline" scheme: McCormack, Perry, Farkas and Jouppi 1999, SIGGRAPH), and picks the
levels from w: where w ≤ 1 texel the scene is magnified and a tap is the plain bilinear
read of level 0.  ``ntaps_max = 1`` is the isotropic trilinear mipmap (w = s1).

Level blend: linear in w between the two levels whose texel sizes bracket it (continuous
in w; the usual log₂ blend differs by at most 0.086 in the weight).  Level l's texel is
``scale[l]`` level-0 texels; a level-l texel averages a box of that width and the
bilinear read adds a tent of the same width, so each tap's filter has variance
scale²/4 per axis while the pixel's box footprint has w²/12: :data:`LOD_SCALE` = 1/√3
shrinks w so the two match.

Not for: views whose grid is the scene's own (no resampling, nothing to filter), or
the signal (the pattern is supersampled separately, by the pipeline).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numba import njit

from .leaf import FASTMATH

#: Filters a view can ask for: the plain bilinear read, the isotropic trilinear mipmap,
#: and the anisotropic mipmap (taps along the footprint's major axis).
FILTERS = ("mipmap", "trilinear", "bilinear")
#: Largest number of taps along the major axis of the anisotropic filter.
NTAPS_MAX = 8
#: Footprints whose major axis is at most this many texels are one level-0 bilinear read
#: under every filter: one tap (s1 ≤ max(s2, 1)) with w = s1, w·LOD_SCALE < 1.
SIMPLE_S1 = 1.0
#: Footprint width → level: variance of the box pixel footprint (w²/12) equated to that
#: of a level's box-plus-tent filter (scale²/4): scale = w/√3 (see the module notes).
LOD_SCALE = 1.0 / math.sqrt(3.0)


def ntaps_for(filter_name):
    """Largest tap count of a filter (0: plain bilinear, no pyramid)."""
    return {"mipmap": NTAPS_MAX, "trilinear": 1, "bilinear": 0}[filter_name]


def _halve_axis(a, axis, n_out):
    """Exact area averages of ``a`` along ``axis`` into ``n_out`` equal cells: the
    cumulative sum of the piecewise-constant rows, linearly interpolated at the cell
    edges, differenced and divided by the cell width."""
    n = a.shape[axis]
    a = np.moveaxis(a, axis, 0)
    cs = np.concatenate([np.zeros((1,) + a.shape[1:]), np.cumsum(a, axis=0)], axis=0)
    edges = np.linspace(0.0, n, n_out + 1)
    k = np.minimum(edges.astype(np.int64), n - 1)
    f = (edges - k).reshape((-1,) + (1,) * (a.ndim - 1))
    at = cs[k] + f * (cs[k + 1] - cs[k])
    out = (at[1:] - at[:-1]) / (n / n_out)
    return np.moveaxis(out, 0, axis)


@dataclass(frozen=True)
class Pyramid:
    """A scene's mipmap pyramid as the kernels read it.

    Attributes
    ----------
    flat : ndarray, (total,) float32
        Every level's (H_l, W_l, C) pixels, level 0 first, C-order, concatenated.
    levels : ndarray, (L, 3) int64
        Per level: offset into ``flat``, H_l, W_l.
    scale : ndarray, (L,) float64
        Texel size of each level in level-0 texels, √((W_0/W_l)·(H_0/H_l)).
    channels : int
    """

    flat: np.ndarray
    levels: np.ndarray
    scale: np.ndarray
    channels: int

    @property
    def shape(self):
        """(H_0, W_0, C) of level 0."""
        return (int(self.levels[0, 1]), int(self.levels[0, 2]), self.channels)

    def level(self, l) -> np.ndarray:
        """Level ``l`` as an (H_l, W_l, C) view."""
        off, h, w = (int(x) for x in self.levels[l])
        return self.flat[off:off + h * w * self.channels].reshape(h, w, self.channels)


def build_pyramid(image) -> Pyramid:
    """Mipmap pyramid of an (H, W, C) linear-light image down to 1 × 1: each level halves
    both sides (rounding up) and holds exact area averages of level 0 over its cells
    (float64 sums, stored as float32).

    Parameters
    ----------
    image : array_like, (H, W, C)
        Linear light (never average sRGB codes).

    Returns
    -------
    Pyramid
    """
    img = np.asarray(image)
    if img.ndim != 3:
        raise ValueError(f"build_pyramid needs an (H, W, C) image, got shape {img.shape}")
    src = img.astype(np.float64)
    cur = src
    levels = [np.ascontiguousarray(img, dtype=np.float32)]
    while cur.shape[0] > 1 or cur.shape[1] > 1:
        h, w = cur.shape[:2]
        nh, nw = (h + 1) // 2, (w + 1) // 2
        # halving the previous level is exact only where its cells nest in the new ones
        # (even sides); otherwise average level 0 over the new cells directly
        base = cur if (h == 2 * nh or h == 1) and (w == 2 * nw or w == 1) else src
        cur = _halve_axis(base, 0, nh) if base.shape[0] != nh else base
        cur = _halve_axis(cur, 1, nw) if cur.shape[1] != nw else cur
        levels.append(cur.astype(np.float32))
    H0, W0 = img.shape[:2]
    meta = np.empty((len(levels), 3), np.int64)
    off = 0
    for l, lv in enumerate(levels):
        meta[l] = (off, lv.shape[0], lv.shape[1])
        off += lv.size
    flat = np.concatenate([lv.reshape(-1) for lv in levels])
    scale = np.sqrt((W0 / meta[:, 2]) * (H0 / meta[:, 1])).astype(np.float64)
    flat.setflags(write=False)
    return Pyramid(flat, meta, scale, int(img.shape[2]))


# ---------------------------------------------------------------------------
# compiled helpers (inlined into the sampling kernels)
# ---------------------------------------------------------------------------

def pyramid_args(scene, pyramid, ntaps_max):
    """The pyramid arrays the kernels with a footprint filter take (placeholders for the bilinear path), checked
    against the scene they stand for."""
    nt = int(ntaps_max) if pyramid is not None else 0
    if nt <= 0:
        return _NO_PYR_FLAT, _NO_PYR_LEVELS, _NO_PYR_SCALE, 0
    if tuple(pyramid.shape) != tuple(scene.shape):
        raise ValueError(f"the pyramid is of a {pyramid.shape} image, the scene is {scene.shape}")
    return pyramid.flat, pyramid.levels, pyramid.scale, nt


_NO_PYR_FLAT = np.zeros(1, np.float32)
_NO_PYR_LEVELS = np.zeros((1, 3), np.int64)
_NO_PYR_SCALE = np.ones(1)


@njit(cache=True, inline="always", fastmath=FASTMATH, error_model="numpy")
def _level_bilinear(flat, off, Hl, Wl, C, x, y, wt, acc):
    """Add ``wt`` × the bilinear read of one level at continuous level-l pixel coords
    (x, y) (pixel j spans [j, j+1); x wraps, y clamps, as the plain bilinear path)."""
    xs = x - 0.5
    ys = y - 0.5
    ys = 0.0 if ys < 0.0 else (Hl - 1.0 if ys > Hl - 1.0 else ys)
    x0f = math.floor(xs)
    fx = xs - x0f
    x0 = int(x0f - Wl * math.floor(x0f / Wl))
    x0 = 0 if x0 >= Wl else x0
    x1 = x0 + 1
    x1 = 0 if x1 >= Wl else x1
    y0 = int(ys)
    top = Hl - 2 if Hl > 1 else 0
    y0 = top if y0 > top else y0
    fy = ys - y0
    y1 = y0 + 1 if Hl > 1 else 0
    rowlen = Wl * C
    o00 = off + y0 * rowlen + x0 * C
    o01 = off + y0 * rowlen + x1 * C
    o10 = off + y1 * rowlen + x0 * C
    o11 = off + y1 * rowlen + x1 * C
    w00 = (1.0 - fx) * (1.0 - fy) * wt
    w01 = fx * (1.0 - fy) * wt
    w10 = (1.0 - fx) * fy * wt
    w11 = fx * fy * wt
    for c in range(C):
        acc[c] += (flat[o00 + c] * w00 + flat[o01 + c] * w01 + flat[o10 + c] * w10
                   + flat[o11 + c] * w11)


@njit(cache=True, inline="always", fastmath=FASTMATH, error_model="numpy")
def _mip_tap(flat, levels, scale, C, x, y, w, wt, acc):
    """Add ``wt`` × one trilinear tap of footprint width ``w`` (level-0 texels) at
    level-0 coords (x, y): the two levels whose texel sizes bracket w·LOD_SCALE,
    blended linearly in it; level 0 alone (bilinear) below one texel, the top level
    alone above its size."""
    L = levels.shape[0]
    W0 = levels[0, 2]
    H0 = levels[0, 1]
    s = w * LOD_SCALE
    if s <= 1.0 or L == 1:
        _level_bilinear(flat, 0, H0, W0, C, x, y, wt, acc)
        return
    l = 0
    while l + 1 < L and scale[l + 1] <= s:
        l += 1
    if l + 1 >= L:
        off, Hl, Wl = levels[l, 0], levels[l, 1], levels[l, 2]
        _level_bilinear(flat, off, Hl, Wl, C, x * (Wl / W0), y * (Hl / H0), wt, acc)
        return
    f = (s - scale[l]) / (scale[l + 1] - scale[l])
    off, Hl, Wl = levels[l, 0], levels[l, 1], levels[l, 2]
    _level_bilinear(flat, off, Hl, Wl, C, x * (Wl / W0), y * (Hl / H0), wt * (1.0 - f), acc)
    off, Hl, Wl = levels[l + 1, 0], levels[l + 1, 1], levels[l + 1, 2]
    _level_bilinear(flat, off, Hl, Wl, C, x * (Wl / W0), y * (Hl / H0), wt * f, acc)


@njit(cache=True, inline="always", fastmath=FASTMATH, error_model="numpy")
def _mip_pixel(flat, levels, scale, C, ntaps_max, x, y, ax, ay, bx, by, acc):
    """The filtered scene value of one pixel into ``acc`` (C,), zeroed here.

    (x, y): level-0 continuous coords of the pixel centre; (ax, ay), (bx, by): the
    Jacobian's columns (texel steps of one pixel step right and down).  The footprint
    ellipse's axes are the singular values of J, from the eigenvalues of J·Jᵀ; its major
    direction is that matrix's leading eigenvector.  The major axis is capped at the
    scene's width (at a pole a pixel can span every longitude).
    """
    for c in range(C):
        acc[c] = 0.0
    p = ax * ax + bx * bx
    r = ay * ay + by * by
    q = ax * ay + bx * by
    m = 0.5 * (p + r)
    d = 0.5 * (p - r)
    h = math.sqrt(d * d + q * q)
    s1 = math.sqrt(m + h)
    l2 = m - h
    s2 = math.sqrt(l2) if l2 > 0.0 else 0.0
    cap = float(levels[0, 2])
    s1 = cap if s1 > cap else s1
    s2 = s1 if s2 > s1 else s2
    n = 1
    if ntaps_max > 1:
        ratio = s1 / (s2 if s2 > 1.0 else 1.0)
        n = int(math.ceil(ratio - 1e-9))
        n = 1 if n < 1 else (ntaps_max if n > ntaps_max else n)
    if n == 1:
        _mip_tap(flat, levels, scale, C, x, y, s1, 1.0, acc)
        return
    # leading eigenvector of [[p, q], [q, r]]: (λ1 − r, q) or (q, λ1 − p), the longer
    lam = m + h
    ex, ey = (lam - r, q) if p >= r else (q, lam - p)
    en = math.sqrt(ex * ex + ey * ey)
    if en > 0.0:
        ex /= en
        ey /= en
    else:
        ex, ey = 1.0, 0.0
    w = s1 / n
    w = s2 if s2 > w else w
    wt = 1.0 / n
    for k in range(n):
        t = ((k + 0.5) / n - 0.5) * s1
        _mip_tap(flat, levels, scale, C, x + t * ex, y + t * ey, w, wt, acc)
