"""Quantisers: continuous code positions of a display model -> integer code values.

Methods (``METHODS``):

* ``none``: round to the nearest code (numpy's round half to even), what the plain
  8-bit sRGB output has always done;
* ``noise``: the noisy-bit method (Allard & Faubert 2008, Behav. Res. Methods 40:735):
  add uniform noise of one code step before truncating, q = floor(c + u), u ~ U[0, 1).
  With c the luminance-linear position of :meth:`renderer.display.Display.linear_code`
  the expected displayed luminance equals the continuous target exactly, so
  modulations far below one code step survive on average (as noise of at most one
  step per pixel);
* ``ordered``: the same truncation with a Bayer threshold matrix (Bayer 1973, IEEE
  ICC 26:11-15; thresholds (k + 0.5)/256 of the 16 × 16 index matrix) in place of the
  random numbers, shifted by a seeded toroidal offset: less visible noise, the mean of
  any 16 × 16 block exact to 1/256 of a step, but a fixed texture.

One value per pixel is shared by the three channels, so a grey stays grey.  Every
method is reproducible from a seed; :func:`frame_seed` derives a frame's seed from
the shot's seed and, for ``temporal`` noise, the frame index (otherwise every frame
of a sequence gets the same pattern).  This module knows nothing of PNG files.
"""

from __future__ import annotations

import numpy as np

from .errors import MagretinaError
from .kernels.codes import dither_codes, threshold_codes

METHODS = ("none", "noise", "ordered")


def bayer_matrix(n: int = 16) -> np.ndarray:
    """The n × n Bayer index matrix (n a power of two), values 0 .. n² − 1.

    Recursion M_2n = [[4M, 4M + 2], [4M + 3, 4M + 1]] (Bayer 1973)."""
    m = np.zeros((1, 1), np.int64)
    while m.shape[0] < n:
        m = np.block([[4 * m, 4 * m + 2], [4 * m + 3, 4 * m + 1]])
    return m


_BAYER16 = (bayer_matrix(16) + 0.5) / 256.0


def frame_seed(seed: int, frame: int = 0, temporal: bool = True, view: int = 0) -> np.random.SeedSequence:
    """The dither seed of one frame: SeedSequence((seed, view, frame if temporal else 0))."""
    return np.random.SeedSequence((int(seed), int(view), int(frame) if temporal else 0))


def check_method(method, where="dither"):
    if method not in METHODS:
        raise MagretinaError(f"{where} = {method!r}: allowed {', '.join(METHODS)}")
    return method


def thresholds(shape, method, seed) -> np.ndarray:
    """(H, W) thresholds in [0, 1) for the truncating methods; ``seed`` a SeedSequence."""
    rng = np.random.default_rng(seed)
    H, W = shape
    if method == "noise":
        return rng.random((H, W))
    dy, dx = rng.integers(0, 16, size=2)
    iy = (np.arange(H) + dy) % 16
    ix = (np.arange(W) + dx) % 16
    return _BAYER16[iy[:, None], ix[None, :]]


def quantise(display, lin, method="none", seed=None) -> np.ndarray:
    """Integer codes of the display for a linear image.

    Parameters
    ----------
    display : renderer.display.Display
    lin : (H, W, 3) float, relative linear light in [0, 1] (clipped)
    method : "none" | "noise" | "ordered"
    seed : numpy.random.SeedSequence or int (required unless method is "none")

    Returns
    -------
    (H, W, 3) uint8 (8-bit display) or uint16 (10- and 16-bit), values 0 .. 2**bits − 1.
    """
    check_method(method)
    dtype = np.uint8 if display.bits == 8 else np.uint16
    lin = np.asarray(lin)
    if method != "none":
        if seed is None:
            raise MagretinaError(f"dither {method!r} needs a seed")
        if not isinstance(seed, np.random.SeedSequence):
            seed = np.random.SeedSequence(int(seed))
    table = (display.code_thresholds("round" if method == "none" else "floor")
             if lin.dtype == np.float32 and lin.ndim in (2, 3) else None)
    if table is not None:
        # The same codes as quantise_reference, by threshold tables (renderer.kernels.codes)
        out = np.empty(lin.shape, dtype)
        src = np.ascontiguousarray(lin)
        if method == "none":
            done = threshold_codes(src, table, out)
        else:
            t = thresholds(lin.shape[:2], method, seed)
            done = dither_codes(src, t, table, display.code_luminance(), out)
        if done:
            return out
    return quantise_reference(display, lin, method, seed)


def quantise_reference(display, lin, method="none", seed=None) -> np.ndarray:
    """:func:`quantise` evaluated with the display's transfer function in NumPy: the
    reference the threshold tables reproduce (and the path for float64 input, NaN,
    measured tables and 16-bit displays).  ``seed`` as :func:`quantise`."""
    check_method(method)
    dtype = np.uint8 if display.bits == 8 else np.uint16
    lin = np.asarray(lin)
    if method == "none":
        return np.round(display.continuous_code(lin)).astype(dtype)
    if seed is None:
        raise MagretinaError(f"dither {method!r} needs a seed")
    if not isinstance(seed, np.random.SeedSequence):
        seed = np.random.SeedSequence(int(seed))
    c = display.linear_code(lin)
    t = thresholds(lin.shape[:2], method, seed)
    q = np.floor(c + t[..., None]) if c.ndim == 3 else np.floor(c + t)
    return np.clip(q, 0, display.max_code).astype(dtype)
