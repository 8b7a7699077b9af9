"""Per-frame numbers of a study: a registry of metric providers and the built-in one.

A *metric provider* is a function ``provider(ctx: MetricContext) -> dict[str, float]``
returning a flat mapping of names (snake_case, starting with a letter) to floats.
The runner calls every provider listed in ``[metrics] providers`` (default
``["basic"]``) once per rendered frame; the values go into ``manifest.jsonl``,
``metrics.csv`` and the NetCDF dataset (as variables over the sweep dimensions and
``frame``).  Options for a provider come from ``[metrics.options.NAME]`` as
``ctx.options``.

Registering a provider is one line in ``PROVIDERS`` below, either the function or
a ``"module:function"`` string imported lazily (avoids import cycles)::

    PROVIDERS["prediction"] = "renderer.predict:study_metrics"

The context gives the presented field (:class:`renderer.field.FieldVector`), the
pose, layout, response, product, gain, the views, the prepared kernel inputs
(``ctx.inputs``, from :func:`renderer.pipeline.prepare`), the visual-field mean
signal, the shot's seed (``ctx.seed``; use ``numpy.random.default_rng(ctx.seed)``
for anything random so reruns are identical), the swept parameters, the display
model and quantiser (``ctx.display``, ``ctx.dither``, ``ctx.dither_seed(view)``,
``ctx.frame_image(view)``: the continuous frame the files are made from), and helpers
that compute (and cache) signal maps: ``ctx.signal_map(view_name)`` and
``ctx.eye_signal(eye)`` (a head-frame panorama of one eye at ``metrics.grid_width``).
Metrics are model predictions under the study's assumptions, not measurements.
This module does not write files (see :mod:`.exports`).
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass, field

import numpy as np

from ..display import SRGB8, displayed_stats, displayed_stats_grey
from ..dither import frame_seed, quantise
from ..kernels import grey_pattern
from ..pipeline import composite_inputs, render_pattern, signal_map
from ..predict import study_metrics


@dataclass
class MetricContext:
    """What a provider may look at for one frame (see the module docstring)."""

    shot: int
    shot_id: str
    frame: int
    t_s: float
    seed: int
    params: dict
    field: object
    ambient_ned_T: np.ndarray
    pose: object
    layout: object
    response: object
    product: str
    gain: float
    views: dict
    inputs: object
    mean_signal: float
    metric_views: dict
    options: dict = field(default_factory=dict)
    display: object = None
    dither: str = "none"
    temporal: bool = True
    pattern_grey: float = 0.5
    scene: object = None
    outside: float = 0.25
    images: dict = field(default_factory=dict, repr=False)
    codes: dict = field(default_factory=dict, repr=False)
    _cache: dict = field(default_factory=dict, repr=False)

    def signal_map(self, view) -> np.ndarray:
        """Receptor signal s (f, or 1 − f for the triplet product) over a view, (H, W);
        NaN where no eye sees.  ``view`` is a view name of the study or a view object."""
        key = ("view", view if isinstance(view, str) else id(view))
        if key not in self._cache:
            v = self.views[view] if isinstance(view, str) else view
            if self.product == "singlet" and self.inputs is not None:
                # The frame's own kernel inputs are what render_pattern would prepare
                # again (same field, pose, layout, response, singlet): same values.
                self._cache[key] = signal_map(self.inputs, v, self.layout, self.inputs.lut)
            else:
                f = render_pattern(self.field, self.pose, self.layout, self.response, v)
                self._cache[key] = 1.0 - f if self.product == "triplet" else f
        return self._cache[key]

    def frame_image(self, view) -> np.ndarray:
        """The frame's continuous linear image over a study view, (H, W, 3) float32 (the
        one the frame files are quantised from)."""
        if view not in self.images:
            self.images[view] = composite_inputs(self.inputs, self.mean_signal, self.layout,
                                                 self.views[view], self.scene, self.gain,
                                                 self.outside)
        return self.images[view]

    def dither_seed(self, view, pattern=False):
        """The dither seed of this frame's file of ``view`` (the pattern stimulus of the
        display metrics gets a seed of its own)."""
        vi = list(self.views).index(view) + (1 << 20 if pattern else 0)
        return frame_seed(self.seed, self.frame, self.temporal, view=vi)

    def eye_signal(self, eye) -> np.ndarray:
        """Signal over one eye's field on a head-frame panorama (NaN where unseen)."""
        name = self.layout.eyes[self.layout.eye_index(eye)].name
        return self.signal_map(self.metric_views[name])


