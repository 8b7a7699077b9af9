"""Radical-pair definition files (TOML) and the bundled presets.

A definition file states one radical pair in the trade's units.  Format
(``format = "magretina-radical-pair/1"``; every key not listed is an error)::

    format = "magretina-radical-pair/1"
    name = "my-pair"                  # optional label
    description = "..."               # optional free text
    source = "..."                    # literature source(s) of the numbers
    axis_convention = "..."           # how the molecular frame is defined
    status = "primary"                # or "unconfirmed": values not checked against a
                                      # primary publication (kept out of the defaults)

    [relative_orientation]            # optional: rotation of radical B's tensors (and g)
    rotation_axis = [1, 0, 0]         #   into radical A's frame, applied after parsing
    rotation_deg = 45.0
    published = false                 #   false: the rotation is NOT from a published
    note = "..."                      #   structure; it is a parameter (load_pair overrides)

    [pair]                            # optional; every key optional
    k_s = 1e6                         # s^-1 (a caller may override)
    k_t = 1e6                         # s^-1, defaults to k_s
    exchange_mT = 0.0                 # J in H = -2J S_A.S_B
    dipolar_mT = [[...], [...], [...]]    # or:
    dipolar_distance_nm = 2.0             #   point dipole along
    dipolar_direction = [0, 0, 1]         #   this molecular-frame vector
    initial = "singlet"               # "triplet" or a singlet fraction in [0, 1]

    [radical_a]                       # and [radical_b], same keys
    name = "FAD"
    g = 2.0023                        # optional; free electron if omitted

    [[radical_a.nuclei]]              # zero or more
    name = "N5"
    spin = 1
    # exactly one of:
    hyperfine_mT = [[...], [...], [...]]   # full tensor, molecular frame
    isotropic_mT = 0.52                    # a * identity
    principal_mT = [Axx, Ayy, Azz]         # principal values, optionally rotated by
    rotation_axis = [1, 0, 0]              #   a rotation about this axis
    rotation_deg = 45.0                    #   by this angle (right-handed), or
    euler_zyz_deg = [0, 45, 0]             #   intrinsic z-y'-z'' Euler angles
    gamma_MHz_T = 3.077                    # optional: include nuclear Zeeman, γ/2π
    source = "..."                         # optional note
    label = "..."                          # optional atom label used by the source

Short forms, accepted for compact files: ``[a]``/``[b]`` for ``[radical_a]``/``[radical_b]``
and top-level ``k_s``/``k_t`` for the ``[pair]`` keys (giving both spellings is an error).

Presets are such files in ``renderer/spin/presets/``; a preset's name is its file
stem.  This module parses and validates; it computes nothing.
"""

from __future__ import annotations

import math
import os
from importlib import resources

import numpy as np
from scipy.spatial.transform import Rotation

from ..errors import ConfigError, MagretinaError
from .system import Nucleus, Radical, RadicalPair, point_dipolar_mT
from ..inputs import read_toml

FORMAT = "magretina-radical-pair/1"
_TOP = {"format", "name", "description", "source", "axis_convention", "pair", "radical_a",
        "radical_b", "a", "b", "k_s", "k_t", "status", "relative_orientation"}
_ORIENT = {"rotation_axis", "rotation_deg", "published", "note"}
STATUSES = ("primary", "unconfirmed")
_PAIR = {"k_s", "k_t", "exchange_mT", "dipolar_mT", "dipolar_distance_nm", "dipolar_direction",
         "initial"}
_RADICAL = {"name", "g", "nuclei", "source"}
_NUCLEUS = {"name", "spin", "hyperfine_mT", "isotropic_mT", "principal_mT", "rotation_axis",
            "rotation_deg", "euler_zyz_deg", "gamma_MHz_T", "source", "label"}


def _unknown(table, allowed, where, problems):
    for key in table:
        if key not in allowed:
            problems.append(f"{where}: unknown key {key!r}; allowed: {', '.join(sorted(allowed))}")


