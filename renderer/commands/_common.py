"""Argument groups and output-folder rules shared by several subcommands.

Subcommands describe one configuration (site or fixed field, pose, layout,
response, view, scene) with the same flags; this module adds those flags and turns
parsed arguments into library objects.  It also holds the rule that nothing in an
output location is overwritten without ``--force``.
"""

from __future__ import annotations

import argparse
import datetime as _dt
import math
import os
import re
import sys

from ..defaults import DEFAULT_GAIN
from ..errors import MagretinaError, did_you_mean

#: The one style of long option names: lower case words joined by hyphens, a
#: quantity's unit spelled as the last word (``--field-ut``, ``--rf-mhz``,
#: ``--yaw-deg``).  Counts and pixel sizes carry no unit word.
OPTION_STYLE = re.compile(r"^--[a-z][a-z0-9]*(-[a-z0-9]+)*$")


class HelpFormatter(argparse.HelpFormatter):
    """Help that shows every default (unless the help text already states it)."""

    def _get_help_string(self, action):
        text = action.help or ""
        if "%(default)" in text or "default" in text.lower():
            return text
        d = action.default
        if action.option_strings and d is not None and d is not False \
                and d is not argparse.SUPPRESS and action.nargs != 0:
            return f"{text} (default: %(default)s)" if text else "default: %(default)s"
        return text


class _StyleMixin:
    """``add_argument`` that enforces :data:`OPTION_STYLE` and takes hidden ``aliases``.

    Aliases (older spellings kept so scripts keep working) parse like the name but
    are not shown in ``--help``.
    """

    def add_argument(self, *names, aliases=(), **kw):
        for n in names:
            if n.startswith("--") and not OPTION_STYLE.match(n):
                raise ValueError(f"option {n!r} does not follow the option style "
                                 f"(lower case, hyphens, unit last: --field-ut)")
        long = [n for n in names if n.startswith("--")]
        if long and "metavar" not in kw and kw.get("type") in (float, int) \
                and kw.get("action") is None:
            kw["metavar"] = long[0].rsplit("-", 1)[-1].upper() if "-" in long[0][2:] else "N"
        action = super().add_argument(*names, **kw)
        for al in aliases:
            self._option_string_actions[al.lower()] = action
        return action

    def add_argument_group(self, *args, **kw):
        group = _Group(self, *args, **kw)
        self._action_groups.append(group)
        return group


class _Group(_StyleMixin, argparse._ArgumentGroup):
    pass


class MagretinaParser(_StyleMixin, argparse.ArgumentParser):
    """The parser of ``magretina`` and every subcommand.

    * every default shown in ``--help`` (:class:`HelpFormatter`);
    * long options matched case-insensitively (``--Field-UT`` is ``--field-ut``);
    * a misspelt option or subcommand gets a "did you mean" suggestion;
    * errors are one line on stderr, exit status 2.
    """

    def __init__(self, *args, **kw):
        kw.setdefault("formatter_class", HelpFormatter)
        super().__init__(*args, **kw)

    def _parse_optional(self, arg_string):
        if arg_string.startswith("--") and len(arg_string) > 2:
            name, sep, value = arg_string.partition("=")
            if name not in self._option_string_actions and name.lower() != name:
                lowered = name.lower() + sep + value
                found = super()._parse_optional(lowered)
                if found and found[0] is not None:
                    return found
        return super()._parse_optional(arg_string)

    def _get_option_tuples(self, option_string):
        # an alias and its name are one action: a prefix of both is not ambiguous
        out, seen = [], set()
        for t in super()._get_option_tuples(option_string):
            if id(t[0]) not in seen:
                seen.add(id(t[0]))
                out.append(t)
        return out

    def _long_options(self):
        return sorted({s for a in self._actions for s in a.option_strings if s.startswith("--")}
                      | {s for s in self._option_string_actions if s.startswith("--")})

    def parse_known_args(self, args=None, namespace=None):
        if not self._subparsers:
            # report a misspelt option before argparse complains about missing ones
            argv = list(sys.argv[1:] if args is None else args)
            for tok in argv[:argv.index("--") if "--" in argv else len(argv)]:
                if tok.startswith("--") and len(tok) > 2:
                    found = self._parse_optional(tok)
                    if found and found[0] is None:
                        name = tok.partition("=")[0]
                        self.error(f"unrecognized option {name!r};"
                                   f"{did_you_mean(name, self._long_options())} "
                                   f"see '{self.prog} --help'")
        ns, extras = super().parse_known_args(args, namespace)
        if extras and not self._subparsers:
            self.error(f"unrecognized argument(s): {' '.join(extras)}; see '{self.prog} --help'")
        return ns, extras

    def error(self, message):
        m = re.search(r"invalid choice: '([^']*)' \(choose from (.*)\)", message)
        if m:
            choices = re.findall(r"'([^']*)'", m.group(2))
            message = message + ";" + did_you_mean(m.group(1), choices)
        print(f"{self.prog}: error: {message}", file=sys.stderr)
        self.exit(2)


