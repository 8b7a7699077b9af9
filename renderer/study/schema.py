"""A small checker for configuration tables: known keys, types, ranges, choices.

A schema is a mapping ``key -> Key(...)``.  :func:`check_table` walks one parsed
TOML table against it, fills in documented defaults for keys that are absent, and
appends one message per problem (unknown key with the allowed list, wrong type,
value out of range, value not among the choices) to a shared list, so a whole
study file is reported at once.  Keys whose allowed set is only known at run time
(the fields of a registered view or eye class) are checked by
:func:`check_passthrough` against the class's dataclass fields or constructor
signature.  Two helpers every stage shares live here too: :func:`resolve_path`
(paths in a study file are relative to the file) and :func:`canonical_json` (the
text that configuration digests are taken of).  This module knows nothing about
what the keys mean.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import inspect
import json
import math
import os
from dataclasses import dataclass

from ..errors import did_you_mean

REQUIRED = object()


def resolve_path(base_dir, p) -> str:
    """``p`` if absolute, else ``p`` relative to ``base_dir`` (the study file's folder)."""
    return p if os.path.isabs(p) else os.path.join(base_dir, p)


def canonical_json(obj) -> str:
    """Sorted-key, separator-free JSON of ``obj`` (non-JSON values as ``str``): digest input."""
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), default=str)

_TYPE_NAMES = {bool: "true/false", int: "an integer", float: "a number", str: "a string",
               list: "an array", dict: "a table"}


@dataclass(frozen=True)
class Key:
    """One allowed key.

    Parameters
    ----------
    type : type or tuple of types
        Allowed Python types after TOML parsing (``float`` also accepts integers).
    default : object
        Value used when the key is absent (``REQUIRED``: absence is a problem).
    lo, hi : float or None
        Inclusive range for numbers; ``lo_open``/``hi_open`` make a bound exclusive.
    choices : tuple or None
        Allowed values.
    unit : str
        Printed after ranges.
    """

    type: object = float
    default: object = None
    lo: float | None = None
    hi: float | None = None
    lo_open: bool = False
    hi_open: bool = False
    choices: tuple | None = None
    unit: str = ""
    doc: str = ""


def type_ok(value, types) -> bool:
    types = types if isinstance(types, tuple) else (types,)
    for t in types:
        if t is float and isinstance(value, (int, float)) and not isinstance(value, bool):
            return True
        if t is int and isinstance(value, int) and not isinstance(value, bool):
            return True
        if t is str and isinstance(value, str):
            return True
        if t is bool and isinstance(value, bool):
            return True
        if t is list and isinstance(value, list):
            return True
        if t is dict and isinstance(value, dict):
            return True
        if t is _dt.date and isinstance(value, (_dt.date, _dt.datetime)):
            return True
    return False


def type_name(types) -> str:
    types = types if isinstance(types, tuple) else (types,)
    return " or ".join(_TYPE_NAMES.get(t, getattr(t, "__name__", str(t))) for t in types)


def range_text(k: Key) -> str:
    lb = "(" if k.lo_open else "["
    rb = ")" if k.hi_open else "]"
    lo = "-inf" if k.lo is None else f"{k.lo:g}"
    hi = "inf" if k.hi is None else f"{k.hi:g}"
    return f"{lb}{lo}, {hi}{rb}" + (f" {k.unit}" if k.unit else "")


def check_value(path, value, k: Key, problems) -> bool:
    """Check one value against its Key; append problems; return True if fine."""
    if not type_ok(value, k.type):
        problems.append(f"{path} = {value!r}: must be {type_name(k.type)}")
        return False
    if k.choices is not None and value not in k.choices:
        problems.append(f"{path} = {value!r}: allowed {', '.join(repr(c) for c in k.choices)}")
        return False
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        v = float(value)
        if not math.isfinite(v):
            problems.append(f"{path} = {value!r}: must be finite")
            return False
        bad = (k.lo is not None and (v < k.lo or (k.lo_open and v == k.lo))) or \
              (k.hi is not None and (v > k.hi or (k.hi_open and v == k.hi)))
        if bad:
            problems.append(f"{path} = {value!r} is out of range; allowed {range_text(k)}")
            return False
    return True


