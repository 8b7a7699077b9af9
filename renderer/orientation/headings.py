"""Reading a CSV of observed headings, defensively, with errors that name the row.

The file has one heading per row and a header line.  Columns (names are matched
case-insensitively, surrounding blanks ignored):

* ``heading_deg`` (required): the chosen heading, degrees clockwise from north, in
  [0, 360] (360 is read as 0);
* ``condition`` (required): the condition name, as in the study file;
* ``animal`` (optional): an identifier of the animal (for second-order statistics and
  paired tests); missing means every row is its own animal;
* ``trial`` (optional): a trial label, kept as text;
* ``axial`` (optional): true/false per row (1/0, yes/no); a condition is axial when
  its rows say so; mixing axial and non-axial rows in one condition is an error.

Lines starting with ``#`` are comments.  The file is read through the shared
defensive layer (:func:`renderer.inputs.read_text_file`: size limit, regular file,
UTF-8); the reader then refuses missing columns, empty or non-numeric headings,
angles out of range and rows without a condition, naming file, line and value.
It returns plain Python structures; it does no statistics.
"""

from __future__ import annotations

import csv
import io
import math
import os
from dataclasses import dataclass

from ..errors import MagretinaError
from ..inputs import MAX_TEXT_BYTES, read_text_file

MAX_BYTES = MAX_TEXT_BYTES
REQUIRED = ("heading_deg", "condition")
OPTIONAL = ("animal", "trial", "axial")
_TRUE = {"1", "true", "yes", "y", "t"}
_FALSE = {"0", "false", "no", "n", "f", ""}


@dataclass(frozen=True)
class Headings:
    """Observed headings grouped by condition.

    Attributes
    ----------
    path : str
    rows : tuple of (condition, animal, trial, heading_deg, line)
    axial : dict condition -> bool
    """

    path: str
    rows: tuple
    axial: dict

    @property
    def conditions(self) -> list:
        seen = []
        for c, *_ in self.rows:
            if c not in seen:
                seen.append(c)
        return seen

    def angles(self, condition) -> list:
        return [h for c, _, _, h, _ in self.rows if c == condition]

    def by_animal(self, condition) -> dict:
        out = {}
        for c, a, _, h, _ in self.rows:
            if c == condition:
                out.setdefault(a, []).append(h)
        return out


def read_headings(path, axial=None) -> Headings:
    """Read and check a headings CSV (see the module docstring).

    Parameters
    ----------
    path : str or path-like
    axial : bool or None
        Force every condition axial (True) or not (False); None: from the ``axial``
        column (default False).
    """
    p = os.fspath(path)
    # size, regular file, UTF-8 (BOM dropped) and NUL checks: the shared defensive layer
    text = read_text_file(p, "headings file", MAX_BYTES)
    if "\x00" in text:
        raise MagretinaError(f"headings file {p}: contains NUL bytes; not a text CSV file")
    lines = [(i + 1, ln) for i, ln in enumerate(text.splitlines())
             if ln.strip() and not ln.lstrip().startswith("#")]
    if not lines:
        raise MagretinaError(f"headings file {p}: no header line and no rows")
    reader = csv.reader(io.StringIO("\n".join(ln for _, ln in lines)))
    try:
        table = list(reader)
    except csv.Error as exc:
        raise MagretinaError(f"headings file {p}: not valid CSV ({exc})") from None
    header = [h.strip().lower() for h in table[0]]
    missing = [c for c in REQUIRED if c not in header]
    if missing:
        raise MagretinaError(f"headings file {p}: missing column(s) {', '.join(missing)}; "
                             f"found {', '.join(header) or 'none'}; required "
                             f"{', '.join(REQUIRED)}, optional {', '.join(OPTIONAL)}")
    dup = sorted({h for h in header if header.count(h) > 1 and h})
    if dup:
        raise MagretinaError(f"headings file {p}: column(s) {', '.join(dup)} appear twice")
    col = {h: i for i, h in enumerate(header)}
    rows, ax = [], {}
    if len(table) < 2:
        raise MagretinaError(f"headings file {p}: a header but no rows of headings")
    for k, rec in enumerate(table[1:], start=1):
        line = lines[k][0] if k < len(lines) else k + 1
        where = f"headings file {p}, line {line}"
        if len(rec) != len(header):
            raise MagretinaError(f"{where}: {len(rec)} field(s), the header has {len(header)}")
        get = lambda name: rec[col[name]].strip() if name in col else ""  # noqa: E731
        cond = get("condition")
        if not cond:
            raise MagretinaError(f"{where}: empty condition")
        raw = get("heading_deg")
        if not raw:
            raise MagretinaError(f"{where}: empty heading_deg (condition {cond!r})")
        try:
            h = float(raw)
        except ValueError:
            raise MagretinaError(f"{where}: heading_deg = {raw!r} is not a number") from None
        if not math.isfinite(h) or not 0.0 <= h <= 360.0:
            raise MagretinaError(f"{where}: heading_deg = {raw!r} is out of range; allowed "
                                 f"[0, 360] degrees clockwise from north")
        a_raw = get("axial").lower()
        if a_raw not in _TRUE | _FALSE:
            raise MagretinaError(f"{where}: axial = {a_raw!r}; allowed true/false, yes/no, 1/0")
        a = a_raw in _TRUE
        if axial is None and "axial" in col:
            if cond in ax and ax[cond] != a:
                raise MagretinaError(f"{where}: condition {cond!r} mixes axial and non-axial rows")
            ax[cond] = a
        animal = get("animal") or f"row{line}"
        rows.append((cond, animal, get("trial"), h % 360.0, line))
    conds = {r[0] for r in rows}
    axial_map = {c: (bool(axial) if axial is not None else ax.get(c, False)) for c in conds}
    return Headings(p, tuple(rows), axial_map)