def today_iso() -> str:
    """Today's date (UTC) as ISO 8601, the default date of every field lookup."""
    return _dt.datetime.now(_dt.timezone.utc).date().isoformat()


def add_field_args(p, date_default=None):
    """Site or fixed-field options; the date defaults to today (UTC)."""
    g = p.add_argument_group("field")
    g.add_argument("--lat-deg", type=float, aliases=["--lat"],
                   help="geodetic latitude, degrees north (-90..90; south negative)")
    g.add_argument("--lon-deg", type=float, aliases=["--lon"],
                   help="longitude, degrees east (west negative)")
    g.add_argument("--alt-km", type=float, default=0.0, help="altitude above the WGS84 ellipsoid, km")
    g.add_argument("--date", default=date_default,
                   help="ISO 8601 date, 1900-01-01..2030-01-01 (default: today, UTC)")
    g.add_argument("--model", default="igrf", help="field model: igrf | dipole")
    g.add_argument("--field-ut", type=float,
                   help="fixed field instead of a site: total intensity, µT")
    g.add_argument("--inclination-deg", type=float, aliases=["--inclination"],
                   help="fixed field: inclination, degrees (positive down)")
    g.add_argument("--declination-deg", type=float, default=0.0, aliases=["--declination"],
                   help="fixed field: declination, degrees east of north")


def field_date(a) -> str:
    """The date of a field lookup: ``--date`` or today (UTC)."""
    return a.date if getattr(a, "date", None) else today_iso()


def say_date(a, stream=None):
    """On stderr: the field is for today, when a site was given without ``--date``."""
    if getattr(a, "date", None) or getattr(a, "field_ut", None) is not None \
            or getattr(a, "lat_deg", None) is None:
        return
    print(f"note: field for {field_date(a)} (today, UTC); pass --date to choose another day",
          file=stream or sys.stderr)


def field_from_args(a):
    # deferred: library modules load when the command runs, so start-up stays light
    from ..field import at_site, fixed

    if a.field_ut is not None:
        if a.inclination_deg is None:
            raise MagretinaError("--field-ut needs --inclination-deg (degrees)")
        for flag, v in (("--field-ut", a.field_ut), ("--inclination-deg", a.inclination_deg),
                        ("--declination-deg", a.declination_deg)):
            if v is not None and not math.isfinite(v):
                raise MagretinaError(f"{flag} = {v!r}: must be a finite number")
        return fixed(a.field_ut, a.inclination_deg, a.declination_deg)
    if a.lat_deg is None or a.lon_deg is None:
        raise MagretinaError("give a site (--lat-deg and --lon-deg) or a fixed field "
                             "(--field-ut, --inclination-deg)")
    return at_site(a.model, a.lat_deg, a.lon_deg, a.alt_km, field_date(a))


def add_pose_args(p):
    g = p.add_argument_group("head pose")
    g.add_argument("--yaw-deg", type=float, default=0.0, aliases=["--yaw"],
                   help="heading, degrees clockwise from geographic north")
    g.add_argument("--pitch-deg", type=float, default=0.0, aliases=["--pitch"],
                   help="nose up, degrees")
    g.add_argument("--roll-deg", type=float, default=0.0, aliases=["--roll"],
                   help="right side down, degrees")


def add_model_args(p):
    g = p.add_argument_group("eye and response")
    g.add_argument("--layout", default="lateral", help="layout preset name or TOML file")
    g.add_argument("--legendre", default="0.7,0,0.1",
                   help="axial response as Legendre coefficients c0,c1,c2,... (default 0.7,0,0.1)")
    g.add_argument("--response-csv", metavar="FILE", help="axial response table: CSV of theta_deg,value")
    g.add_argument("--response-table", metavar="FILE", help="spin response table (.npz) from 'magretina response compute'")
    g.add_argument("--alignment", default=None,
                   help="receptor alignment for every eye: MODE[,key=value,...], e.g. "
                        "'tilt,tilt_deg=54.74', 'disorder,kappa=5', 'full-frame,in_plane=random' "
                        "(MODE: a name of renderer.eye.ALIGNMENTS; an unknown mode is refused "
                        "with the list)")
    g.add_argument("--product", default="singlet", help="which product drives vision: singlet | triplet")
    g.add_argument("--gain", type=float, default=DEFAULT_GAIN,
                   help="modulation gain (>= 0): m = gain·(s/<s> - 1); the default exaggerates "
                        "the pattern so it is visible (the demo uses the same)")


