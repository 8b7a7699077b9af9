"""Display codes by threshold tables, and the luminance images of the display metrics.

For: the quantisation of every frame file and of the display metrics' pattern stimulus.
A display's code for a relative linear value v is a non-decreasing step function of v,
so it is fully described by the smallest input at which each code starts (its
*threshold*).  :func:`threshold_codes` finds a value's code from a bucket table (the
code at the start of each of ``nb`` equal buckets of [0, 1], and the next threshold)
with one comparison, in a loop without branches that LLVM vectorises, instead of
evaluating the transfer function (a power and a branch per value).  With thresholds
computed from the reference transfer itself (see
:meth:`renderer.display.Display.code_thresholds`) the codes are the reference's, bit
for bit, for every float32 input; :func:`dither_codes` does the same for the
truncating dither methods, whose code position also needs the fraction of the
luminance step.  The metric helpers at the end compute the luminance images of
:func:`renderer.display.displayed_stats` with the same float64 operations as NumPy, in
one pass each.  Not for: building the tables (that needs the display model), float64
inputs (their thresholds would differ) or NaN (reported; the caller falls back).
"""

from __future__ import annotations

import math

from dataclasses import dataclass

import numpy as np
from llvmlite import ir
from numba import njit, types
from numba.extending import intrinsic


@dataclass(frozen=True)
class CodeTable:
    """A display's codes 0 .. K as a step function of the float32 input, for the kernels.

    Attributes
    ----------
    thr : (K + 2,) float32: thr[0] = −inf, thr[k] the smallest float32 in [0, 1] whose
        code is at least k (+inf where none is), thr[K + 1] = +inf
    start : (nb,) uint8 or uint16, the code of b / nb for each of nb equal buckets of [0, 1]
    step : (nb,) float32, thr[start[b] + 1], the next threshold after a bucket's start
    multi : (nb,) bool or None, buckets holding more than one threshold (None: none does)
    """

    thr: np.ndarray
    start: np.ndarray
    step: np.ndarray
    multi: np.ndarray | None

    @classmethod
    def from_thresholds(cls, thr, nb):
        """The bucket tables of thresholds ``thr`` (as the attribute) on ``nb`` buckets."""
        t = np.asarray(thr[1:-1], np.float64)
        edges = np.arange(nb + 1, dtype=np.float64) / nb
        below = np.searchsorted(t, edges, side="right")  # thresholds <= each bucket edge
        start = below[:-1]
        dtype = np.uint8 if t.size < 256 else np.uint16
        step = np.asarray(thr, np.float32)[start + 1]
        # thresholds inside (b/nb, (b+1)/nb], counting one exactly at the upper edge too
        # (only the last bucket holds its upper edge, 1.0; elsewhere this is conservative)
        multi = below[1:] - start >= 2
        arrays = [np.ascontiguousarray(thr, np.float32), start.astype(dtype), step,
                  multi if multi.any() else None]
        for a in arrays:
            if a is not None:
                a.setflags(write=False)
        return cls(*arrays)


@njit(cache=True)
def _round_codes(x, start, step, nb, out):
    # One pass without branches, which LLVM vectorises: clip, bucket, one comparison.
    bad = 0
    nbf = np.float32(nb)
    for i in range(x.shape[0]):
        v = x[i]
        bad += v != v
        v = v if v > np.float32(0.0) else np.float32(0.0)  # NaN -> 0 (reported)
        v = v if v < np.float32(1.0) else np.float32(1.0)
        b = min(int(v * nbf), nb - 1)
        out[i] = start[b] + (v >= step[b])
    return bad


@njit(cache=True)
def _multi_codes(x, thr, start, multi, nb, out):
    # The buckets with several thresholds (the steep start of a power law): walk them.
    nbf = np.float32(nb)
    for i in range(x.shape[0]):
        v = x[i]
        v = v if v > np.float32(0.0) else np.float32(0.0)
        v = v if v < np.float32(1.0) else np.float32(1.0)
        b = min(int(v * nbf), nb - 1)
        if multi[b]:
            c = np.int64(start[b])
            while v >= thr[c + 1]:
                c += 1
            out[i] = c


