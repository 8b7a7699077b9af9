"""The study file: TOML read with ``tomllib``, checked up front, resolved with defaults.

A study file has these tables (each documented in the example written by
``magretina new-study``)::

    [study]      name, description, seed (master seed of the per-shot SeedSequence)
    [site]       name, lat_deg, lon_deg, alt_km          (not needed for a fixed field)
    [field]      model = igrf | dipole | fixed, date; total_uT, inclination_deg,
                 declination_deg for a fixed field
    [pose]       yaw_deg, pitch_deg, roll_deg            (the base head pose)
    [layout]     preset = "lateral" or file = "my_layout.toml"; alignment (a hypothesis
                 for every eye); [layout.eyes.NAME] overrides any field of the Eye
                 class (its alignment wins); [layout.eye_offsets.NAME] eye movement
                 (azimuth_deg, elevation_deg, torsion_deg added to the eye's
                 placement); other keys any Layout field
    [response]   kind = a key of renderer.response.REGISTRY, product, csv, and the
                 constructor keywords of that class; [responses.NAME] alternatives
                 that a timeline step can switch to
    [views.NAME] kind = a key of renderer.views.REGISTRY plus that class's fields
    [scene]      kind = dusk | uniform | file, width, luminance, path, north_col
    [render]     gain, outside
    [display]    kind = srgb | gamma | table, bits, black_cd_m2, white_cd_m2, gamma,
                 table (CSV), dither = none | noise | ordered, temporal, pattern_grey
    [sequence]   kind = still | heading-sweep | head-scan | route, and its keys
    [timeline]   steps = [{t_s, action, ...}] (coil manipulations over time)
    [output]     encodings and exports
    [metrics]    providers and their options
    [sweep]      combine = grid | zip, [[sweep.axis]] key, values | range | linspace
    [orientation] conditions, hypotheses, preferred heading of an orientation
                 experiment (optional; see renderer.study.orientation)

:func:`validate` returns the resolved configuration (plain dicts, every default
filled in, so ``study.json`` states what was run) and collects every problem with
its key path and the allowed values or range.  Unknown keys are always errors: a
typo never falls back to a default.  Classes registered by other parts of the
package (views, responses, eyes) are checked against their own constructor
fields, so new options pass through without changes here.  This module builds no
library objects (see :mod:`.build`) and does not expand sweeps (see :mod:`.expand`,
whose :func:`~.expand.load_study` reads, validates and checks the sweep axes in one
call).
"""

from __future__ import annotations

import copy
import datetime as _dt
import hashlib
import os
from dataclasses import dataclass, field as dc_field

from ..budget import MAX_PIXELS, view_shape
from ..defaults import DEFAULT_GAIN
from ..display import make_display, parse_target
from ..errors import ConfigError, MagretinaError, did_you_mean
from ..eye import Eye, Layout, preset_names
from ..eye.alignment import parse_alignment
from ..field import MODELS as SITE_MODELS
from ..field.base import check_igrf_date
from ..inputs import read_toml_bytes
from ..response import PRODUCTS
from ..response import REGISTRY
from ..response.rf_lab_response import LabRFResponse
from ..views import REGISTRY as VIEWS
from . import sequences
from .metrics import PROVIDERS
from .orientation_config import check_orientation
from .schema import (REQUIRED, Key, canonical_json, check_even, check_names_in, check_passthrough,
                     check_table, check_value, resolve_path)

#: Response kinds of study files: the registry and the study-only lab-fixed RF table (it reads
#: two directions per receptor, so a timeline step that gives the coil's direction selects it).
RESPONSES = {**REGISTRY, "rf-lab-table": LabRFResponse}

#: Site models of the field registry, and a fixed vector given in the file.
FIELD_MODELS = (*SITE_MODELS, "fixed")
SCENE_KINDS = ("dusk", "uniform", "file")
PREVIEWS = ("none", "gif", "apng")
VIDEOS = ("none", "mp4", "lossless")
LOSSLESS_CODECS = ("libx264rgb", "ffv1")