def modulation_depth(signal) -> float:
    """(max − min)/(max + min) of the finite values (0 if none or max + min = 0).

    The usual definition of modulation depth of an amplitude-modulated signal
    (common practice); here of the receptor signal across one eye's field.
    """
    s = np.asarray(signal, float)
    s = s[np.isfinite(s)]
    if s.size == 0:
        return float("nan")
    hi, lo = float(s.max()), float(s.min())
    return 0.0 if hi + lo == 0.0 else (hi - lo) / (hi + lo)


def basic(ctx: MetricContext) -> dict:
    """Field vector (µT, degrees), pose (degrees), mean signal, modulation depth per eye."""
    b = np.asarray(ctx.field.ned_T, float) * 1e6
    h = float(np.hypot(b[0], b[1]))
    out = {
        "field_north_ut": float(b[0]), "field_east_ut": float(b[1]), "field_down_ut": float(b[2]),
        "field_total_ut": float(np.linalg.norm(b)),
        "inclination_deg": float(np.degrees(np.arctan2(b[2], h))),
        "declination_deg": float(np.degrees(np.arctan2(b[1], b[0]))),
        "yaw_deg": float(ctx.pose.yaw_deg), "pitch_deg": float(ctx.pose.pitch_deg),
        "roll_deg": float(ctx.pose.roll_deg),
        "mean_signal": float(ctx.mean_signal),
    }
    for i, eye in enumerate(ctx.layout.eyes):
        out[f"modulation_depth_{_safe(eye.name, i)}"] = modulation_depth(ctx.eye_signal(i))
    return out


def display(ctx: MetricContext) -> dict:
    """Intended and displayed luminance statistics of every study view (model predictions
    put through the study's display model and quantiser; see renderer.display).

    ``<view>_frame_*``: the frame as its file encodes it, every pixel: mean luminance in
    cd/m², Michelson and RMS contrast.  ``<view>_pattern_*``: the pattern alone on a
    uniform field of ``display.pattern_grey``, over the pixels an eye sees, quantised the
    same way (with its own seed): how much of the modulation survives quantisation.
    """
    disp = ctx.display or SRGB8
    out = {}
    for i, name in enumerate(ctx.views):
        tag = _safe(name, i)
        img = ctx.frame_image(name)
        # The codes of the frame file when the worker just wrote it (same seed, same
        # codes: quantising again would only cost time).
        codes = ctx.codes.get(name)
        if codes is None:
            codes = quantise(disp, img, ctx.dither, ctx.dither_seed(name))
        out.update(displayed_stats(disp, img, codes, prefix=f"{tag}_frame_"))
        sig = ctx.signal_map(name)
        # one channel of pattern_grey (the same float32 values; every channel is equal)
        grey = grey_pattern(sig, ctx.mean_signal, ctx.gain, ctx.pattern_grey)
        seed = ctx.dither_seed(name, pattern=True)
        seen = np.isfinite(sig)
        if disp.channels_alike:
            # A grey image on a display whose channels share one curve: quantise one
            # channel (the dither threshold is shared by the channels anyway).
            pcodes = quantise(disp, grey, ctx.dither, seed)
            out.update(displayed_stats_grey(disp, grey, pcodes, mask=seen,
                                            prefix=f"{tag}_pattern_"))
        else:
            pat = np.repeat(grey[..., None], 3, axis=2)
            out.update(displayed_stats(disp, pat, quantise(disp, pat, ctx.dither, seed),
                                       mask=seen, prefix=f"{tag}_pattern_"))
    return out


def _safe(name, i):
    s = "".join(c if c.isalnum() else "_" for c in str(name)).strip("_").lower()
    return s if s and s[0].isalpha() else f"eye{i}"


#: name -> provider function (or "module:function" of a provider outside the package,
#: imported on first use).  Adding a provider is one function and one line here.
PROVIDERS = {
    "basic": basic,
    "display": display,
    "prediction": study_metrics,
}


def get_provider(name):
    p = PROVIDERS[name]
    if isinstance(p, str):
        mod, _, fn = p.partition(":")
        p = getattr(importlib.import_module(mod), fn)
        PROVIDERS[name] = p
    return p


def compute(ctx_kwargs: dict, providers, options) -> dict:
    """Run the named providers for one frame; merge their dicts (names must not clash)."""
    out = {}
    ctx = ctx_kwargs if isinstance(ctx_kwargs, MetricContext) else MetricContext(**ctx_kwargs)
    for name in providers:
        ctx.options = dict(options.get(name, {}))
        vals = get_provider(name)(ctx)
        for k, v in vals.items():
            if k in out:
                raise ValueError(f"metric {k!r} given by two providers")
            out[k] = float(v)
    return out