def _nucleus(d, where, problems):
    if not isinstance(d, dict):
        problems.append(f"{where}: must be a table, got {d!r}")
        return None
    _unknown(d, _NUCLEUS, where, problems)
    name = str(d.get("name", ""))
    if "spin" not in d:
        problems.append(f"{where}: missing key 'spin' (nuclear spin quantum number, e.g. 0.5 or 1)")
        return None
    forms = [k for k in ("hyperfine_mT", "isotropic_mT", "principal_mT") if k in d]
    if len(forms) != 1:
        problems.append(f"{where}: give exactly one of hyperfine_mT, isotropic_mT, principal_mT "
                        f"(found {forms or 'none'})")
        return None
    gamma = 0.0
    try:
        if "gamma_MHz_T" in d:
            gamma = 2 * math.pi * 1e6 * float(d["gamma_MHz_T"])
        if forms[0] != "principal_mT" and any(k in d for k in ("rotation_axis", "rotation_deg",
                                                               "euler_zyz_deg")):
            problems.append(f"{where}: rotation keys apply only with principal_mT")
            return None
        if forms[0] == "hyperfine_mT":
            return Nucleus(d["spin"], d["hyperfine_mT"], name=name, gamma_rad_s_T=gamma)
        if forms[0] == "isotropic_mT":
            return Nucleus.isotropic(d["spin"], float(d["isotropic_mT"]), name=name,
                                     gamma_rad_s_T=gamma)
        rot = None
        if "euler_zyz_deg" in d:
            if "rotation_axis" in d or "rotation_deg" in d:
                problems.append(f"{where}: give euler_zyz_deg or rotation_axis+rotation_deg, not both")
                return None
            e = np.asarray(d["euler_zyz_deg"], dtype=float)
            if e.shape != (3,):
                raise MagretinaError(f"euler_zyz_deg must be three angles, got {d['euler_zyz_deg']!r}")
            rot = Rotation.from_euler("ZYZ", e, degrees=True)
        elif "rotation_axis" in d or "rotation_deg" in d:
            if not ("rotation_axis" in d and "rotation_deg" in d):
                problems.append(f"{where}: rotation_axis and rotation_deg go together")
                return None
            ax = np.asarray(d["rotation_axis"], dtype=float)
            if ax.shape != (3,) or not np.all(np.isfinite(ax)) or np.linalg.norm(ax) == 0:
                raise MagretinaError(f"rotation_axis must be a non-zero 3-vector, got "
                                     f"{d['rotation_axis']!r}")
            rot = Rotation.from_rotvec(ax / np.linalg.norm(ax) * math.radians(float(d["rotation_deg"])))
        return Nucleus.from_principal(d["spin"], d["principal_mT"], rot, name=name, gamma_rad_s_T=gamma)
    except (MagretinaError, TypeError, ValueError) as exc:
        problems.append(f"{where}: {exc}")
        return None


def _radical(d, where, problems):
    if d is None:
        return Radical()
    if not isinstance(d, dict):
        problems.append(f"{where}: must be a table")
        return None
    _unknown(d, _RADICAL, where, problems)
    nuc_list = d.get("nuclei", [])
    if not isinstance(nuc_list, list):
        problems.append(f"{where}.nuclei: must be an array of tables ([[{where}.nuclei]])")
        return None
    nuclei = [_nucleus(n, f"{where}.nuclei[{i}]" + (f" ({n.get('name')})" if isinstance(n, dict)
                                                    and n.get("name") else ""), problems)
              for i, n in enumerate(nuc_list)]
    kw = {"name": str(d.get("name", ""))}
    if "g" in d:
        kw["g"] = d["g"]
    try:
        return Radical([n for n in nuclei if n is not None], **kw)
    except MagretinaError as exc:
        problems.append(f"{where}: {exc}")
        return None


