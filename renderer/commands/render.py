"""``magretina render``: one frame from flags or a small flat TOML file.

The TOML file holds the same settings as the flags, with underscores
(``lat = 52.0``, ``yaw = 30``, ``legendre = [0.7, 0, 0.1]``, ``out = "frame.png"``);
flags given on the command line override the file.  Unknown keys are errors.
"""

from __future__ import annotations

import os

from ..errors import ConfigError, MagretinaError, did_you_mean
from . import _common


def _add(p):
    p.add_argument("--config", metavar="FILE", help="flat TOML file with the same settings as the flags")
    _common.add_field_args(p)
    _common.add_pose_args(p)
    _common.add_model_args(p)
    _common.add_view_args(p)
    _common.add_display_args(p)
    _common.add_view_geometry_args(p)
    g = p.add_argument_group("output")
    g.add_argument("--out", metavar="FILE", help="PNG of the composited frame in the display's codes (8-bit sRGB "
                                 "by default)")
    g.add_argument("--png16", metavar="FILE",
                   help="also write a 16-bit linear-light PNG to FILE")
    g.add_argument("--pattern", metavar="FILE", help="also write the pattern alone on uniform grey here (display "
                                     "codes, like --out)")
    g.add_argument("--grey", default="0.5",
                   help="luminance of the --pattern background: relative 0..1, 'X cd/m2' or "
                        "'F white' (default 0.5)")
    g.add_argument("--figure", metavar="FILE", help="also write an annotated figure here (for papers; never a "
                                    "stimulus)")
    g.add_argument("--no-sidecar", action="store_true",
                   help="do not write the JSON sidecar beside --out")
    g.add_argument("--outside", type=float, default=0.25,
                   help="luminance factor where no eye sees (0..1, default 0.25)")
    g.add_argument("--force", action="store_true", help="overwrite existing files")
    _common.add_budget_args(p)


def register(sub):
    p = sub.add_parser("render", help="render one composited frame",
                       description="Render one frame (a model prediction, not an observation).")
    _add(p)
    p.set_defaults(func=run, _parser_factory=_add)


def _apply_config(a):
    if not a.config:
        return a
    # deferred: library modules load when the command runs, so start-up stays light
    from ..inputs import read_toml

    data = read_toml(a.config, "config")
    probe = _common.MagretinaParser(add_help=False)
    _add(probe)
    dests = {act.dest for act in probe._actions} - {"config", "help"}
    # older spellings (``lat``, ``yaw``, ``field_uT``) and any case map to the key of today
    names = {s.lstrip("-").replace("-", "_").lower(): act.dest
             for s, act in probe._option_string_actions.items() if act.dest in dests}
    problems = [f"unknown key {k!r};{did_you_mean(k, dests)} allowed: {', '.join(sorted(dests))}"
                for k in data if str(k).lower() not in names]
    if problems:
        raise ConfigError(problems, source=a.config)
    data = {names[str(k).lower()]: v for k, v in data.items()}
    if isinstance(data.get("legendre"), list):
        if not all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in data["legendre"]):
            raise ConfigError([f"legendre = {data['legendre']!r}: must be a list of numbers"],
                              source=a.config)
        data["legendre"] = ",".join(str(x) for x in data["legendre"])
    problems = _type_problems(data, {act.dest: act for act in probe._actions})
    if problems:
        raise ConfigError(problems, source=a.config)
    defaults = probe.parse_args([])
    for k, v in data.items():
        if getattr(a, k) == getattr(defaults, k):  # not given on the command line
            setattr(a, k, v)
    base = os.path.dirname(os.path.abspath(a.config))
    for k in ("out", "png16", "pattern", "figure", "scene", "response_csv", "layout",
              "display_table"):
        v = getattr(a, k)
        if k in data and isinstance(v, str) and not os.path.isabs(v) and (k != "layout" or v.endswith(".toml")):
            setattr(a, k, os.path.join(base, v))
    return a


def _grey(value, display):
    # deferred: library modules load when the command runs, so start-up stays light
    from ..display import parse_target

    try:
        value = float(value)
    except (TypeError, ValueError):
        pass
    return parse_target(value, display, where="--grey")


def sidecar_path(out):
    return os.path.splitext(out)[0] + ".json"


_PATH_KEYS = ("out", "png16", "pattern", "figure", "scene", "layout", "response_csv",
              "response_table")


def _type_problems(data, actions):
    """Each config value must have the type its flag parses to (``scene = 5`` is refused)."""
    problems = []
    for k, v in data.items():
        act = actions[k]
        if act.nargs == 0:  # a switch such as --force
            ok, want = isinstance(v, bool), "true or false"
        elif act.type is float:
            ok, want = isinstance(v, (int, float)) and not isinstance(v, bool), "a number"
        elif act.type is int:
            ok, want = isinstance(v, int) and not isinstance(v, bool), "a whole number"
        elif k in _PATH_KEYS:
            ok, want = isinstance(v, str), "a string (a file name)"
        else:  # text options that also take numbers (e.g. grey = 0.5)
            ok, want = isinstance(v, (str, int, float)) and not isinstance(v, bool), \
                "a string or a number"
        if ok and isinstance(v, str) and ("\x00" in v or not v.strip()):
            ok, want = False, "a non-empty string without NUL characters"
        if not ok:
            problems.append(f"{k} = {v!r}: must be {want}")
    return problems