STUDY = {
    "name": Key(str, "study"),
    "description": Key(str, ""),
    "seed": Key(int, 0, lo=0, hi=2**63 - 1),
}
SITE = {
    "name": Key(str, "site"),
    "lat_deg": Key(float, REQUIRED, lo=-90.0, hi=90.0, unit="degrees"),
    "lon_deg": Key(float, REQUIRED, lo=-180.0, hi=360.0, unit="degrees east"),
    "alt_km": Key(float, 0.0, lo=-10.0, hi=1000.0, unit="km above WGS84"),
}
FIELD = {
    "model": Key(str, "igrf", choices=FIELD_MODELS),
    "date": Key((str, _dt.date, float), None),
    "total_uT": Key(float, None, lo=0.0, hi=1e6, unit="µT"),
    "inclination_deg": Key(float, None, lo=-90.0, hi=90.0, unit="degrees"),
    "declination_deg": Key(float, 0.0, lo=-180.0, hi=180.0, unit="degrees"),
}
POSE = {
    "yaw_deg": Key(float, 0.0, lo=-360.0, hi=360.0, unit="degrees"),
    "pitch_deg": Key(float, 0.0, lo=-90.0, hi=90.0, unit="degrees"),
    "roll_deg": Key(float, 0.0, lo=-180.0, hi=180.0, unit="degrees"),
}
EYE_OFFSET = {
    "azimuth_deg": Key(float, 0.0, lo=-180.0, hi=180.0, unit="degrees (added to the eye's azimuth)"),
    "elevation_deg": Key(float, 0.0, lo=-180.0, hi=180.0,
                         unit="degrees (added to the eye's elevation; the sum must stay in "
                              "[-90, 90])"),
    "torsion_deg": Key(float, 0.0, lo=-180.0, hi=180.0, unit="degrees (added to the eye's torsion)"),
}
SCENE = {
    "kind": Key(str, "dusk", choices=SCENE_KINDS),
    "width": Key(int, None, lo=16, hi=32768, unit="pixels (even)"),
    "luminance": Key(float, 0.5, lo=0.0, hi=1.0, unit="linear"),
    "path": Key(str, None),
    "north_col": Key(float, None, lo=0.0, unit="pixels"),
}
RENDER = {
    "gain": Key(float, DEFAULT_GAIN, lo=0.0, hi=1e6),
    "outside": Key(float, 0.25, lo=0.0, hi=1.0),
}
DISPLAY = {
    "kind": Key(str, "srgb", choices=("srgb", "gamma", "table")),
    "bits": Key(int, 8, choices=(8, 10, 16)),
    "black_cd_m2": Key(float, None, lo=0.0, unit="cd/m² (srgb, gamma; default 0)"),
    "white_cd_m2": Key(float, None, lo=0.0, lo_open=True, unit="cd/m² (srgb, gamma; default 80)"),
    "gamma": Key(float, None, lo=0.0, hi=10.0, lo_open=True),
    "table": Key(str, None),
    "dither": Key(str, "none", choices=("none", "noise", "ordered")),
    "temporal": Key(bool, True, doc="new dither noise every frame (false: the same for all)"),
    "pattern_grey": Key((float, str), 0.5,
                        doc="background of the pattern metrics: relative 0..1, 'X cd/m2' or "
                            "'F white'"),
}
OUTPUT = {
    "png8": Key(bool, True, doc="PNG frames in the display's codes (8-bit sRGB by default)"),
    "png16": Key(bool, False, doc="16-bit linear PNG frames"),
    "figures": Key(bool, False, doc="annotated figures (for papers; never stimuli)"),
    "png_encoder": Key(str, "fast", choices=("fast", "small"),
                       doc="lossless PNG compression preset: fast (default) or small files; "
                           "the decoded pixels are the same"),
    "preview": Key(str, "none", choices=PREVIEWS),
    "preview_width": Key(int, 256, lo=8, hi=4096, unit="pixels"),
    "video": Key(str, "none", choices=VIDEOS),
    "lossless_codec": Key(str, "libx264rgb", choices=LOSSLESS_CODECS),
    "crf": Key(int, 18, lo=0, hi=51),
    "fps": Key(float, None, lo=0.0, hi=1000.0, lo_open=True, unit="frames per second"),
    "conditions": Key(bool, True),
    "timing": Key(bool, True, doc="timing/<shot>_<view>.csv: frame files with onset times"),
    "metrics": Key(bool, True),
    "netcdf": Key(bool, True),
}
METRICS = {
    "providers": Key(list, ["basic", "display"]),
    "grid_width": Key(int, 90, lo=8, hi=4096, unit="pixels (even)"),
}
SWEEP = {
    "combine": Key(str, "grid", choices=("grid", "zip")),
}
AXIS = {
    "key": Key(str, REQUIRED),
    "name": Key(str, None),
    "values": Key(list, None),
    "range": Key(list, None),
    "linspace": Key(list, None),
    "labels": Key(list, None),
    "group": Key(str, None),
}

