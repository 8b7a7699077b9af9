"""``magretina render``: one frame from flags or a small flat TOML file.

The TOML file holds the same settings as the flags, with underscores
(``lat = 52.0``, ``yaw = 30``, ``legendre = [0.7, 0, 0.1]``, ``out = "frame.png"``);
flags given on the command line override the file.  Unknown keys are errors.
"""

from __future__ import annotations

import argparse
import os
import tomllib

from ..errors import ConfigError, MagretinaError
from . import _common


def _add(p):
    p.add_argument("--config", help="flat TOML file with the same settings as the flags")
    _common.add_field_args(p)
    _common.add_pose_args(p)
    _common.add_model_args(p)
    _common.add_view_args(p)
    g = p.add_argument_group("output")
    g.add_argument("--out", help="8-bit sRGB PNG of the composited frame")
    g.add_argument("--png16", help="also write a 16-bit linear PNG here")
    g.add_argument("--pattern", help="also write the pattern alone on uniform grey here (8-bit sRGB)")
    g.add_argument("--outside", type=float, default=0.25,
                   help="luminance factor where no eye sees (0..1, default 0.25)")
    g.add_argument("--force", action="store_true", help="overwrite existing files")


def register(sub):
    p = sub.add_parser("render", help="render one composited frame",
                       description="Render one frame (a model prediction, not an observation).")
    _add(p)
    p.set_defaults(func=run, _parser_factory=_add)


def _apply_config(a):
    if not a.config:
        return a
    try:
        with open(a.config, "rb") as fh:
            data = tomllib.load(fh)
    except OSError as exc:
        raise MagretinaError(f"config {a.config}: cannot read ({exc.strerror})") from None
    except tomllib.TOMLDecodeError as exc:
        raise MagretinaError(f"config {a.config}: not valid TOML ({exc})") from None
    probe = argparse.ArgumentParser(add_help=False)
    _add(probe)
    dests = {act.dest for act in probe._actions} - {"config", "help"}
    problems = [f"unknown key {k!r}; allowed: {', '.join(sorted(dests))}" for k in data if k not in dests]
    if problems:
        raise ConfigError(problems, source=a.config)
    if isinstance(data.get("legendre"), list):
        data["legendre"] = ",".join(str(x) for x in data["legendre"])
    defaults = probe.parse_args([])
    for k, v in data.items():
        if getattr(a, k) == getattr(defaults, k):  # not given on the command line
            setattr(a, k, v)
    base = os.path.dirname(os.path.abspath(a.config))
    for k in ("out", "png16", "pattern", "scene", "response_csv", "layout"):
        v = getattr(a, k)
        if k in data and isinstance(v, str) and not os.path.isabs(v) and (k != "layout" or v.endswith(".toml")):
            setattr(a, k, os.path.join(base, v))
    return a


def run(a) -> int:
    import renderer
    from ..composite import pattern_grey
    from ..io import write_png8_srgb, write_png16_linear
    from ..pose import Pose

    a = _apply_config(a)
    if not a.out:
        raise MagretinaError("give --out FILE.png (or out = \"...\" in the config)")
    _common.refuse_overwrite([a.out, a.png16, a.pattern], a.force)
    field = _common.field_from_args(a)
    pose = Pose(a.yaw, a.pitch, a.roll)
    layout = _common.layout_from_args(a)
    response = _common.response_from_args(a)
    view = _common.view_from_args(a)
    scene = _common.scene_from_args(a, view.shape[1])
    img = renderer.render(field, pose, layout, response, view, scene=scene, gain=a.gain,
                          product=a.product, outside=a.outside)
    write_png8_srgb(a.out, img)
    written = [a.out]
    if a.png16:
        write_png16_linear(a.png16, img)
        written.append(a.png16)
    if a.pattern:
        sig, mean = renderer.render_signal(field, pose, layout, response, view, a.product)
        write_png8_srgb(a.pattern, pattern_grey(sig, mean, a.gain))
        written.append(a.pattern)
    for w in written:
        print(w)
    return 0
