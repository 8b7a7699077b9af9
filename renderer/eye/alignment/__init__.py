"""Receptor alignment hypotheses (see :mod:`.base` for the interface).

``REGISTRY`` maps the ``mode`` names used in layout files to classes; adding a
hypothesis is one new file here and one line in the registry (plus, only if it needs
new per-pixel work, a kernel mode: a line in :data:`renderer.kernels.KERNEL_MODES` and
its branch in the kernels).  :func:`examples` builds every registered hypothesis from
its classes' ``examples`` settings; the tests iterate over it.
"""

from __future__ import annotations

from dataclasses import fields

from ...errors import ConfigError, MagretinaError
from .base import AXES, Alignment, axial_response
from .chief_ray import ChiefRay
from .disorder import Disorder
from .full_frame import FullFrame
from .normal import Normal
from .ratio import Ratio
from .tilt import Tilt

REGISTRY = {
    "normal": Normal,
    "chief-ray": ChiefRay,
    "tilt": Tilt,
    "disorder": Disorder,
    "ratio": Ratio,
    "full-frame": FullFrame,
}


def examples() -> dict:
    """label -> Alignment: every registered hypothesis at each of its example settings
    (``cls.examples``; a class without any contributes its defaults under its name)."""
    out = {}
    for name, cls in REGISTRY.items():
        for label, kw in (cls.examples or {name: {}}).items():
            out[label] = cls(**kw)
    return out


def parse_alignment(spec, where: str = "alignment") -> Alignment:
    """An :class:`Alignment` from a mode name, a TOML table ``{mode = ..., ...}`` or an
    Alignment (returned as is).  Errors name ``where``, the key and what is allowed."""
    if isinstance(spec, Alignment):
        return spec
    if spec is None:
        return Normal()
    if isinstance(spec, str):
        spec = {"mode": spec}
    if not isinstance(spec, dict):
        raise MagretinaError(f"{where}: expected a mode name or a table, got {spec!r}")
    mode = spec.get("mode", "normal")
    if mode not in REGISTRY:
        raise MagretinaError(f"{where}.mode = {mode!r}: allowed {', '.join(REGISTRY)}")
    cls = REGISTRY[mode]
    allowed = {f.name for f in fields(cls)}
    bad = [k for k in spec if k != "mode" and k not in allowed]
    if bad:
        raise ConfigError([f"{where}.{k}: unknown key for mode {mode!r}; allowed: "
                           f"{', '.join(['mode'] + sorted(allowed))}" for k in bad])
    try:
        return cls(**{k: v for k, v in spec.items() if k != "mode"})
    except MagretinaError as exc:
        raise MagretinaError(f"{where}: {exc}") from None


__all__ = ["Alignment", "Normal", "ChiefRay", "Tilt", "Disorder", "Ratio", "FullFrame",
           "REGISTRY", "AXES", "examples", "parse_alignment", "axial_response"]