#: Top-level tables in the order they are resolved and written to study.json.
SECTIONS = ("study", "site", "field", "pose", "layout", "response", "responses", "views", "scene",
            "render", "display", "sequence", "timeline", "output", "metrics", "sweep",
            "orientation")

DEFAULT_VIEWS = {"world": {"kind": "world-panorama", "width": 256}}


@dataclass(frozen=True)
class Study:
    """A parsed study file.

    Attributes
    ----------
    path : str
        The study file.
    base_dir : str
        Folder relative paths in the file are resolved against.
    sha256 : str
        SHA-256 of the file's bytes.
    raw : dict
        The TOML as parsed.
    resolved : dict
        Every table with defaults filled in (the configuration that is run).
    given : dict
        Keys given on the command line instead of the file's, by table (``{"display":
        {...}}``); already in ``raw`` and ``resolved``, kept to say where they came from.
    """

    path: str
    base_dir: str
    sha256: str
    raw: dict
    resolved: dict
    given: dict = dc_field(default_factory=dict)

    @property
    def config_sha256(self) -> str:
        """Identity of what is run: hash of the canonical resolved configuration."""
        return config_digest(self.resolved)


# Settings that change how outputs are stored but not one decoded value: left out of the
# configuration's identity, so a folder can be resumed with another choice.
STORAGE_ONLY = (("output", "png_encoder"),)


def config_digest(resolved) -> str:
    ident = dict(resolved)
    for table, key in STORAGE_ONLY:
        if isinstance(ident.get(table), dict) and key in ident[table]:
            ident[table] = {k: v for k, v in ident[table].items() if k != key}
    return hashlib.sha256(canonical_json(ident).encode()).hexdigest()


#: keys of the curve a display kind takes; another kind given on the command line drops them
_CURVE_KEYS = {"srgb": ("gamma", "table"), "gamma": ("table",),
               "table": ("gamma", "black_cd_m2", "white_cd_m2")}


def override_display(raw: dict, given: dict) -> dict:
    """A copy of ``raw`` whose [display] table takes the keys in ``given`` (``magretina run``
    flags).  A new ``kind`` drops the file's keys that belong to another curve (a gamma
    exponent, a table, or a black/white level beside a measured table) unless they are given
    too.  Nothing is checked here: :func:`validate` checks the result like the file's own keys."""
    if not given:
        return raw
    d = raw.get("display", {})
    d = dict(d) if isinstance(d, dict) else {}
    if "kind" in given:
        for k in _CURVE_KEYS.get(given["kind"], ()):
            if k not in given:
                d.pop(k, None)
    d.update(given)
    out = dict(raw)
    out["display"] = d
    return out


def mark_given(problems: list, table: str, given: dict) -> list:
    """Say which problems are about keys given on the command line, not in the file."""
    keys = tuple(f"{table}.{k}" for k in given)
    return [p + " (given on the command line)" if keys and p.startswith(keys) else p
            for p in problems]


def read_study(path) -> tuple[bytes, dict]:
    return read_toml_bytes(os.fspath(path), "study file")


