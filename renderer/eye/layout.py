"""Layouts: the set of eyes of one animal, loaded from preset or user TOML files.

A preset is a TOML file in ``renderer/eye/presets/`` with top-level ``name``,
``description``, ``source`` and one ``[[eye]]`` table per eye whose keys are the
fields of :class:`renderer.eye.Eye`.  Unknown keys are errors.  This module also
reports field-of-view bookkeeping along the horizon; it does not render.
"""

from __future__ import annotations

import os
import tomllib
from dataclasses import dataclass, fields
from importlib import resources

import numpy as np

from ..errors import ConfigError, MagretinaError
from .eye import Eye

_TOP_KEYS = {"name", "description", "source", "eye"}


@dataclass(frozen=True)
class Layout:
    """One or more eyes in the head.

    Attributes
    ----------
    name : str
    eyes : tuple of Eye
    description, source : str
        What the layout represents and where its numbers come from.
    """

    name: str
    eyes: tuple
    description: str = ""
    source: str = ""

    def __post_init__(self):
        eyes = tuple(self.eyes)
        if not eyes:
            raise MagretinaError(f"layout {self.name!r} has no eyes")
        object.__setattr__(self, "eyes", eyes)

    def __len__(self):
        return len(self.eyes)

    def eye_index(self, which) -> int:
        """Index of an eye given by index or name."""
        if isinstance(which, (int, np.integer)):
            if not 0 <= int(which) < len(self.eyes):
                raise MagretinaError(f"eye index {which} out of range for layout {self.name!r} "
                                     f"with {len(self.eyes)} eye(s)")
            return int(which)
        names = [e.name for e in self.eyes]
        if which in names:
            return names.index(which)
        raise MagretinaError(f"layout {self.name!r} has no eye {which!r}; eyes: {', '.join(names)}")

    def with_eyes(self, eyes) -> "Layout":
        return Layout(self.name, tuple(eyes), self.description, self.source)

    def describe(self) -> dict:
        return {"name": self.name, "description": self.description, "source": self.source,
                "eyes": [e.describe() for e in self.eyes]}


def preset_names() -> list[str]:
    """Names of the layout presets shipped with the package."""
    root = resources.files(__package__) / "presets"
    return sorted(p.name[:-5] for p in root.iterdir() if p.name.endswith(".toml"))


def parse_layout(data: dict, source: str = "<layout>") -> Layout:
    """Build a Layout from a parsed TOML mapping, reporting every problem at once."""
    problems = []
    for key in data:
        if key not in _TOP_KEYS:
            problems.append(f"unknown key {key!r}; allowed: {', '.join(sorted(_TOP_KEYS))}")
    eye_tables = data.get("eye", [])
    if not isinstance(eye_tables, list) or not eye_tables:
        problems.append("needs at least one [[eye]] table")
        eye_tables = []
    allowed = {f.name for f in fields(Eye)}
    eyes = []
    for i, tbl in enumerate(eye_tables):
        if not isinstance(tbl, dict):
            problems.append(f"eye[{i}] must be a table")
            continue
        bad = [k for k in tbl if k not in allowed]
        for k in bad:
            problems.append(f"eye[{i}].{k}: unknown key; allowed: {', '.join(sorted(allowed))}")
        try:
            eyes.append(Eye(**{k: v for k, v in tbl.items() if k in allowed}))
        except MagretinaError as exc:
            problems.append(f"eye[{i}]: {exc}")
        except TypeError as exc:
            problems.append(f"eye[{i}]: {exc}")
    if problems:
        raise ConfigError(problems, source=source)
    return Layout(name=str(data.get("name", os.path.basename(source))), eyes=tuple(eyes),
                  description=str(data.get("description", "")), source=str(data.get("source", "")))


def load_layout(name_or_path) -> Layout:
    """Load a layout preset by name (``"lateral"``, ``"frontal"``, ``"all-around"``, ...)
    or a user TOML file by path."""
    s = os.fspath(name_or_path)
    if s in preset_names():
        ref = resources.files(__package__) / "presets" / f"{s}.toml"
        with ref.open("rb") as fh:
            return parse_layout(tomllib.load(fh), source=f"layout preset {s}")
    if os.path.isfile(s):
        try:
            with open(s, "rb") as fh:
                data = tomllib.load(fh)
        except tomllib.TOMLDecodeError as exc:
            raise MagretinaError(f"layout file {s}: not valid TOML ({exc})") from None
        return parse_layout(data, source=s)
    raise MagretinaError(f"unknown layout {s!r}: not a preset ({', '.join(preset_names())}) "
                         f"and no such file")
