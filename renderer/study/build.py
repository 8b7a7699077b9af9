"""Library objects from one shot's resolved configuration.

Turns the checked tables of :mod:`.config` into a layout, responses, views, a
scene and the frame series (field evaluated along it), calling only the public
constructors of the rendering library.  The *resources* of a shot (layout,
responses, views, scene) are grouped under a key derived from their
configuration, so shots that share a geometry share one precomputed object (built
once, sent once to each worker).  This module does not render or write files.
"""

from __future__ import annotations

import dataclasses
import hashlib
import math
from dataclasses import dataclass

import numpy as np

from ..errors import MagretinaError
from ..eye import load_layout
from ..field import MODELS as SITE_MODELS
from ..field import fixed
from ..response import REGISTRY
from ..response.rf_lab_response import LabRFResponse
from ..scene import Scene, dusk, uniform
from ..views import REGISTRY as VIEWS
from ..views import HeadPanorama
from .schema import canonical_json, resolve_path
from .sequences import SequenceContext, build_series
from ..pipeline import check_signal_nonzero

#: Response kinds of study files: the registry and the study-only lab-fixed RF table (it reads
#: two directions per receptor, so a timeline step that gives the coil's direction selects it).
RESPONSES = {**REGISTRY, "rf-lab-table": LabRFResponse}


def build_layout(cfg, base_dir):
    """The shot's layout: the preset or file, then ``alignment`` for every eye, then the
    per-eye overrides of ``[layout.eyes.NAME]`` (an eye's own alignment wins), then the
    eye movements of ``[layout.eye_offsets.NAME]`` (added to the placement angles, see
    :meth:`renderer.eye.Layout.moved`).  Errors name the key."""
    src = resolve_path(base_dir, cfg["file"]) if cfg.get("file") else cfg.get("preset", "lateral")
    layout = load_layout(src)
    if cfg.get("alignment") is not None:
        try:
            layout = layout.with_alignment(cfg["alignment"])
        except MagretinaError as exc:
            raise MagretinaError(f"layout.alignment: {exc}") from None
    eyes = list(layout.eyes)
    names = [e.name for e in eyes]
    for name, kw in cfg.get("eyes", {}).items():
        if name not in names:
            raise MagretinaError(f"layout.eyes.{name}: layout {layout.name!r} has no eye {name!r}; "
                                 f"eyes: {', '.join(names)}")
        i = names.index(name)
        try:
            eyes[i] = dataclasses.replace(eyes[i], **kw)
        except MagretinaError as exc:
            raise MagretinaError(f"layout.eyes.{name}: {exc}") from None
    extra = {k: v for k, v in cfg.items()
             if k not in ("preset", "file", "eyes", "alignment", "eye_offsets")}
    layout = layout.with_eyes(eyes)
    if extra:
        layout = dataclasses.replace(layout, **extra)
    for name, off in cfg.get("eye_offsets", {}).items():
        if name not in names:
            raise MagretinaError(f"layout.eye_offsets.{name}: layout {layout.name!r} has no eye "
                                 f"{name!r}; eyes: {', '.join(names)}")
        angles = (off.get("azimuth_deg", 0.0), off.get("elevation_deg", 0.0),
                  off.get("torsion_deg", 0.0))
        try:
            layout = layout.moved({name: angles})
        except MagretinaError as exc:
            raise MagretinaError(f"layout.eye_offsets.{name} = {dict(off)}: {exc}") from None
    return layout


def build_response(cfg, base_dir):
    cls = RESPONSES[cfg["kind"]]
    if cfg.get("csv"):
        return cls.from_csv(resolve_path(base_dir, cfg["csv"]))
    kw = {k: v for k, v in cfg.items() if k not in ("kind", "product", "csv")}
    if isinstance(kw.get("path"), str):  # table files are relative to the study's folder
        kw["path"] = resolve_path(base_dir, kw["path"])
    return cls(**kw)


def build_view(cfg):
    return VIEWS[cfg["kind"]](**{k: v for k, v in cfg.items() if k != "kind"})


class CachedView:
    """A view whose direction tables are computed once and shared (picklable).

    Delegates every attribute to the wrapped view; ``tables()`` and
    ``directions(layout)`` are evaluated at construction for the shot's layout, so
    per-frame rendering reuses them.
    """

    def __init__(self, view, layout):
        self._view = view
        self._tables = view.tables() if getattr(view, "equirect", False) else None
        self._dirs = None if self._tables is not None else \
            np.ascontiguousarray(view.directions(layout))

    def __getattr__(self, name):
        try:
            view = self.__dict__["_view"]
        except KeyError:
            raise AttributeError(name) from None
        return getattr(view, name)

    def __getstate__(self):
        return self.__dict__

    def __setstate__(self, d):
        self.__dict__.update(d)

    def tables(self):
        return self._tables

    def directions(self, layout=None):
        if self._dirs is None:
            return self._view.directions(layout)
        return self._dirs

    @property
    def wrapped(self):
        return self._view