def _file_key(path, value, base_dir, problems):
    if value is None:
        return
    full = resolve_path(base_dir, value)
    if not os.path.isfile(full):
        problems.append(f"{path} = {value!r}: no such file (looked for {full})")


def _v_study(raw, base_dir, out, problems):
    out["study"] = check_table("study", raw.get("study", {}), STUDY, problems)
    name = out["study"].get("name")
    if isinstance(name, str) and (not name.strip() or len(name) > MAX_NAME):
        problems.append(f"study.name: {len(name)} characters; must be 1..{MAX_NAME} (it names "
                        f"the default output folder)")


def _v_field(raw, base_dir, out, problems):
    out["field"] = _check_field(raw.get("field", {}), raw, problems)


def _v_site(raw, base_dir, out, problems):
    needs_site = out["field"].get("model") != "fixed"
    if "site" in raw or needs_site:
        if needs_site and "site" not in raw:
            problems.append(f"site: missing; field.model = {out['field'].get('model')!r} needs "
                            f"[site] with lat_deg and lon_deg")
            out["site"] = None
        else:
            out["site"] = check_table("site", raw.get("site", {}), SITE, problems)
    else:
        out["site"] = None


def _v_pose(raw, base_dir, out, problems):
    out["pose"] = check_table("pose", raw.get("pose", {}), POSE, problems)


def _v_layout(raw, base_dir, out, problems):
    out["layout"] = _check_layout(raw.get("layout", {}), base_dir, problems)


#: The response kind of lab-fixed RF tables: only an rf-on step (with the coil's
#: direction) selects one, so it is never the default [response].
LAB_RF_KIND = "rf-lab-table"


def _v_response(raw, base_dir, out, problems):
    out["response"] = check_response("response", raw.get("response", {
        "kind": "legendre", "coeffs": [0.7, 0.0, 0.1]}), base_dir, problems)
    if out["response"].get("kind") == LAB_RF_KIND:
        problems.append(f"response.kind = {LAB_RF_KIND!r}: a lab-fixed RF table needs the RF "
                        f"coil's direction; define it as [responses.NAME] and switch it on "
                        f"with a timeline step action = 'rf-on', select = NAME, direction = "
                        f"[north, east, down]")


def _v_responses(raw, base_dir, out, problems):
    alts = raw.get("responses", {})
    out["responses"] = {}
    if not isinstance(alts, dict):
        problems.append("responses: must be a table of named response tables")
        return
    for name, tbl in alts.items():
        if name == "default":
            problems.append("responses.default: reserved for [response]; choose another name")
            continue
        out["responses"][name] = check_response(f"responses.{name}", tbl, base_dir, problems)


def _v_views(raw, base_dir, out, problems):
    out["views"] = _check_views(raw.get("views", DEFAULT_VIEWS), problems)


def _v_scene(raw, base_dir, out, problems):
    out["scene"] = check_table("scene", raw.get("scene", {}), SCENE, problems)
    _check_scene(out["scene"], base_dir, problems)


def _v_render(raw, base_dir, out, problems):
    out["render"] = check_table("render", raw.get("render", {}), RENDER, problems)


def _v_display(raw, base_dir, out, problems):
    out["display"] = check_table("display", raw.get("display", {}), DISPLAY, problems)
    _check_display(out["display"], base_dir, problems)


def _v_sequence(raw, base_dir, out, problems):
    out["sequence"] = sequences.check_sequence(raw.get("sequence", {}), base_dir, problems)


def _v_timeline(raw, base_dir, out, problems):
    lab = {n for n, r in out["responses"].items()
           if isinstance(r, dict) and r.get("kind") == LAB_RF_KIND}
    out["timeline"] = sequences.check_timeline(raw.get("timeline", {}), set(out["responses"]),
                                               problems, lab_names=lab)


def _v_output(raw, base_dir, out, problems):
    out["output"] = check_table("output", raw.get("output", {}), OUTPUT, problems)
    _check_output(out, problems)