def _rotate_radical(rad, rot):
    """Radical with every hyperfine tensor and the g tensor rotated, A' = R A Rᵀ."""
    m = rot.as_matrix()
    nuclei = [Nucleus(n.spin, m @ n.hyperfine_mT @ m.T, name=n.name, gamma_rad_s_T=n.gamma_rad_s_T)
              for n in rad.nuclei]
    g = m @ rad.g_tensor @ m.T
    return Radical(nuclei, g=g, name=rad.name)


def _orientation(data, problems, override):
    """Rotation of radical B into A's frame from [relative_orientation] and an override."""
    t = data.get("relative_orientation")
    if t is None and override is None:
        return None
    t = dict(t or {})
    if not isinstance(t, dict):
        problems.append("[relative_orientation] must be a table")
        return None
    _unknown(t, _ORIENT, "[relative_orientation]", problems)
    if override is not None:
        t.update({k: v for k, v in override.items() if v is not None})
    try:
        ax = np.asarray(t.get("rotation_axis", (1.0, 0.0, 0.0)), dtype=float)
        ang = float(t.get("rotation_deg", 0.0))
        if ax.shape != (3,) or not np.all(np.isfinite(ax)) or np.linalg.norm(ax) == 0:
            raise ValueError(f"rotation_axis must be a non-zero 3-vector, got {t.get('rotation_axis')!r}")
        if not math.isfinite(ang):
            raise ValueError(f"rotation_deg must be finite, got {ang!r}")
    except (TypeError, ValueError) as exc:
        problems.append(f"[relative_orientation]: {exc}")
        return None
    return Rotation.from_rotvec(ax / np.linalg.norm(ax) * math.radians(ang))


def parse_definition(data: dict, source="definition", k_s=None, k_t=None,
                     orientation=None) -> RadicalPair:
    """Build a RadicalPair from a parsed TOML table; all problems are reported at once.

    Parameters
    ----------
    data : dict
        The parsed file.
    source : str
        File name used in messages.
    k_s, k_t : float, optional
        Rates (s⁻¹) that override the file's ``[pair]`` values; k_t defaults to k_s.
    orientation : dict, optional
        ``{"rotation_axis": (3,), "rotation_deg": float}`` overriding the file's
        ``[relative_orientation]`` (the rotation taking radical B's tensors into A's frame).
    """
    problems = []
    status = data.get("status", "primary")
    if status not in STATUSES:
        problems.append(f"status = {status!r} is not allowed; allowed: {', '.join(STATUSES)}")
    _unknown(data, _TOP, "top level", problems)
    fmt = data.get("format", FORMAT)
    if fmt != FORMAT:
        problems.append(f"format = {fmt!r} is not supported; expected {FORMAT!r}")
    pair_t = data.get("pair", {})
    if not isinstance(pair_t, dict):
        problems.append("[pair] must be a table")
        pair_t = {}
    _unknown(pair_t, _PAIR, "[pair]", problems)
    pair_t = dict(pair_t)
    for key in ("k_s", "k_t"):
        if key in data:
            if key in pair_t:
                problems.append(f"{key} is given both at top level and in [pair]; keep one")
            pair_t[key] = data[key]
    rad = {}
    for long, short in (("radical_a", "a"), ("radical_b", "b")):
        if long in data and short in data:
            problems.append(f"[{long}] and [{short}] are the same radical; keep one")
        key = long if long in data else short
        rad[long] = _radical(data.get(key), key, problems)
    a, b = rad["radical_a"], rad["radical_b"]
    rot = _orientation(data, problems, orientation)
    if rot is not None and b is not None:
        b = _rotate_radical(b, rot)
    ks = k_s if k_s is not None else pair_t.get("k_s")
    if ks is None:
        problems.append("no singlet rate: give k_s in [pair] or on the command line (--k-s)")
    kt = k_t if k_t is not None else (pair_t.get("k_t") if k_s is None else None)
    if kt is None:
        kt = ks
    dip = None
    if "dipolar_mT" in pair_t and "dipolar_distance_nm" in pair_t:
        problems.append("[pair]: give dipolar_mT or dipolar_distance_nm, not both")
    elif "dipolar_distance_nm" in pair_t:
        try:
            dip = point_dipolar_mT(pair_t["dipolar_distance_nm"],
                                   pair_t.get("dipolar_direction", (0.0, 0.0, 1.0)))
        except (MagretinaError, TypeError, ValueError) as exc:
            problems.append(f"[pair]: {exc}")
    elif "dipolar_mT" in pair_t:
        dip = pair_t["dipolar_mT"]
    if "dipolar_direction" in pair_t and "dipolar_distance_nm" not in pair_t:
        problems.append("[pair]: dipolar_direction needs dipolar_distance_nm")
    pair = None
    if not problems:
        try:
            pair = RadicalPair(a, b, k_s=ks, k_t=kt, exchange_mT=pair_t.get("exchange_mT", 0.0),
                               dipolar_mT=dip, initial=pair_t.get("initial", "singlet"))
        except (MagretinaError, TypeError, ValueError) as exc:
            problems.append(str(exc))
    if problems:
        raise ConfigError(problems, source=source)
    return pair