def build_scene(cfg, views, base_dir):
    widths = [v.shape[1] for v in views.values() if getattr(v, "equirect", False)]
    width = cfg.get("width") or max(widths + [256])
    if cfg["kind"] == "dusk":
        return dusk(width)
    if cfg["kind"] == "uniform":
        return uniform(width, cfg["luminance"])
    return Scene.load(resolve_path(base_dir, cfg["path"]), north_col=cfg.get("north_col"))


@dataclass
class Resources:
    """Everything a worker needs that does not change from frame to frame."""

    key: str
    layout: object
    responses: dict
    products: dict
    views: dict
    scene: object
    metric_views: dict


def resources_config(cfg) -> dict:
    return {k: cfg[k] for k in ("layout", "response", "responses", "views", "scene", "metrics")}


def resources_key(cfg) -> str:
    return hashlib.sha256(canonical_json(resources_config(cfg)).encode()).hexdigest()[:16]


def build_resources(cfg, base_dir, precompute=True) -> Resources:
    """Build (and precompute) the layout, responses, views and scene of a shot.

    ``precompute=False`` (a dry run) makes every check the run makes -- responses
    and their mean signal, views and their eyes, the scene file -- but keeps the
    views bare (no direction tables) and builds no metric grids.
    """
    layout = build_layout(cfg["layout"], base_dir)
    responses = {"default": build_response(cfg["response"], base_dir)}
    products = {"default": cfg["response"].get("product", "singlet")}
    for name, r in cfg["responses"].items():
        responses[name] = build_response(r, base_dir)
        products[name] = r.get("product", "singlet")
    for name, resp in responses.items():
        # Refused here, before any frame, rather than in a worker at its first frame.
        check_signal_nonzero(resp, products[name],
                             "response" if name == "default" else f"responses.{name}")
    views = {}
    for name, v in cfg["views"].items():
        view = build_view(v)
        if not getattr(view, "equirect", False):
            # Views that need the layout (eye discs) check their eye here.
            pick = getattr(view, "pick", None)
            if pick is not None:
                layout.eye_index(pick)
        views[name] = CachedView(view, layout) if precompute else view
    for name, view in views.items():
        pick = getattr(view, "pick", None)
        if pick is not None:
            try:
                layout.eye_index(pick)
            except MagretinaError as exc:
                raise MagretinaError(f"views.{name}: {exc}") from None
    scene = build_scene(cfg["scene"], views, base_dir)
    if not precompute:
        return Resources(resources_key(cfg), layout, responses, products, views, scene, {})
    gw = int(cfg["metrics"]["grid_width"])
    metric_views = {e.name: CachedView(HeadPanorama(gw, pick=i), layout)
                    for i, e in enumerate(layout.eyes)}
    return Resources(resources_key(cfg), layout, responses, products, views, scene, metric_views)


def field_function(cfg):
    """``f(lat (n,), lon (n,), alt (n,)) -> (n, 3)`` NED tesla for the shot's model,
    and a description of the model and its coefficient source."""
    f = cfg["field"]
    model = f["model"]
    if model == "fixed":
        v = fixed(f["total_uT"], f["inclination_deg"], f["declination_deg"]).ned_T
        return (lambda lat, lon, alt: np.tile(v, (np.size(lat), 1))), \
            {"model": "fixed", "source": "fixed vector from the study file"}
    site_model = SITE_MODELS[model]

    def fn(lat, lon, alt):
        return site_model.ned_T(lat, lon, alt, f["date"])

    return fn, {"model": model, "date": f["date"], "source": site_model.source}


def build_frames(cfg, base_dir):
    """The shot's :class:`FrameSeries` with the ambient field at every frame."""
    ctx = SequenceContext(pose=cfg["pose"], site=cfg["site"], base_dir=base_dir)
    fn, _ = field_function(cfg)
    fs = build_series(cfg["sequence"], cfg["timeline"], ctx, fn)
    if not np.all(np.isfinite(fs.b_ned_T)):
        raise MagretinaError("field: the model returned non-finite values along the sequence")
    bad = np.abs(fs.pitch_deg) > 90.0
    if bad.any():
        raise MagretinaError(f"pose.pitch_deg: {fs.pitch_deg[bad][0]:g} out of range [-90, 90]")
    if math.isnan(float(np.sum(fs.yaw_deg))):
        raise MagretinaError("sequence: heading is not a number somewhere")
    return fs