def _v_metrics(raw, base_dir, out, problems):
    out["metrics"] = _check_metrics(raw.get("metrics", {}), problems)


def _v_sweep(raw, base_dir, out, problems):
    out["sweep"] = _check_sweep(raw.get("sweep", {}), problems)


def _v_orientation(raw, base_dir, out, problems):
    if "orientation" in raw:  # only when present, so other studies resolve as before
        out["orientation"] = check_orientation(raw["orientation"], set(out["responses"]),
                                               problems)
    else:
        out.pop("orientation", None)


#: The validation steps in order: (name, raw tables the step reads, function).  A
#: step only has to be re-run for a sweep value when one of the tables it reads
#: changed, which is what makes a sweep of many values cheap to check
#: (:func:`validate` with ``base``).
STEPS = (
    ("study", ("study",), _v_study),
    ("field", ("field",), _v_field),
    ("site", ("site", "field"), _v_site),
    ("pose", ("pose",), _v_pose),
    ("layout", ("layout",), _v_layout),
    ("response", ("response",), _v_response),
    ("responses", ("responses",), _v_responses),
    ("views", ("views",), _v_views),
    ("scene", ("scene",), _v_scene),
    ("render", ("render",), _v_render),
    ("display", ("display",), _v_display),
    ("sequence", ("sequence",), _v_sequence),
    ("timeline", ("timeline", "responses"), _v_timeline),
    ("output", ("output", "display"), _v_output),
    ("metrics", ("metrics",), _v_metrics),
    ("sweep", ("sweep",), _v_sweep),
    ("orientation", ("orientation", "responses"), _v_orientation),
)


def validate(raw: dict, base_dir: str, problems: list, *, base: dict | None = None,
             changed=None, cache: dict | None = None) -> dict:
    """Check a parsed study mapping; return the resolved configuration.

    Problems are appended to ``problems`` (strings naming the key path); the
    returned mapping is only meaningful when none were found.

    Parameters
    ----------
    raw : dict
        The parsed study (TOML tables).
    base_dir : str
        Folder relative paths are resolved against.
    problems : list of str
        Receives one message per problem.
    base : dict, optional
        The resolved configuration of a study that differs from ``raw`` only in the
        top-level tables named in ``changed`` (a sweep value substituted into it).
        Only the steps that read a changed table are re-run; every other resolved
        table is shared with ``base`` (read-only) and its problems are not repeated.
    changed : iterable of str, optional
        Top-level tables of ``raw`` that differ from the study ``base`` came from.
    cache : dict, optional
        Results of earlier steps keyed by the step and the canonical JSON of the
        tables it read, so a table value shared by many shots is checked once.
    """
    if base is None:
        changed = None
        out = {}
    else:
        changed = set(changed or ())
        out = dict(base)
    for key in raw if changed is None else changed:
        if key not in SECTIONS and (changed is None or key in raw):
            problems.append(f"{key}: unknown table;{did_you_mean(key, SECTIONS)} allowed: "
                            f"{', '.join(SECTIONS)}")
    reprs = {}

    def rep(t):  # each raw table's repr once per call
        r = reprs.get(t)
        if r is None:
            r = reprs[t] = repr(raw.get(t))
        return r

    if changed is not None:
        for key in sorted(changed):
            if key in raw:
                if cache is None:
                    _check_texts(raw[key], problems, key)
                    continue
                tkey = ("texts", key, rep(key))
                if tkey not in cache:
                    cache[tkey] = []
                    _check_texts(raw[key], cache[tkey], key)
                problems.extend(cache[tkey])
    for name, reads, fn in STEPS if changed is None else _steps_reading(changed):
        if cache is None:
            fn(raw, base_dir, out, problems)
        else:
            # The raw tables a step reads determine its result (dependent steps read
            # the resolved tables of those same raw tables).  repr tells TOML values
            # apart exactly (floats round-trip, 1 != 1.0 != true); a different key
            # order only costs a second check.
            ckey = (name, tuple(rep(t) for t in reads))
            hit = cache.get(ckey)
            if hit is None:
                part, sub = {t: out[t] for t in reads if t != name and t in out}, []
                fn(raw, base_dir, part, sub)
                hit = cache[ckey] = ({k: v for k, v in part.items()
                                      if k == name or k not in reads}, sub)
            vals, sub = hit
            out.update(vals)
            if name == "orientation" and "orientation" not in vals:
                out.pop("orientation", None)
            problems.extend(sub)
        if name == "study" and changed is None:
            _check_texts(raw, problems)
    return out


