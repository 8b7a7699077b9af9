"""Figure mode: a rendered frame with an annotation band, for papers and talks.

The band under the image holds a heading line (heading, view, eyes shown), a grey
scale bar of the modulation m = gain·(s/mean − 1) from its minimum to its maximum
over the seen field (labelled in percent; the bar's greys are the pattern's own
luminances on a mid-grey field, 1 + m), and the model-prediction caution.  A
figure is never a stimulus: its pixels are not a physical specification, its file
says so in a ``Warning`` chunk, and no stimulus path writes one.  This module only
draws (Pillow); it does not render or write files.
"""

from __future__ import annotations

import textwrap

import numpy as np
from PIL import Image, ImageDraw

from .composite import to_uint8_srgb

BAND_PX = 64


def annotate(u8, heading, eyes, m_range, caution, grey=0.5) -> np.ndarray:
    """The frame ``u8`` (H, W, 3) uint8 with an annotation band below it.

    Parameters
    ----------
    u8 : (H, W, 3) uint8 sRGB image
    heading : str, first line (e.g. "heading 30 deg, world panorama")
    eyes : sequence of eye names shown
    m_range : (m_min, m_max) modulation over the seen field (fractions)
    caution : str
    grey : relative linear luminance the scale bar's greys are drawn around

    Returns
    -------
    (H + band, W, 3) uint8; the band is at least ``BAND_PX`` high.
    """
    H, W = u8.shape[:2]
    # Pillow's default bitmap font is about 6 px per character and 11 px per line.
    lines = textwrap.wrap(caution, max(20, (W - 12) // 6))
    band = max(BAND_PX, 40 + 12 * len(lines))
    im = Image.new("RGB", (W, H + band), (24, 24, 24))
    im.paste(Image.fromarray(np.ascontiguousarray(u8[..., :3])), (0, 0))
    d = ImageDraw.Draw(im)
    y = H + 4
    d.text((6, y), f"{heading}; eyes: {', '.join(eyes)}", fill=(255, 255, 255))
    lo, hi = (float(m_range[0]), float(m_range[1])) if np.all(np.isfinite(m_range)) else (0.0, 0.0)
    bar_w = max(16, W // 3)
    ramp = np.linspace(lo, hi, bar_w)
    lum = np.clip(grey * (1.0 + ramp), 0.0, 1.0)
    bar = to_uint8_srgb(np.repeat(lum[None, :, None], 3, axis=2))
    bar = np.repeat(bar, 10, axis=0)
    by = y + 16
    im.paste(Image.fromarray(bar), (6, by))
    d.rectangle([5, by - 1, 6 + bar_w, by + 10], outline=(200, 200, 200))
    d.text((12 + bar_w, by - 1), f"modulation {100 * lo:+.2f} % .. {100 * hi:+.2f} %",
           fill=(255, 255, 255))
    for k, line in enumerate(lines):
        d.text((6, by + 16 + 12 * k), line, fill=(255, 210, 120))
    return np.asarray(im)