def response_from_args(a):
    # deferred: library modules load when the command runs, so start-up stays light
    from ..response import Legendre, Tabulated

    if getattr(a, "response_table", None):
        from ..response.spin_table import SpinTable

        return SpinTable.load(a.response_table)
    if a.response_csv:
        return Tabulated.from_csv(a.response_csv)
    try:
        coeffs = [float(x) for x in str(a.legendre).split(",") if x.strip()]
    except ValueError:
        raise MagretinaError(f"--legendre {a.legendre!r}: expected comma-separated numbers") from None
    return Legendre(coeffs)


def layout_from_args(a):
    """The layout named by --layout, with --alignment applied to every eye if given."""
    # deferred: library modules load when the command runs, so start-up stays light
    from ..eye import load_layout

    layout = load_layout(a.layout)
    spec = getattr(a, "alignment", None)
    if not spec:
        return layout
    parts = [x.strip() for x in str(spec).split(",") if x.strip()]
    table = {"mode": parts[0]}
    for item in parts[1:]:
        key, sep, value = item.partition("=")
        if not sep:
            raise MagretinaError(f"--alignment {spec!r}: expected MODE[,key=value,...]; "
                                 f"{item!r} has no '='")
        try:
            table[key.strip()] = float(value)
        except ValueError:
            table[key.strip()] = value.strip()
    from ..eye.alignment import parse_alignment

    return layout.with_alignment(parse_alignment(table, where="--alignment"))


def add_view_args(p, default_width=1024):
    g = p.add_argument_group("view and scene")
    g.add_argument("--view", default="world-panorama", help="view kind: a name of renderer.views.REGISTRY (default world-panorama; "
                        "an unknown kind is refused with the list)")
    g.add_argument("--width", type=int, default=default_width, help="panorama width or disc size, pixels")
    g.add_argument("--eye", default=None, help="eye name or index (eye-disc, or to show one eye only)")
    g.add_argument("--scene", default=None, metavar="FILE", help="2:1 equirectangular scene image (default: procedural dusk)")
    g.add_argument("--north-col", type=float, default=None,
                   help="column (pixels) of geographic north in the scene (default: width/2)")
    g.add_argument("--filter", default=None, choices=("mipmap", "trilinear", "bilinear"),
                   help="how the scene is resampled: mipmap (anisotropic footprint filter) | "
                        "trilinear (isotropic mipmap) | bilinear (plain reads, alias where the "
                        "view compresses the scene) (default: mipmap)")
    g.add_argument("--supersample", type=int, default=None, metavar="N",
                   help="evaluate the pattern and the visual-field outline on N x N "
                        "sub-pixels per pixel and average, 1..16 (default: 1)")


def add_view_geometry_args(p):
    """Options of the perspective and eye-disc views (what a study's [views] table sets)."""
    g = p.add_argument_group("perspective view (--view perspective)")
    g.add_argument("--fov-deg", type=float, default=None,
                   help="horizontal field of view, degrees in (0, 170] (default: 90)")
    g.add_argument("--height", type=int, default=None,
                   help="image height, pixels (default: width x 9/16)")
    g.add_argument("--look-yaw-deg", type=float, default=None,
                   help="viewing direction, degrees clockwise from north (or from the head's "
                        "forward axis with --view-frame head) (default: 0)")
    g.add_argument("--look-pitch-deg", type=float, default=None,
                   help="viewing elevation, degrees above the horizon (default: 0)")
    g.add_argument("--view-frame", default=None, choices=("world", "head"),
                   help="frame the viewing direction is given in (default: world)")
    g = p.add_argument_group("eye-disc view (--view eye-disc)")
    g.add_argument("--disc-radius-deg", type=float, default=None,
                   help="angle from the optic axis at the disc's rim, degrees in (0, 180] "
                        "(default: the eye's largest half-width)")


_PERSPECTIVE = {"fov_deg": "hfov_deg", "height": "height", "look_yaw_deg": "yaw_deg",
                "look_pitch_deg": "pitch_deg", "view_frame": "frame"}