_STEPS_READING: dict = {}


def _steps_reading(changed) -> tuple:
    """The validation steps that read any of the tables in ``changed`` (memoised)."""
    key = frozenset(changed)
    hit = _STEPS_READING.get(key)
    if hit is None:
        hit = _STEPS_READING[key] = tuple(st for st in STEPS if key.intersection(st[1]))
    return hit


#: Longest study name (the default output folder is named after it).
MAX_NAME = 100
_CONTROL = {chr(c) for c in range(32)} - {"\t", "\n", "\r"} | {"\x7f"}


def _check_texts(node, problems, path=""):
    """No NUL or other control characters in any string or key: names become folder
    names, CSV cells and NetCDF attributes, which cannot hold them."""
    if isinstance(node, dict):
        for k, v in node.items():
            p = f"{path}.{k}" if path else str(k)
            if any(c in _CONTROL for c in str(k)):
                problems.append(f"{p!r}: key holds a control character")
            _check_texts(v, problems, p)
    elif isinstance(node, list):
        for i, v in enumerate(node):
            _check_texts(v, problems, f"{path}[{i}]")
    elif isinstance(node, str) and any(c in _CONTROL for c in node):
        bad = next(c for c in node if c in _CONTROL)
        problems.append(f"{path} = {node[:40]!r}: holds the control character {bad!r}; not "
                        f"allowed in names and texts")


def _check_field(tbl, raw, problems):
    f = check_table("field", tbl, FIELD, problems)
    model = f.get("model")
    if model == "fixed":
        for k in ("total_uT", "inclination_deg"):
            if f.get(k) is None:
                problems.append(f"field.{k}: missing (required for field.model = 'fixed')")
    elif model in FIELD_MODELS:
        for k in ("total_uT", "inclination_deg"):
            if isinstance(tbl, dict) and k in tbl:
                problems.append(f"field.{k}: only for field.model = 'fixed' (model is {model!r})")
        if f.get("date") is None:
            problems.append(f"field.date: missing (required for field.model = {model!r}; "
                            f"ISO 8601 date within 1900-01-01..2030-01-01)")
        else:
            try:
                when = check_igrf_date(f["date"])
                f["date"] = when.date().isoformat() if when.time() == _dt.time() else \
                    when.isoformat()
            except MagretinaError as exc:
                problems.append(f"field.date: {exc}")
    if isinstance(f.get("date"), _dt.date):
        f["date"] = f["date"].isoformat()
    return f


