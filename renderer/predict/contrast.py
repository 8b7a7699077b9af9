"""Pattern contrast in each eye: Michelson, RMS, peak-to-peak, and visibility against a threshold.

The pattern is taken on a uniform scene, as the rendering pipeline composites it:
intensity I = 1 + m with m = gain·(s/⟨s⟩ − 1), ⟨s⟩ the layout's visual-field mean
(:func:`renderer.pipeline.render_signal`), over the directions each eye sees on a
head-frame equirectangular grid, solid-angle weighted.  Visibility compares the
largest Weber contrast |I − Ī|/Ī in the eye with a threshold the user gives; the
default 0.01 (1 % Weber contrast, the usual rule of thumb for large stimuli seen by
humans) is common practice, no source, and says nothing about any animal's vision.
"""

from __future__ import annotations

import numpy as np

from .. import pipeline
from ..errors import check_range
from ..views import HeadPanorama

#: Weber-contrast threshold used unless the user gives one (common practice, no source).
DEFAULT_THRESHOLD = 0.01


def eye_contrast(field, pose, layout, response, gain, product="singlet", threshold=DEFAULT_THRESHOLD,
                 width=360) -> dict:
    """Contrast figures per eye.

    Returns
    -------
    dict eye name -> dict with ``michelson``, ``rms`` (weighted std/mean),
    ``peak_to_peak`` (max m − min m), ``weber_max`` and ``visible`` (weber_max ≥
    threshold, as 1.0/0.0), ``threshold``.
    """
    thr = check_range("contrast threshold", threshold, 0.0, None, lo_open=True,
                      unit="(Weber contrast, fraction)")
    out = {}
    for k, eye in enumerate(layout.eyes):
        view = HeadPanorama(width, pick=k)
        s, mean = pipeline.render_signal(field, pose, layout, response, view, product)
        seen = ~np.isnan(s)
        w = view.solid_angle()[seen]
        m = gain * (s[seen] / mean - 1.0)
        inten = 1.0 + m
        ibar = float(np.sum(w * inten) / np.sum(w))
        rms = float(np.sqrt(np.sum(w * (inten - ibar) ** 2) / np.sum(w)) / ibar)
        mx, mn = float(inten.max()), float(inten.min())
        weber = float(np.max(np.abs(inten - ibar)) / ibar)
        out[eye.name] = {"michelson": (mx - mn) / (mx + mn) if mx + mn > 0 else 0.0,
                         "rms": rms, "peak_to_peak": float(m.max() - m.min()),
                         "weber_max": weber, "visible": 1.0 if weber >= thr else 0.0,
                         "threshold": thr}
    return out


__all__ = ["eye_contrast", "DEFAULT_THRESHOLD"]