def check_render(a, view):
    """Refuse a frame whose view, scene and buffers would not fit (before allocating)."""
    # deferred: library modules load when the command runs, so start-up stays light
    from .. import budget

    H, W = view.shape
    est = budget.Estimate("render")
    est.add_image("view", H, W, budget.VIEW_BYTES_PER_PIXEL)
    sw = max(W, 1024)
    if a.scene:
        from ..inputs import image_size

        sw, sh = image_size(a.scene, "scene")
        est.add_image("scene", sh, sw, budget.SCENE_BYTES_PER_PIXEL)
    else:
        est.add_image("scene", sw // 2, sw, budget.SCENE_BYTES_PER_PIXEL)
    return est.check(getattr(a, "max_memory_gb", None))


def run(a) -> int:
    # deferred: library modules load when the command runs, so start-up stays light
    import numpy as np

    from .. import pipeline
    from ..composite import modulation_map, pattern_grey, to_uint8_srgb
    from ..display import displayed_stats
    from ..dither import frame_seed, quantise
    from ..io import atomic_write_bytes, atomic_write_json, display_png_bytes, sha256_hex, \
        write_png16_linear, write_srgb8_codes
    from ..pngmeta import label_chunks
    from ..pose import Pose
    from ..provenance import CAUTION, frame_params

    a = _apply_config(a)
    if not a.out:
        raise MagretinaError("give --out FILE.png (or out = \"...\" in the config)")
    for flag in ("out", "png16", "pattern", "figure"):
        _common.check_out_file("--" + flag, getattr(a, flag))
        _common.check_png_suffix("--" + flag, getattr(a, flag))
    sidecar = None if a.no_sidecar else sidecar_path(a.out)
    _common.refuse_overwrite([a.out, a.png16, a.pattern, a.figure, sidecar], a.force)
    display, method, seed = _common.display_from_args(a)
    grey = _grey(a.grey, display)
    field = _common.field_from_args(a)
    _common.say_date(a)
    pose = Pose(a.yaw_deg, a.pitch_deg, a.roll_deg)
    layout = _common.layout_from_args(a)
    view = _common.view_from_args(a)
    check_render(a, view)
    response = _common.response_from_args(a)
    _common.check_response_mean(response, a.product, "the response")
    scene = _common.scene_from_args(a, view.shape[1])
    from ..warmup import ensure, names_for  # deferred: numba loads only for rendering

    # on a cold cache: say so, and compile in two processes (later runs load them)
    ensure(names_for([view], None if scene is None else scene.image.shape,
                     patterns=bool(a.pattern or a.figure or sidecar)))
    img = pipeline.render(field, pose, layout, response, view, scene=scene, gain=a.gain,
                          product=a.product, outside=a.outside)
    params = frame_params(field, pose, layout, response, view, a.gain, a.product, display,
                          method, seed if method != "none" else None,
                          temporal=None, outside=a.outside, pattern_grey=grey)
    what = (f"{type(view).__name__} frame, heading {a.yaw_deg:g} deg, composited onto the scene; "
            f"codes for display {display.kind} {display.bits}-bit")
    warn = None if display.kind != "table" else (
        "code values for the measured display in the parameters, not sRGB")
    # One seed per output, so the frame and the pattern get independent dither.
    codes = quantise(display, img, method, frame_seed(seed, 0, view=0))
    data = display_png_bytes(codes, display, label_chunks(what, CAUTION, params, warning=warn))
    atomic_write_bytes(a.out, data)
    written = [(a.out, "frame", data)]
    stats = {"frame": displayed_stats(display, img, codes)}
    if a.png16:
        write_png16_linear(a.png16, img, label_chunks(
            what.split("; codes")[0] + "; 16-bit linear light (code/65535)", CAUTION, params))
        written.append((a.png16, "linear16", None))
    sig = mean = None
    if a.pattern or a.figure or sidecar:
        sig, mean = pipeline.render_signal(field, pose, layout, response, view, a.product)
        pat = pattern_grey(sig, mean, a.gain, grey=grey)
        pcodes = quantise(display, pat, method, frame_seed(seed, 0, view=1))
        stats["pattern"] = displayed_stats(display, pat, pcodes, mask=~np.isnan(sig))
        if a.pattern:
            pdata = display_png_bytes(pcodes, display, label_chunks(
                f"{type(view).__name__} pattern alone on a uniform field of relative luminance "
                f"{grey:g}; codes for display {display.kind} {display.bits}-bit", CAUTION, params,
                warning=warn))
            atomic_write_bytes(a.pattern, pdata)
            written.append((a.pattern, "pattern", pdata))
    if a.figure:
        from ..figure import annotate

        m = modulation_map(sig, mean, a.gain)
        eyes = [e.name for e in layout.eyes] if view_pick(view) is None else [str(view_pick(view))]
        fig = annotate(to_uint8_srgb(img), f"heading {a.yaw_deg:g} deg, {type(view).__name__}",
                       eyes, (np.nanmin(m), np.nanmax(m)) if np.isfinite(m).any() else (0, 0),
                       CAUTION, grey=grey)
        write_srgb8_codes(a.figure, fig, label_chunks("annotated figure of a " + what, CAUTION, params,
                                     warning="figure for publication; not a stimulus (annotation "
                                             "band, display model not applied)"))
        written.append((a.figure, "figure", None))
    if sidecar:
        files = []
        for path, role, data in written:
            with open(path, "rb") as fh:
                blob = fh.read()
            files.append({"path": os.path.basename(path), "role": role, "bytes": len(blob),
                          "sha256": sha256_hex(blob)})
        atomic_write_json(sidecar, {"caution": CAUTION, "parameters": params, "files": files,
                                    "displayed": stats,
                                    "notes": "displayed = after quantisation, through the "
                                             "display model; intended = the continuous image. "
                                             "frame: every pixel; pattern: the pattern alone on "
                                             "the --grey field over the pixels an eye sees."})
        written.append((sidecar, "sidecar", None))
    for w in written:
        print(w[0])
    return 0


def view_pick(view):
    return getattr(view, "pick", None) if hasattr(view, "pick") else getattr(view, "eye", None)