def _check_layout(tbl, base_dir, problems):
    if not isinstance(tbl, dict):
        problems.append("layout: must be a table")
        return {}
    out = {}
    if "preset" in tbl and "file" in tbl:
        problems.append("layout: give preset or file, not both")
    if "file" in tbl:
        if check_value("layout.file", tbl["file"], Key(str), problems):
            _file_key("layout.file", tbl["file"], base_dir, problems)
            out["file"] = tbl["file"]
    else:
        preset = tbl.get("preset", "lateral")
        names = preset_names()
        if preset not in names:
            problems.append(f"layout.preset = {preset!r}: allowed {', '.join(map(repr, names))} "
                            f"(or layout.file = a layout TOML)")
        out["preset"] = preset
    if "alignment" in tbl:
        if _check_alignment("layout.alignment", tbl["alignment"], problems):
            out["alignment"] = tbl["alignment"]
    eyes = tbl.get("eyes", {})
    out["eyes"] = {}
    if not isinstance(eyes, dict):
        problems.append("layout.eyes: must be a table of [layout.eyes.NAME] tables")
    else:
        for name, etbl in eyes.items():
            if not isinstance(etbl, dict):
                problems.append(f"layout.eyes.{name}: must be a table of Eye fields")
                continue
            kw = check_passthrough(f"layout.eyes.{name}", etbl, Eye, problems,
                                   exclude=("name",), require=False)
            if "alignment" in kw and not _check_alignment(f"layout.eyes.{name}.alignment",
                                                          kw["alignment"], problems):
                kw.pop("alignment")
            out["eyes"][name] = kw
    offsets = tbl.get("eye_offsets", {})
    out["eye_offsets"] = {}
    if not isinstance(offsets, dict):
        problems.append("layout.eye_offsets: must be a table of [layout.eye_offsets.NAME] tables "
                        "(NAME an eye of the layout)")
    else:
        for name, otbl in offsets.items():
            out["eye_offsets"][name] = check_table(f"layout.eye_offsets.{name}", otbl, EYE_OFFSET,
                                                   problems)
    extra = {k: v for k, v in tbl.items()
             if k not in ("preset", "file", "eyes", "alignment", "eye_offsets")}
    out.update(check_passthrough("layout", extra, Layout, problems, exclude=("eyes",),
                                 require=False))
    return out


def _check_alignment(path, spec, problems) -> bool:
    """An alignment hypothesis: a mode name or a table {mode = ..., its keys}, checked
    by the hypothesis class itself (so every registered mode and its ranges apply)."""
    if not isinstance(spec, (str, dict)):
        problems.append(f"{path} = {spec!r}: must be a mode name or a table "
                        f"{{mode = ..., ...}}")
        return False
    try:
        parse_alignment(spec, path)
    except ConfigError as exc:
        problems.extend(exc.problems)
        return False
    except MagretinaError as exc:
        msg = str(exc)
        problems.append(msg if msg.startswith(path) else f"{path}: {msg}")
        return False
    return True


def check_response(path, tbl, base_dir, problems):
    if not isinstance(tbl, dict):
        problems.append(f"{path}: must be a table")
        return {}
    kind = tbl.get("kind")
    if kind not in RESPONSES:
        problems.append(f"{path}.kind = {kind!r}: allowed {', '.join(map(repr, RESPONSES))}")
        return dict(tbl)
    cls = RESPONSES[kind]
    out = {"kind": kind}
    if "product" in tbl:
        if check_value(f"{path}.product", tbl["product"], Key(str, choices=PRODUCTS), problems):
            out["product"] = tbl["product"]
    else:
        out["product"] = "singlet"
    if "csv" in tbl:
        if not hasattr(cls, "from_csv"):
            problems.append(f"{path}.csv: kind {kind!r} is not read from a CSV table")
        elif check_value(f"{path}.csv", tbl["csv"], Key(str), problems):
            _file_key(f"{path}.csv", tbl["csv"], base_dir, problems)
            out["csv"] = tbl["csv"]
        others = [k for k in tbl if k not in ("kind", "product", "csv")]
        for k in others:
            problems.append(f"{path}.{k}: not allowed with {path}.csv (the table file gives the "
                            f"response)")
        return out
    out.update(check_passthrough(path, tbl, cls, problems, reserved=("kind", "product", "csv")))
    if isinstance(out.get("path"), str):
        _file_key(f"{path}.path", out["path"], base_dir, problems)
    return out


def _check_views(tbl, problems):
    out = {}
    if not isinstance(tbl, dict) or not tbl:
        problems.append("views: must hold at least one [views.NAME] table")
        return out
    for name, v in tbl.items():
        path = f"views.{name}"
        if not name.replace("_", "").replace("-", "").isalnum():
            problems.append(f"{path}: view names are used in file names; use letters, digits, "
                            f"'-' and '_'")
        if not isinstance(v, dict):
            problems.append(f"{path}: must be a table")
            continue
        kind = v.get("kind")
        if kind not in VIEWS:
            problems.append(f"{path}.kind = {kind!r}: allowed {', '.join(map(repr, VIEWS))}")
            continue
        kw = check_passthrough(path, v, VIEWS[kind], problems, reserved=("kind",))
        shape = view_shape(kind, kw)
        if shape is not None and shape[0] * shape[1] > MAX_PIXELS:
            problems.append(f"{path}: {shape[1]} x {shape[0]} = {shape[0] * shape[1]:.3g} pixels; "
                            f"at most {MAX_PIXELS} pixels per view")
        out[name] = {"kind": kind, **kw}
    return out