def check_table(path, table, schema: dict, problems, *, extra_ok=()) -> dict:
    """Check a table against ``schema``; return it with defaults filled in.

    ``extra_ok`` names keys checked elsewhere (sub-tables); they are copied as is.
    """
    out = {}
    if not isinstance(table, dict):
        problems.append(f"{path}: must be a table")
        return out
    allowed = sorted(set(schema) | set(extra_ok))
    for key, value in table.items():
        where = f"{path}.{key}" if path else key
        if key in extra_ok:
            out[key] = value
        elif key not in schema:
            problems.append(f"{where}: unknown key;{did_you_mean(key, allowed)} allowed: "
                            f"{', '.join(allowed)}")
        elif check_value(where, value, schema[key], problems):
            out[key] = value
    for key, k in schema.items():
        if key not in table:
            if k.default is REQUIRED:
                where = f"{path}.{key}" if path else key
                problems.append(f"{where}: missing (required, {type_name(k.type)})")
            else:
                out[key] = k.default
    return out


def check_even(path, value, problems):
    """An integer ``value`` at ``path`` must be even (a 2:1 grid's width, a heading grid)."""
    if isinstance(value, int) and value % 2:
        problems.append(f"{path} = {value}: must be even")


def check_names_in(path, table, allowed, problems, *, shape="a table",
                   unknown="unknown key; allowed:", quote=False) -> dict:
    """A sub-table whose keys must come from ``allowed`` (their values are checked
    elsewhere); returns a shallow copy, or {} if it is not a table."""
    if not isinstance(table, dict):
        problems.append(f"{path}: must be {shape}")
        return {}
    listed = ", ".join(map(repr, allowed) if quote else allowed)
    for k in table:
        if k not in allowed:
            problems.append(f"{path}.{k}: {unknown} {listed}")
    return dict(table)


def check_named_tables(path, items, schema, problems, *, hint):
    """An array of tables ``[[path]]`` with a unique ``name`` each: at least one, each
    checked against ``schema``.  Yields (its path, the checked table) per item, one at a
    time, so the caller's own checks of an item report right after it; ``hint`` names
    the keys a user should give."""
    if not isinstance(items, list) or not items:
        problems.append(f"{path}: give at least one [[{path}]] ({hint})")
        return
    names = set()
    for i, item in enumerate(items):
        where = f"{path}[{i}]"
        checked = check_table(where, item, schema, problems)
        if checked.get("name") in names:
            problems.append(f"{where}.name = {checked['name']!r}: used twice")
        names.add(checked.get("name"))
        yield where, checked

def init_fields(cls) -> dict:
    """Constructor keywords of ``cls``: name -> default (``REQUIRED`` if none).

    Dataclass fields with ``init=True`` for dataclasses, else the parameters of
    ``__init__`` (so new view or eye options pass through without schema edits).
    """
    if dataclasses.is_dataclass(cls):
        out = {}
        for f in dataclasses.fields(cls):
            if not f.init:
                continue
            if f.default is not dataclasses.MISSING:
                out[f.name] = f.default
            elif f.default_factory is not dataclasses.MISSING:  # type: ignore[misc]
                out[f.name] = f.default_factory()  # type: ignore[misc]
            else:
                out[f.name] = REQUIRED
        return out
    out = {}
    for name, p in inspect.signature(cls).parameters.items():
        if p.kind in (p.VAR_POSITIONAL, p.VAR_KEYWORD):
            continue
        out[name] = REQUIRED if p.default is p.empty else p.default
    return out


def check_passthrough(path, table, cls, problems, *, reserved=(), exclude=(),
                      require=True) -> dict:
    """Keys of ``table`` (minus ``reserved``) must be constructor keywords of ``cls``.

    Returns the keywords to pass (absent ones left to the class's defaults).
    ``require=False`` for overrides of an object that already exists (a preset).
    """
    allowed = {k: v for k, v in init_fields(cls).items() if k not in exclude}
    kw = {}
    for key, value in table.items():
        if key in reserved:
            continue
        if key not in allowed:
            names = sorted(set(allowed) | set(reserved))
            problems.append(f"{path}.{key}: unknown key for {cls.__name__};"
                            f"{did_you_mean(key, names)} allowed: {', '.join(names)}")
        else:
            kw[key] = value
    for key, default in allowed.items():
        if require and default is REQUIRED and key not in table:
            problems.append(f"{path}.{key}: missing (required by {cls.__name__})")
    return kw
