"""Axial responses given as a table of (θ in degrees, value), e.g. from a paper's figure.

The table is read from a two-column CSV (header optional, ``#`` comments allowed)
and interpolated with a cubic spline in θ whose slope is zero at the poles, so that
f is smooth on the sphere as a function of direction.  A table that stops at 90°
is mirrored, f(180° − θ) = f(θ), the field-reversal symmetry of radical-pair
yields.  This module does not fit analytic series; see :mod:`.legendre`.
"""

from __future__ import annotations

import os

import numpy as np
from scipy.interpolate import CubicSpline

from ..errors import MagretinaError
from .base import AxialResponse
from ..inputs import read_csv_rows


def _read_two_columns(path):
    rows = []
    for lineno, row in enumerate(read_csv_rows(path, "response table"), start=1):
        if not row or row[0].strip().startswith("#"):
            continue
        cells = [c.strip() for c in row if c.strip() != ""]
        if len(cells) < 2:
            raise MagretinaError(f"{path}: line {lineno}: expected two columns "
                                 f"(theta_deg, value), got {row!r}")
        try:
            rows.append((float(cells[0]), float(cells[1])))
        except ValueError:
            if rows:  # a header is allowed only before the data
                raise MagretinaError(f"{path}: line {lineno}: not numbers: {row!r}") from None
    if len(rows) < 3:
        raise MagretinaError(f"response table {path}: needs at least 3 rows of (theta_deg, value), "
                             f"found {len(rows)}")
    return np.array(rows, dtype=np.float64)


class Tabulated(AxialResponse):
    """An axial response interpolated from samples f(θ).

    Parameters
    ----------
    theta_deg : array_like, shape (n,)
        Strictly increasing angles between receptor axis and field, degrees,
        starting at 0 and ending at 90 (mirrored) or 180.
    values : array_like, shape (n,)
        Response values at those angles.
    source : str, optional
        Where the numbers came from (file name), kept in descriptions.
    """

    def __init__(self, theta_deg, values, source=None):
        th = np.asarray(theta_deg, dtype=np.float64).ravel()
        v = np.asarray(values, dtype=np.float64).ravel()
        where = f"response table {source}" if source else "response table"
        if th.shape != v.shape or th.size < 3:
            raise MagretinaError(f"{where}: needs matching theta and value columns of at least 3 rows")
        if not (np.all(np.isfinite(th)) and np.all(np.isfinite(v))):
            raise MagretinaError(f"{where}: contains non-finite numbers")
        if np.any(np.diff(th) <= 0):
            i = int(np.argmax(np.diff(th) <= 0))
            raise MagretinaError(f"{where}: angles must increase strictly; row {i + 2} has "
                                 f"theta = {th[i + 1]:g} after {th[i]:g}")
        if abs(th[0]) > 1e-9:
            raise MagretinaError(f"{where}: the first angle must be 0 degrees, got {th[0]:g}")
        if abs(th[-1] - 90.0) < 1e-9:
            th = np.concatenate([th, 180.0 - th[-2::-1]])
            v = np.concatenate([v, v[-2::-1]])
        elif abs(th[-1] - 180.0) > 1e-9:
            raise MagretinaError(f"{where}: the last angle must be 90 (mirrored) or 180 degrees, "
                                 f"got {th[-1]:g}")
        self.theta_deg = th
        self.values = v
        self.source = source
        self._spline = CubicSpline(np.radians(th), v, bc_type=((1, 0.0), (1, 0.0)))

    @classmethod
    def from_csv(cls, path) -> "Tabulated":
        """Read a two-column CSV of (theta_deg, value)."""
        data = _read_two_columns(path)
        return cls(data[:, 0], data[:, 1], source=os.fspath(path))

    def __call__(self, cos_theta):
        theta = np.arccos(np.clip(np.asarray(cos_theta, dtype=np.float64), -1.0, 1.0))
        return self._spline(theta)

    def describe(self) -> dict:
        return {"kind": "tabulated", "source": self.source,
                "theta_deg": self.theta_deg.tolist(), "values": self.values.tolist()}