def _check_scene(s, base_dir, problems):
    kind = s.get("kind")
    if kind == "file":
        if not s.get("path"):
            problems.append("scene.path: missing (required for scene.kind = 'file')")
        else:
            _file_key("scene.path", s["path"], base_dir, problems)
    elif s.get("path") is not None:
        problems.append(f"scene.path: only for scene.kind = 'file' (kind is {kind!r})")
    w = s.get("width")
    if w is not None and isinstance(w, int) and w % 2:
        problems.append(f"scene.width = {w}: must be even (the panorama is width x width/2)")


def _check_display(d, base_dir, problems):
    """Build the display model once here so a bad table (its row named) or a missing
    gamma is reported before anything renders."""
    if d.get("table") is not None:
        _file_key("display.table", d["table"], base_dir, problems)
        if any(p.startswith("display.table") for p in problems):
            return
    try:
        disp = make_display(d.get("kind"), d.get("bits"), d.get("black_cd_m2"),
                            d.get("white_cd_m2"), d.get("gamma"),
                            resolve_path(base_dir, d["table"]) if d.get("table") else None,
                            where="display")
        parse_target(d.get("pattern_grey"), disp, where="display.pattern_grey")
    except MagretinaError as exc:
        problems.append(str(exc))


def _check_output(out, problems):
    o = out["output"]
    bits = out.get("display", {}).get("bits")
    if bits not in (None, 8):
        for k in ("video", "preview"):
            if o.get(k) not in (None, "none"):
                problems.append(f"output.{k} = {o[k]!r}: needs display.bits = 8 (videos and "
                                f"previews are 8-bit; the display has {bits})")
    if o.get("video") not in (None, "none") and not o.get("png8"):
        problems.append("output.video needs output.png8 = true (videos are encoded from the "
                        "8-bit sRGB frames)")
    if o.get("preview") not in (None, "none") and not o.get("png8"):
        problems.append("output.preview needs output.png8 = true (previews are made from the "
                        "8-bit sRGB frames)")
    if not (o.get("png8") or o.get("png16")):
        problems.append("output: at least one of png8, png16 must be true")


def _check_metrics(tbl, problems):
    if not isinstance(tbl, dict):
        problems.append("metrics: must be a table")
        return {}
    m = check_table("metrics", tbl, METRICS, problems, extra_ok=("options",))
    provs = m.get("providers", [])
    if isinstance(provs, list):
        for i, p in enumerate(provs):
            if p not in PROVIDERS:
                problems.append(f"metrics.providers[{i}] = {p!r}: allowed "
                                f"{', '.join(map(repr, PROVIDERS))}")
    check_even("metrics.grid_width", m.get("grid_width"), problems)
    m["options"] = copy.deepcopy(check_names_in(
        "metrics.options", m.get("options", {}), PROVIDERS, problems,
        shape="a table of [metrics.options.PROVIDER] tables", unknown="no such provider; allowed",
        quote=True))
    return m


def _check_sweep(tbl, problems):
    if not isinstance(tbl, dict):
        problems.append("sweep: must be a table")
        return {"combine": "grid", "axis": []}
    s = check_table("sweep", tbl, SWEEP, problems, extra_ok=("axis",))
    axes = s.get("axis", [])
    if not isinstance(axes, list) or not all(isinstance(a, dict) for a in axes):
        problems.append("sweep.axis: must be an array of tables ([[sweep.axis]])")
        axes = []
    s["axis"] = [check_table(f"sweep.axis[{i}]", a, AXIS, problems) for i, a in enumerate(axes)]
    return s