def view_from_args(a):
    # deferred: library modules load when the command runs, so start-up stays light
    from ..views import REGISTRY

    if a.view not in REGISTRY:
        raise MagretinaError(f"--view {a.view!r}: allowed {', '.join(REGISTRY)};"
                             f"{did_you_mean(a.view, REGISTRY)}".rstrip(";"))
    eye = a.eye
    if eye is not None and eye.isdigit():
        eye = int(eye)
    persp = {k: getattr(a, k, None) for k in _PERSPECTIVE if getattr(a, k, None) is not None}
    radius = getattr(a, "disc_radius_deg", None)
    sampling = {}
    if getattr(a, "filter", None) is not None:
        sampling["filter"] = a.filter
    if getattr(a, "supersample", None) is not None:
        sampling["supersample"] = a.supersample
    if persp and a.view != "perspective":
        name = "--" + next(iter(persp)).replace("_", "-")
        raise MagretinaError(f"{name} applies to --view perspective, not --view {a.view}")
    if radius is not None and a.view != "eye-disc":
        raise MagretinaError(f"--disc-radius-deg applies to --view eye-disc, not --view {a.view}")
    if a.view == "eye-disc":
        return REGISTRY[a.view](eye=0 if eye is None else eye, size=a.width, radius_deg=radius,
                                **sampling)
    if a.view == "retina":
        return REGISTRY[a.view](eye=0 if eye is None else eye, size=a.width, **sampling)
    if a.view == "perspective":
        kw = {_PERSPECTIVE[k]: v for k, v in persp.items()}
        kw.setdefault("height", max(2, round(a.width * 9 / 16)))
        return REGISTRY[a.view](width=a.width, pick=eye, **kw, **sampling)
    return REGISTRY[a.view](width=a.width, pick=eye, **sampling)


def scene_from_args(a, width):
    # deferred: library modules load when the command runs, so start-up stays light
    from ..scene import Scene, dusk

    if a.scene:
        return Scene.load(a.scene, north_col=a.north_col)
    return dusk(max(width, 1024))


def add_budget_args(p):
    g = p.add_argument_group("resources")
    g.add_argument("--max-memory-gb", type=float, default=None,
                   help="memory this command may plan to use, GB (default: half the machine's "
                        "memory, or the environment variable MAGRETINA_MAX_MEMORY_GB)")


def check_response_mean(response, product, what):
    # deferred: library modules load when the command runs, so start-up stays light
    from ..pipeline import check_signal_nonzero

    check_signal_nonzero(response, product, what)


def check_out_file(option, path):
    """An output file path: not empty, no NUL, not an existing folder."""
    if path is None:
        return None
    p = str(path)
    if not p.strip():
        raise MagretinaError(f"{option} {path!r}: must name a file")
    if "\x00" in p:
        raise MagretinaError(f"{option} {path!r}: holds a NUL character")
    if os.path.isdir(p):
        raise MagretinaError(f"{option} {p}: is a folder; give a file name")
    return p


def check_out_dir(option, path):
    """An output folder path: not empty, no NUL, not an existing file."""
    if path is None:
        return None
    p = str(path)
    if not p.strip():
        raise MagretinaError(f"{option} {path!r}: must name a folder")
    if "\x00" in p:
        raise MagretinaError(f"{option} {path!r}: holds a NUL character")
    if os.path.exists(p) and not os.path.isdir(p):
        raise MagretinaError(f"{option} {p}: exists and is not a folder")
    return p


def refuse_overwrite(paths, force):
    """Raise unless ``force`` if any of ``paths`` already exists."""
    existing = [p for p in paths if p and os.path.exists(p)]
    if existing and not force:
        raise MagretinaError(f"{existing[0]} already exists; pass --force to overwrite")


def add_display_args(p):
    g = p.add_argument_group("display and quantisation")
    g.add_argument("--display", default="srgb",
                   help="display model: srgb (default) | gamma | table")
    g.add_argument("--gamma", type=float, default=None, help="exponent of --display gamma (0..10]")
    g.add_argument("--display-table", default=None,
                   help="measured table for --display table: CSV with header code,cd_m2 or "
                        "code,red_cd_m2,green_cd_m2,blue_cd_m2")
    g.add_argument("--black-cd-m2", type=float, default=None,
                   help="luminance of code 0, cd/m² (srgb/gamma; default 0)")
    g.add_argument("--white-cd-m2", type=float, default=None,
                   help="luminance of full white, cd/m² (srgb/gamma; default 80)")
    g.add_argument("--bits", type=int, default=8, help="display bit depth: 8, 10 or 16")
    g.add_argument("--dither", default="none",
                   help="quantiser: none (round) | noise (noisy-bit) | ordered (Bayer)")
    g.add_argument("--dither-seed", type=int, default=0, help="seed of the dither (default 0)")