@njit(cache=True)
def _dither_codes(x, nc, t, thr, start, nb, g, top, out):
    nbf = np.float32(nb)
    for i in range(x.shape[0]):
        v = x[i]
        if v != v:
            return i
        v = v if v > np.float32(0.0) else np.float32(0.0)
        v = v if v < np.float32(1.0) else np.float32(1.0)
        b = min(int(v * nbf), nb - 1)
        k = np.int64(start[b])
        while v >= thr[k + 1]:
            k += 1
        lo = g[k]
        # The reference's code position k + clip((v − g[k]) / (g[k+1] − g[k]), 0, 1),
        # in the same float64 operations, then floor(c + t) clipped to the code range.
        p = (np.float64(v) - lo) / (g[k + 1] - lo)
        if p < 0.0:
            p = 0.0
        elif p > 1.0:
            p = 1.0
        q = math.floor((k + p) + t[i // nc])
        if q < 0.0:
            q = 0.0
        elif q > top:
            q = top
        out[i] = int(q)
    return -1


def threshold_codes(lin, table, out) -> bool:
    """Codes of a float32 image by a threshold table.

    Parameters
    ----------
    lin : float32 array, any shape, C-contiguous; values are clipped to [0, 1]
    table : CodeTable of the rounded codes
    out : uint8 or uint16 C-contiguous array of lin's size, written

    Returns
    -------
    False if ``lin`` holds NaN (``out`` is then not the reference's), else True
    """
    x, o = lin.reshape(-1), out.reshape(-1)
    nb = table.start.shape[0]
    if _round_codes(x, table.start, table.step, nb, o):
        return False
    if table.multi is not None:
        _multi_codes(x, table.thr, table.start, table.multi, nb, o)
    return True


def dither_codes(lin, t, table, g, out) -> bool:
    """Codes of a float32 image under a truncating dither: floor(k + p + t) clipped.

    Parameters
    ----------
    lin : float32 (H, W, C) or (H, W), C-contiguous
    t : (H, W) float64 thresholds in [0, 1), shared by a pixel's channels
    table : CodeTable of the truncated code position k
    g : (n,) float64, the display's relative luminance at every code
    out : uint8 or uint16 array of lin's shape, written

    Returns
    -------
    False if ``lin`` holds NaN, else True
    """
    nc = lin.shape[2] if lin.ndim == 3 else 1
    tt = np.ascontiguousarray(t, np.float64).reshape(-1)
    return _dither_codes(lin.reshape(-1), nc, tt, table.thr, table.start,
                         table.start.shape[0], g, float(g.shape[0] - 1), out.reshape(-1)) < 0


# ---------------------------------------------------------------------------
# luminance images of the display metrics (same float64 operations as NumPy's)
# ---------------------------------------------------------------------------

@njit(cache=True, inline="always")
def _clip_unit(v):
    """NumPy's clip to [0, 1] for one value (max then min, each keeping its first
    argument unless the other is strictly beyond it): NaN stays NaN (both comparisons
    are false), −0.0 stays −0.0.  Two selects, no branch."""
    v = 0.0 if v < 0.0 else v
    return 1.0 if 1.0 < v else v


@njit(cache=True)
def _clip_unit_f64(x, out):
    for i in range(x.shape[0]):
        out[i] = _clip_unit(np.float64(x[i]))


def clip_unit_float64(lin) -> np.ndarray:
    """``np.clip(np.asarray(lin, np.float64), 0, 1)`` of a float32 array, the same values
    (NaN kept) in one pass."""
    src = np.ascontiguousarray(lin)
    out = np.empty(src.shape, np.float64)
    _clip_unit_f64(src.reshape(-1), out.reshape(-1))
    return out


@njit(cache=True)
def _code_luminance(codes, lut, black, out):
    for i in range(out.shape[0]):
        out[i] = ((black + lut[0, codes[3 * i]]) + lut[1, codes[3 * i + 1]]) \
            + lut[2, codes[3 * i + 2]]


def code_luminance(codes, lut, black) -> np.ndarray:
    """Luminance of integer codes (..., 3): black + lut[0, r] + lut[1, g] + lut[2, b],
    added in that order (as the NumPy expression does), shape (...)."""
    c = np.ascontiguousarray(codes)
    out = np.empty(c.shape[:-1], np.float64)
    _code_luminance(c.reshape(-1), np.ascontiguousarray(lut, np.float64), float(black),
                    out.reshape(-1))
    return out


@njit(cache=True)
def _grey_pattern(s, mean, gain, grey, out):
    for i in range(s.shape[0]):
        m = gain * (s[i] / mean - 1.0)
        v = 0.0 if m != m else _clip_unit(grey * (1.0 + m))
        out[i] = np.float32(v)


def grey_pattern(signal, mean, gain, grey) -> np.ndarray:
    """One channel of :func:`renderer.composite.pattern_grey`: float32 (H, W) of
    clip(grey·(1 + gain·(s/mean − 1)), 0, 1), 0 where the signal is NaN, computed with
    the same float64 operations in the same order."""
    s = np.ascontiguousarray(signal, np.float64)
    out = np.empty(s.shape, np.float32)
    _grey_pattern(s.reshape(-1), float(mean), float(gain), float(grey), out.reshape(-1))
    return out


# ---------------------------------------------------------------------------
# the display metrics' statistics, with NumPy's own summation
# ---------------------------------------------------------------------------

@intrinsic
def _fma(typingctx, a, b, c):
    """Fused multiply-add a·b + c with one rounding (LLVM's llvm.fma)."""
    sig = types.float64(types.float64, types.float64, types.float64)

    def codegen(context, builder, signature, args):
        d = ir.DoubleType()
        fn = builder.module.declare_intrinsic("llvm.fma", [d], ir.FunctionType(d, [d, d, d]))
        return builder.call(fn, args)

    return sig, codegen


@njit(cache=True, inline="always")
def _pairwise_leaf(a, lo, n):
    """NumPy's sum of a block of at most 128 values (eight accumulators)."""
    if n < 8:
        res = 0.0
        for i in range(lo, lo + n):
            res += a[i]
        return res
    r0, r1, r2, r3 = a[lo], a[lo + 1], a[lo + 2], a[lo + 3]
    r4, r5, r6, r7 = a[lo + 4], a[lo + 5], a[lo + 6], a[lo + 7]
    m = n - n % 8
    i = 8
    while i < m:
        j = lo + i
        r0 += a[j]
        r1 += a[j + 1]
        r2 += a[j + 2]
        r3 += a[j + 3]
        r4 += a[j + 4]
        r5 += a[j + 5]
        r6 += a[j + 6]
        r7 += a[j + 7]
        i += 8
    res = ((r0 + r1) + (r2 + r3)) + ((r4 + r5) + (r6 + r7))
    while i < n:
        res += a[lo + i]
        i += 1
    return res


@njit(cache=True)
def _pairwise(a, lo, n):
    """NumPy's pairwise sum of a[lo:lo + n] (float64 ``add.reduce`` of a contiguous
    array: blocks of at most 128 summed by :func:`_pairwise_leaf`, longer runs split in
    halves whose first is a multiple of 8, the halves' sums added), so that the sums
    equal ``np.sum`` bit for bit.  The recursion is unrolled onto a stack: numba's cache
    cannot hold a recursive function."""
    if n <= 128:
        return _pairwise_leaf(a, lo, n)
    s_lo = np.empty(64, np.int64)
    s_n = np.empty(64, np.int64)
    s_stage = np.empty(64, np.int64)
    vals = np.empty(64)
    nv = 0
    top = 0
    s_lo[0], s_n[0], s_stage[0] = lo, n, 0
    while top >= 0:
        lo_t, n_t = s_lo[top], s_n[top]
        if n_t <= 128:
            vals[nv] = _pairwise_leaf(a, lo_t, n_t)
            nv += 1
            top -= 1
            continue
        n2 = n_t // 2
        n2 -= n2 % 8
        stage = s_stage[top]
        if stage == 2:  # both halves summed
            vals[nv - 2] = vals[nv - 2] + vals[nv - 1]
            nv -= 1
            top -= 1
            continue
        s_stage[top] = stage + 1
        top += 1
        s_lo[top] = lo_t if stage == 0 else lo_t + n2
        s_n[top] = n2 if stage == 0 else n_t - n2
        s_stage[top] = 0
    return vals[0]


@njit(cache=True)
def _moments(a, n, dev):
    """(mean, max, min, variance) of a[:n] as ``a.mean()``, ``a.max()``, ``a.min()`` and
    ``a.var()`` compute them (NaN if any value is NaN); ``dev`` (n,) scratch."""
    mean = _pairwise(a, 0, n) / n
    hi = a[0]
    lo = a[0]
    nan = 0
    for i in range(n):
        v = a[i]
        nan += v != v
        hi = v if v > hi else hi
        lo = v if v < lo else lo
        d = v - mean
        dev[i] = d * d
    if nan:
        hi = lo = np.nan
    return mean, hi, lo, _pairwise(dev, 0, n) / n


@njit(cache=True)
def _luminance_moments(x, nc, codes, cc, mask, w, lut, black, lum_i, lum_d, dev, out):
    """Intended and displayed luminance of the pixels of ``mask`` (all if its size is 0),
    compacted in pixel order, and their moments into out[0:4] and out[4:8]."""
    n = 0
    for p in range(lum_i.shape[0]):
        if mask.shape[0] and not mask[p]:
            continue
        # NumPy's clip of the float64 value, then the row of ``v @ w`` as NumPy's matmul
        # computes it here (OpenBLAS's gemv: fma(v2, w2, fma(v0, w0, v1·w1))).
        if nc == 3:
            v0 = _clip_unit(np.float64(x[3 * p]))
            v1 = _clip_unit(np.float64(x[3 * p + 1]))
            v2 = _clip_unit(np.float64(x[3 * p + 2]))
        else:
            v0 = v1 = v2 = _clip_unit(np.float64(x[p]))
        lum_i[n] = black + _fma(v2, w[2], _fma(v0, w[0], v1 * w[1]))
        if cc == 3:
            c0, c1, c2 = codes[3 * p], codes[3 * p + 1], codes[3 * p + 2]
        else:
            c0 = c1 = c2 = codes[p]
        lum_d[n] = ((black + lut[0, c0]) + lut[1, c1]) + lut[2, c2]
        n += 1
    if n == 0:
        return 0
    out[0], out[1], out[2], out[3] = _moments(lum_i, n, dev)
    out[4], out[5], out[6], out[7] = _moments(lum_d, n, dev)
    return n


def luminance_moments(lin, codes, w, lut, black, mask=None):
    """Moments of the intended and displayed luminance images of the display metrics.

    Parameters
    ----------
    lin : float32 (H, W, 3), or (H, W) for a grey image (all channels equal)
    codes : uint8 or uint16 (H, W, 3), or (H, W) for equal channels; every code below
        ``lut.shape[1]`` (not checked here)
    w : (3,) float64, each channel's luminance at full drive above black (cd/m²)
    lut : (3, n) float64, each channel's luminance above black at every code
    black : float, cd/m²
    mask : (H, W) bool or None, the pixels to summarise

    Returns
    -------
    (n, (8,) float64): the number of pixels, then (mean, max, min, variance) of
    ``black + clip(lin, 0, 1) @ w`` and of ``black + lut[0, r] + lut[1, g] + lut[2, b]``
    over them, equal to NumPy's ``mean``, ``max``, ``min`` and ``var`` of those arrays
    (for W >= 2: NumPy's matmul of a single-column image takes another path).
    """
    x = np.ascontiguousarray(lin).reshape(-1)
    c = np.ascontiguousarray(codes).reshape(-1)
    npx = lin.shape[0] * lin.shape[1]
    m = (np.zeros(0, np.bool_) if mask is None
         else np.ascontiguousarray(mask, np.bool_).reshape(-1))
    lum_i, lum_d, dev = np.empty(npx), np.empty(npx), np.empty(npx)
    out = np.full(8, np.nan)
    n = _luminance_moments(x, 3 if lin.ndim == 3 else 1, c, 3 if codes.ndim == 3 else 1, m,
                           np.ascontiguousarray(w, np.float64),
                           np.ascontiguousarray(lut, np.float64), float(black), lum_i, lum_d,
                           dev, out)
    return n, out
