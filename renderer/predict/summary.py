"""Flat prediction metrics for one configuration: what ``magretina predict`` prints and
what studies store per shot (metrics.csv, NetCDF).

Keys are snake_case with units in the name where there is one (``crb_mean_deg``);
per-eye values carry the eye name as a suffix (``michelson_left``).  All values are
floats so they fit a table.  This module composes the others; it computes nothing
new.
"""

from __future__ import annotations

import numpy as np

from ..mosaic import MosaicSpec, build_mosaic
from .contrast import DEFAULT_THRESHOLD, eye_contrast
from .fisher import fisher_information, make_setup
from .noise import CountModel
from .signature import compass_signature


def predict_summary(field, pose, layout, response, spec: MosaicSpec = None,
                    counts: CountModel = None, product="singlet", headings_deg=None,
                    threshold=DEFAULT_THRESHOLD, mosaic=None):
    """All prediction metrics for one configuration.

    Returns
    -------
    metrics : dict of str -> float
    fisher : FisherResult (over ``headings_deg``, default every 2°)
    """
    spec = spec or MosaicSpec()
    counts = counts or CountModel()
    mosaic = mosaic if mosaic is not None else build_mosaic(layout, spec)
    hd = np.arange(0.0, 360.0, 2.0) if headings_deg is None else np.asarray(headings_deg, float)
    kw = dict(pitch_deg=pose.pitch_deg, roll_deg=pose.roll_deg, product=product)
    fr = fisher_information(field, layout, response, mosaic, counts, hd, **kw)
    at = fisher_information(field, layout, response, mosaic, counts, [pose.yaw_deg], **kw)
    st = make_setup(field, layout, response, mosaic, counts, **kw)
    m = {"n_receptors": float(mosaic.n_receptors), "n_pools": float(mosaic.n_pools),
         "min_mean_count": fr.min_count,
         "fisher_at_yaw_per_rad2": float(at.J[0]), "crb_at_yaw_deg": float(at.crb_deg[0]),
         "crb_mean_deg": fr.mean_crb_deg, "crb_rms_deg": fr.rms_crb_deg,
         "crb_min_deg": float(np.min(fr.crb_deg)), "crb_max_deg": float(np.max(fr.crb_deg))}
    crb_eye = fr.crb_eye_deg
    for k, name in enumerate(fr.eye_names):
        m[f"crb_mean_deg_{name}"] = float(np.mean(crb_eye[:, k]))
    m.update(compass_signature(st))
    for name, c in eye_contrast(field, pose, layout, response, counts.gain, product,
                                threshold).items():
        for key in ("michelson", "rms", "peak_to_peak", "weber_max", "visible"):
            m[f"{key}_{name}"] = float(c[key])
    m["contrast_threshold"] = float(threshold)
    return m, fr


__all__ = ["predict_summary"]