def read_definition(path, k_s=None, k_t=None, orientation=None) -> RadicalPair:
    """Read a radical-pair definition file (TOML); see the module docstring for the format."""
    path = os.fspath(path)
    data = read_toml(path, "radical-pair definition")
    return parse_definition(data, source=path, k_s=k_s, k_t=k_t, orientation=orientation)


def _preset_dir():
    return resources.files(__package__).joinpath("presets")


def list_presets(include_unconfirmed=True) -> list:
    """Names of the bundled presets (file stems in renderer/spin/presets/).

    With ``include_unconfirmed=False`` only the default presets: those whose every value
    is cited from a primary publication (``status = "primary"``).
    """
    names = sorted(p.name[:-5] for p in _preset_dir().iterdir() if p.name.endswith(".toml"))
    if include_unconfirmed:
        return names
    return [n for n in names if preset_metadata(n).get("status", "primary") == "primary"]


def preset_path(name: str) -> str:
    """File path of a bundled preset; MagretinaError naming the choices if unknown."""
    p = _preset_dir().joinpath(f"{name}.toml")
    if not p.is_file():
        raise MagretinaError(f"unknown radical-pair preset {name!r}; available: "
                             + ", ".join(list_presets()))
    return os.fspath(p)


def preset_metadata(name_or_path: str) -> dict:
    """Top-level text fields (name, description, source, axis_convention, status,
    relative_orientation) of a file or preset; status defaults to "primary"."""
    path = name_or_path if os.path.isfile(name_or_path) else preset_path(name_or_path)
    data = read_toml(path, "radical-pair definition")
    out = {k: data[k] for k in ("name", "description", "source", "axis_convention",
                                "relative_orientation") if k in data}
    out["status"] = data.get("status", "primary")
    return out


def load_pair(name_or_path, k_s=None, k_t=None, orientation=None) -> RadicalPair:
    """A RadicalPair from a definition file path or a preset name.

    Parameters
    ----------
    name_or_path : str or path
        An existing file, or the name of a bundled preset (see :func:`list_presets`).
    k_s, k_t : float, optional
        Rates (s⁻¹) overriding the file's; k_t defaults to k_s when k_s is given.
    orientation : dict, optional
        ``{"rotation_axis": (3,), "rotation_deg": float}``: the relative orientation of
        the radicals (B's tensors into A's frame) where the file's is not published.
    """
    s = os.fspath(name_or_path)
    if os.path.isfile(s):
        return read_definition(s, k_s=k_s, k_t=k_t, orientation=orientation)
    if s.endswith(".toml") or os.sep in s:
        raise MagretinaError(f"radical-pair definition {s}: no such file")
    return read_definition(preset_path(s), k_s=k_s, k_t=k_t, orientation=orientation)
