"""Colour handling and the final compositing step, in linear light.

The sRGB transfer functions follow IEC 61966-2-1: decode L = V/12.92 for
V ≤ 0.04045, else ((V + 0.055)/1.055)^2.4; encode V = 12.92·L for L ≤ 0.0031308,
else 1.055·L^(1/2.4) − 0.055.  Images are float32 H×W×C in [0, 1] inside; all
arithmetic is on linear values, never on code values.  The modulation itself is
computed by :mod:`renderer.kernels`; this module holds the conversions, the
pattern-only maps and the 8-/16-bit quantisation.
"""

from __future__ import annotations

import numpy as np

SRGB_DECODE_BREAK = 0.04045
SRGB_ENCODE_BREAK = 0.0031308


def srgb_to_linear(v) -> np.ndarray:
    """Decode sRGB code values in [0, 1] to linear light (IEC 61966-2-1)."""
    v = np.asarray(v, dtype=np.float64)
    return np.where(v <= SRGB_DECODE_BREAK, v / 12.92, ((v + 0.055) / 1.055) ** 2.4)


def linear_to_srgb(lin) -> np.ndarray:
    """Encode linear light in [0, 1] to sRGB code values (IEC 61966-2-1)."""
    lin = np.clip(np.asarray(lin, dtype=np.float64), 0.0, 1.0)
    return np.where(lin <= SRGB_ENCODE_BREAK, 12.92 * lin, 1.055 * lin ** (1.0 / 2.4) - 0.055)


def to_uint8_srgb(lin) -> np.ndarray:
    """Linear float image -> 8-bit sRGB (rounded)."""
    return np.round(linear_to_srgb(lin) * 255.0).astype(np.uint8)


def to_uint16_linear(lin) -> np.ndarray:
    """Linear float image -> 16-bit linear values (rounded, no transfer function)."""
    return np.round(np.clip(np.asarray(lin, np.float64), 0.0, 1.0) * 65535.0).astype(np.uint16)


def from_uint8_srgb(img) -> np.ndarray:
    """8-bit sRGB image -> linear float32 in [0, 1] (exact table lookup)."""
    table = srgb_to_linear(np.arange(256) / 255.0).astype(np.float32)
    return table[np.asarray(img, dtype=np.uint8)]


def modulation_map(signal, mean, gain):
    """m = gain·(s/mean − 1), NaN where the signal is NaN (unseen)."""
    return gain * (np.asarray(signal, float) / mean - 1.0)


def pattern_grey(signal, mean, gain, grey=0.5) -> np.ndarray:
    """The pattern alone on a uniform grey field of linear luminance ``grey``.

    Returns (H, W, 3) float32 linear light; unseen pixels are black.  This is the
    composite onto a uniform scene, so it is photometrically meaningful.
    """
    m = modulation_map(signal, mean, gain)
    lum = np.where(np.isnan(m), 0.0, np.clip(grey * (1.0 + m), 0.0, 1.0))
    return np.repeat(lum[..., None], 3, axis=-1).astype(np.float32)


def pattern_stretched(signal) -> np.ndarray:
    """The pattern stretched to the full grey range for inspection (not photometric).

    Returns (H, W, 3) float32 *display* values to be encoded as they are: the
    minimum over seen pixels maps to 0, the maximum to 1; unseen pixels are black.
    """
    s = np.asarray(signal, float)
    seen = ~np.isnan(s)
    if not seen.any():
        return np.zeros(s.shape + (3,), np.float32)
    lo, hi = np.nanmin(s), np.nanmax(s)
    v = np.zeros_like(s) if hi - lo <= 0 else (s - lo) / (hi - lo)
    lin = srgb_to_linear(np.where(seen, v, 0.0))
    return np.repeat(lin[..., None], 3, axis=-1).astype(np.float32)