#: ``magretina run`` flags that replace a key of the study's [display] table (flag dest -> key)
STUDY_DISPLAY_FLAGS = {"display": "kind", "gamma": "gamma", "display_table": "table",
                       "black_cd_m2": "black_cd_m2", "white_cd_m2": "white_cd_m2",
                       "bits": "bits", "dither": "dither", "dither_temporal": "temporal",
                       "grey": "pattern_grey"}


def add_study_display_args(p):
    """The display flags of ``render`` for a study: each, when given, replaces that key of
    the study file's [display] table (unset: the file's value)."""
    g = p.add_argument_group("display and quantisation (each replaces that key of the study's "
                             "[display] table)")
    g.add_argument("--display", default=None, choices=("srgb", "gamma", "table"),
                   help="display model (display.kind); another kind drops the file's curve "
                        "keys (gamma, table, and black/white for a table)")
    g.add_argument("--gamma", type=float, default=None,
                   help="exponent of --display gamma, (0, 10] (display.gamma)")
    g.add_argument("--display-table", default=None, metavar="CSV",
                   help="measured table for --display table (display.table): CSV with header "
                        "code,cd_m2 or code,red_cd_m2,green_cd_m2,blue_cd_m2; relative to the "
                        "current folder")
    g.add_argument("--black-cd-m2", type=float, default=None, metavar="CD_M2",
                   help="luminance of code 0, cd/m² (srgb/gamma; display.black_cd_m2)")
    g.add_argument("--white-cd-m2", type=float, default=None, metavar="CD_M2",
                   help="luminance of full white, cd/m² (srgb/gamma; display.white_cd_m2)")
    g.add_argument("--bits", type=int, default=None, choices=(8, 10, 16),
                   help="display bit depth (display.bits)")
    g.add_argument("--dither", default=None, choices=("none", "noise", "ordered"),
                   help="quantiser (display.dither): none (round) | noise (noisy-bit) | "
                        "ordered (Bayer); its seeds come from study.seed, per shot and frame")
    g.add_argument("--dither-temporal", default=None, choices=("on", "off"),
                   help="new dither noise every frame (on) or the same for all (off) "
                        "(display.temporal)")
    g.add_argument("--grey", default=None, metavar="LUMINANCE",
                   help="background of the pattern stimulus and metrics (display.pattern_grey): "
                        "relative 0..1, 'X cd/m2' or 'F white'")


def study_display_overrides(a) -> dict:
    """The [display] keys given by :func:`add_study_display_args` flags (others left out)."""
    out = {}
    for dest, key in STUDY_DISPLAY_FLAGS.items():
        v = getattr(a, dest, None)
        if v is None:
            continue
        if dest == "dither_temporal":
            v = v == "on"
        elif dest == "grey":
            try:
                v = float(v)
            except ValueError:
                pass
        elif dest == "display_table":
            v = os.path.abspath(v)
        out[key] = v
    return out


def display_from_args(a):
    """The display model and quantiser of parsed arguments: (Display, method, seed)."""
    # deferred: library modules load when the command runs, so start-up stays light
    from ..display import make_display
    from ..dither import check_method

    d = make_display(a.display, a.bits, a.black_cd_m2, a.white_cd_m2, a.gamma, a.display_table,
                     names={"kind": "--display", "bits": "--bits", "gamma": "--gamma",
                            "table": "--display-table", "black_cd_m2": "--black-cd-m2",
                            "white_cd_m2": "--white-cd-m2"})
    method = check_method(a.dither, "--dither")
    if a.dither_seed is not None and a.dither_seed < 0:
        raise MagretinaError(f"--dither-seed {a.dither_seed}: must be >= 0")
    return d, method, a.dither_seed


def check_png_suffix(flag, path):
    """Refuse an output path that does not end in .png (nothing else is written)."""
    if path and not str(path).lower().endswith(".png"):
        ext = os.path.splitext(str(path))[1] or "(none)"
        raise MagretinaError(f"{flag} {path}: suffix {ext} is not written; only .png files "
                             f"(PNG) are")
