"""Argument groups and output-folder rules shared by several subcommands.

Subcommands describe one configuration (site or fixed field, pose, layout,
response, view, scene) with the same flags; this module adds those flags and turns
parsed arguments into library objects.  It also holds the rule that nothing in an
output location is overwritten without ``--force``.
"""

from __future__ import annotations

import os

from ..errors import MagretinaError


def add_field_args(p, date_default="2026-06-01"):
    g = p.add_argument_group("field")
    g.add_argument("--lat", type=float, help="geodetic latitude, degrees (-90..90)")
    g.add_argument("--lon", type=float, help="longitude, degrees east")
    g.add_argument("--alt-km", type=float, default=0.0, help="altitude above WGS84, km")
    g.add_argument("--date", default=date_default, help="ISO 8601 date (1900-01-01..2030-01-01)")
    g.add_argument("--model", default="igrf", help="field model: igrf | dipole")
    g.add_argument("--field-uT", type=float, help="fixed field: total intensity, µT (instead of a site)")
    g.add_argument("--inclination", type=float, help="fixed field: inclination, degrees")
    g.add_argument("--declination", type=float, default=0.0, help="fixed field: declination, degrees")


def field_from_args(a):
    from ..field import at_site, fixed

    if a.field_uT is not None:
        if a.inclination is None:
            raise MagretinaError("--field-uT needs --inclination (degrees)")
        return fixed(a.field_uT, a.inclination, a.declination)
    if a.lat is None or a.lon is None:
        raise MagretinaError("give a site (--lat and --lon) or a fixed field (--field-uT, --inclination)")
    return at_site(a.model, a.lat, a.lon, a.alt_km, a.date)


def add_pose_args(p):
    g = p.add_argument_group("head pose")
    g.add_argument("--yaw", type=float, default=0.0, help="heading, degrees clockwise from north")
    g.add_argument("--pitch", type=float, default=0.0, help="nose-up, degrees")
    g.add_argument("--roll", type=float, default=0.0, help="right side down, degrees")


def add_model_args(p):
    g = p.add_argument_group("eye and response")
    g.add_argument("--layout", default="lateral", help="layout preset name or TOML file")
    g.add_argument("--legendre", default="0.7,0,0.1",
                   help="axial response as Legendre coefficients c0,c1,c2,... (default 0.7,0,0.1)")
    g.add_argument("--response-csv", help="axial response table: CSV of theta_deg,value")
    g.add_argument("--response-table", help="spin response table (.npz) from 'magretina response compute'")
    g.add_argument("--alignment", default=None,
                   help="receptor alignment for every eye: MODE[,key=value,...], e.g. "
                        "'tilt,tilt_deg=54.74', 'disorder,kappa=5', 'full-frame,in_plane=random' "
                        "(modes: normal, chief-ray, tilt, disorder, ratio, full-frame)")
    g.add_argument("--product", default="singlet", help="which product drives vision: singlet | triplet")
    g.add_argument("--gain", type=float, default=1.0, help="modulation gain (>= 0)")


def response_from_args(a):
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
    g.add_argument("--view", default="world-panorama", help="world-panorama | head-panorama | eye-disc | perspective | retina")
    g.add_argument("--width", type=int, default=default_width, help="panorama width or disc size, pixels")
    g.add_argument("--eye", default=None, help="eye name or index (eye-disc, or to show one eye only)")
    g.add_argument("--scene", default=None, help="2:1 equirectangular scene image (default: procedural dusk)")
    g.add_argument("--north-col", type=float, default=None,
                   help="column (pixels) of geographic north in the scene (default: width/2)")


def view_from_args(a):
    from ..views import REGISTRY

    if a.view not in REGISTRY:
        raise MagretinaError(f"--view {a.view!r}: allowed {', '.join(REGISTRY)}")
    eye = a.eye
    if eye is not None and eye.isdigit():
        eye = int(eye)
    if a.view in ("eye-disc", "retina"):
        return REGISTRY[a.view](eye=0 if eye is None else eye, size=a.width)
    return REGISTRY[a.view](width=a.width, pick=eye)


def scene_from_args(a, width):
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


def display_from_args(a):
    """The display model and quantiser of parsed arguments: (Display, method, seed)."""
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
