"""Layouts: the set of eyes of one animal, loaded from preset or user TOML files.

A preset is a TOML file in ``renderer/eye/presets/`` with top-level ``name``,
``description``, ``source``, an optional layout-wide ``alignment`` (a mode name or a
table, see :mod:`renderer.eye.alignment`) and one ``[[eye]]`` table per eye whose
keys are the fields of :class:`renderer.eye.Eye` (an eye's own ``alignment`` wins).
Unknown keys are errors.  This module also reports visual-field bookkeeping
(monocular, binocular, cyclopean and blind widths in a plane of the head) and applies
eye movements; it does not render.
"""

from __future__ import annotations

import os
import tomllib
from dataclasses import dataclass, fields
from importlib import resources

import numpy as np

from ..errors import ConfigError, MagretinaError
from ..frames import azel_to_vec
from .eye import Eye
from ..inputs import read_toml

_TOP_KEYS = {"name", "description", "source", "eye", "alignment"}


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

    def moved(self, offsets) -> "Layout":
        """The layout after eye movements for one shot.

        Parameters
        ----------
        offsets : mapping
            {eye name or index: (d_azimuth_deg, d_elevation_deg, d_torsion_deg)}
            (a shorter sequence leaves the rest 0).  Offsets add to each eye's
            placement angles; its field of view moves with it.
        """
        eyes = list(self.eyes)
        for which, off in dict(offsets).items():
            k = self.eye_index(which)
            vals = [float(x) for x in np.atleast_1d(np.asarray(off, dtype=float))]
            if not 1 <= len(vals) <= 3:
                raise MagretinaError(f"eye offsets for {which!r}: give (d_azimuth, d_elevation, "
                                     f"d_torsion) in degrees, got {off!r}")
            eyes[k] = eyes[k].moved(*vals)
        return self.with_eyes(eyes)

    def with_alignment(self, alignment, eyes=None) -> "Layout":
        """The layout with ``alignment`` (an Alignment, mode name or table) for the given
        eyes (names or indices; default all)."""
        picked = range(len(self.eyes)) if eyes is None else [self.eye_index(w) for w in eyes]
        new = list(self.eyes)
        for k in picked:
            new[k] = new[k].with_alignment(alignment)
        return self.with_eyes(new)

    def field_bookkeeping(self, elevation_deg=0.0, step_deg=0.01) -> "FieldBookkeeping":
        """Widths of the visual field along a circle of constant head elevation.

        Directions are sampled every ``step_deg`` of head azimuth (widths are exact to
        about one step) and tested with each eye's field-of-view boundary.

        Returns
        -------
        FieldBookkeeping
        """
        n = int(round(360.0 / float(step_deg)))
        d = azel_to_vec(-180.0 + (np.arange(n) + 0.5) * 360.0 / n, float(elevation_deg))
        seen = np.stack([e.visible(d @ e.R_head_eye) for e in self.eyes])
        count = seen.sum(axis=0)
        w = 360.0 / n
        return FieldBookkeeping(
            elevation_deg=float(elevation_deg),
            monocular_deg=tuple(float(x) * w for x in seen.sum(axis=1)),
            binocular_deg=float(np.sum(count >= 2)) * w,
            cyclopean_deg=float(np.sum(count >= 1)) * w,
            blind_deg=float(np.sum(count == 0)) * w)


@dataclass(frozen=True)
class FieldBookkeeping:
    """Visual-field widths (degrees) along a circle of constant head elevation.

    Attributes
    ----------
    elevation_deg : float
    monocular_deg : tuple of float
        Each eye's field width.
    binocular_deg : float
        Width seen by two or more eyes.
    cyclopean_deg : float
        Width seen by at least one eye.
    blind_deg : float
        360° − cyclopean.
    """

    elevation_deg: float
    monocular_deg: tuple
    binocular_deg: float
    cyclopean_deg: float
    blind_deg: float

    def as_dict(self) -> dict:
        return {k: getattr(self, k) for k in self.__dataclass_fields__}


def symmetric_bookkeeping(nasal_deg, temporal_deg, psi_deg) -> dict:
    """Closed-form bookkeeping of a bilaterally symmetric two-eye layout whose optic
    axes lie at azimuth ±ψ in the plane considered, each eye seeing ``nasal_deg``
    towards the beak and ``temporal_deg`` away from it:

    monocular = nasal + temporal, binocular = 2(nasal − ψ) (front overlap),
    cyclopean = 2·monocular − binocular, blind = 360° − cyclopean.
    Valid while 0 ≤ nasal − ψ and ψ + temporal ≤ 180° (no rear overlap).
    """
    mono = float(nasal_deg) + float(temporal_deg)
    bino = 2.0 * (float(nasal_deg) - float(psi_deg))
    if bino < 0 or float(psi_deg) + float(temporal_deg) > 180.0:
        raise MagretinaError("symmetric_bookkeeping: needs nasal_deg >= psi_deg and "
                             "psi_deg + temporal_deg <= 180")
    cyc = 2.0 * mono - bino
    return {"monocular_deg": mono, "binocular_deg": bino, "cyclopean_deg": cyc,
            "blind_deg": 360.0 - cyc}


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
    default_alignment = data.get("alignment")
    eyes = []
    for i, tbl in enumerate(eye_tables):
        if not isinstance(tbl, dict):
            problems.append(f"eye[{i}] must be a table")
            continue
        bad = [k for k in tbl if k not in allowed]
        for k in bad:
            problems.append(f"eye[{i}].{k}: unknown key; allowed: {', '.join(sorted(allowed))}")
        kw = {k: v for k, v in tbl.items() if k in allowed}
        if default_alignment is not None and "alignment" not in kw:
            kw["alignment"] = default_alignment
        try:
            eyes.append(Eye(**kw))
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
        data = read_toml(s, "layout file")
        return parse_layout(data, source=s)
    raise MagretinaError(f"unknown layout {s!r}: not a preset ({', '.join(preset_names())}) "
                         f"and no such file")
