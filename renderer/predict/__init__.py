"""Predictions: receptor counts, noise, heading information and contrast of a hypothesis.

These are numbers a model predicts under stated assumptions (a receptor mosaic, a
count model, a noise model), not measurements of any animal.  Submodules:
:mod:`.noise` (count and noise models), :mod:`.fisher` (Fisher information and
Cramér–Rao bound), :mod:`.estimate` (maximum-likelihood heading estimates),
:mod:`.signature` (inclination-compass signature), :mod:`.contrast` (pattern
contrast), :mod:`.noisy` (noisy receptor-level stimuli), :mod:`.summary` (the flat
metric dictionaries used by ``magretina predict`` and studies).
"""

import numpy as np

from ..errors import MagretinaError
from ..mosaic import MosaicSpec, build_mosaic
from .fisher import FisherResult, fisher_information, make_setup
from .noise import NOISE, CountModel, GaussianNoise, PoissonNoise, make_noise
from .summary import predict_summary

CAUTION = ("These are predictions of a model under stated assumptions (receptor mosaic, "
           "count and noise model, alignment hypothesis, response function), not "
           "measurements of any animal.")

__all__ = ["FisherResult", "fisher_information", "make_setup", "NOISE", "CountModel",
           "GaussianNoise", "PoissonNoise", "make_noise", "CAUTION"]


_MOSAICS = {}

#: Keys of ``[metrics.options.prediction]`` in a study file.
OPTION_KEYS = ("density", "unit", "method", "seed", "pool_radius_deg", "flux_per_s",
               "integration_ms", "luminance", "noise", "floor_counts", "heading_step_deg",
               "threshold")


def options_to_models(o, gain):
    """(MosaicSpec, CountModel) from a study's prediction options (see :func:`study_metrics`)."""
    bad = sorted(set(o) - set(OPTION_KEYS))
    if bad:
        raise MagretinaError(f"metrics.options.prediction: unknown key(s) {', '.join(bad)}; "
                             f"allowed: {', '.join(OPTION_KEYS)}")
    spec = MosaicSpec(density=o.get("density", 0.02), unit=o.get("unit", "deg2"),
                      method=o.get("method", "jittered"), seed=o.get("seed", 0),
                      pool_radius_deg=o.get("pool_radius_deg", 0.0))
    noise = make_noise("gaussian", floor_counts=o.get("floor_counts", 1.0)) \
        if o.get("noise", "poisson") == "gaussian" else make_noise(o.get("noise", "poisson"))
    counts = CountModel(flux_per_s=o.get("flux_per_s", 1.0e4),
                        integration_s=float(o.get("integration_ms", 100.0)) * 1e-3,
                        gain=gain, luminance=o.get("luminance", 1.0), noise=noise)
    return spec, counts


def study_metrics(ctx) -> dict:
    """Study metric provider (``[metrics] providers = ["prediction"]``).

    Options (``[metrics.options.prediction]``): ``density`` (default 0.02),
    ``unit`` ("deg2"), ``method`` ("jittered"), ``seed`` (0, fixed so every frame
    uses the same mosaic), ``pool_radius_deg`` (0), ``flux_per_s`` (1e4),
    ``integration_ms`` (100), ``luminance`` (1), ``noise`` ("poisson"),
    ``floor_counts`` (1), ``heading_step_deg`` (10), ``threshold`` (0.01).  The
    study's gain is the modulation gain.  Returns the flat dict of
    :func:`renderer.predict.summary.predict_summary` (its names do not clash with the
    basic provider's).
    """
    o = dict(getattr(ctx, "options", {}) or {})
    spec, counts = options_to_models(o, ctx.gain)
    key = (ctx.layout, spec)
    if key not in _MOSAICS:
        _MOSAICS.clear()  # one geometry at a time is enough for a worker
        _MOSAICS[key] = build_mosaic(ctx.layout, spec)
    step = float(o.get("heading_step_deg", 10.0))
    m, _ = predict_summary(ctx.field, ctx.pose, ctx.layout, ctx.response, spec, counts,
                           ctx.product, np.arange(0.0, 360.0, step), o.get("threshold", 0.01),
                           mosaic=_MOSAICS[key])
    return m
