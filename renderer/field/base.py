"""The field result type and date handling shared by every field model.

A field model turns a site (geodetic latitude, longitude, altitude above the WGS84
ellipsoid) and a date into a :class:`FieldVector` in the local North-East-Down frame.
This module defines that result, the :class:`SiteModel` record that registers a
model, and the date parsing/validation; it does not evaluate any model.
"""

from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from ..errors import MagretinaError, check_range

#: Validity of IGRF-14 in decimal years (IAGA WG V-MOD, 2024).
IGRF_VALID = (1900.0, 2030.0)


@dataclass(frozen=True)
class FieldVector:
    """A magnetic field vector at one place and time, local NED frame.

    Attributes
    ----------
    ned_T : ndarray, shape (3,)
        North (X), east (Y), down (Z) components in tesla.
    model : str
        Name of the model that produced it ("igrf", "dipole", "fixed", ...).
    date : str or None
        ISO date used (None for a fixed vector).
    site : dict or None
        ``{"lat_deg", "lon_deg", "alt_km"}`` if evaluated at a site.
    source : str
        Where the coefficients came from (file, model version).
    """

    ned_T: np.ndarray
    model: str = "fixed"
    date: str | None = None
    site: dict | None = None
    source: str = ""
    extra: dict = field(default_factory=dict, compare=False)

    def __post_init__(self):
        v = np.array(self.ned_T, dtype=np.float64).reshape(3)
        if not np.all(np.isfinite(v)):
            raise MagretinaError(f"field vector must be finite, got {v.tolist()}")
        v.setflags(write=False)
        object.__setattr__(self, "ned_T", v)

    @property
    def total_T(self) -> float:
        return float(np.linalg.norm(self.ned_T))

    @property
    def horizontal_T(self) -> float:
        return float(math.hypot(self.ned_T[0], self.ned_T[1]))

    @property
    def inclination_deg(self) -> float:
        """I = atan2(Z, H), positive downward."""
        return float(math.degrees(math.atan2(self.ned_T[2], self.horizontal_T)))

    @property
    def declination_deg(self) -> float:
        """D = atan2(Y, X), positive east (full quadrant, never folded)."""
        return float(math.degrees(math.atan2(self.ned_T[1], self.ned_T[0])))

    @property
    def unit_ned(self) -> np.ndarray:
        n = self.total_T
        if n == 0.0:
            return np.zeros(3)
        return self.ned_T / n

    def replace(self, ned_T, model=None, **extra) -> "FieldVector":
        """A copy with another vector (laboratory manipulations)."""
        return FieldVector(ned_T, model=model or self.model, date=self.date, site=self.site,
                           source=self.source, extra={**self.extra, **extra})

    def as_dict(self) -> dict:
        """The CLI/JSON view: components in µT, angles in degrees (docs/data-dictionary.md)."""
        n, e, d = (self.ned_T * 1e6).tolist()
        return {
            "field_north_ut": n, "field_east_ut": e, "field_down_ut": d,
            "field_horizontal_ut": self.horizontal_T * 1e6,
            "field_total_ut": self.total_T * 1e6,
            "inclination_deg": self.inclination_deg,
            "declination_deg": self.declination_deg,
            "model": self.model, "date": self.date, "site": self.site, "source": self.source,
        }


def parse_date(date) -> _dt.datetime:
    """Parse an ISO 8601 date/datetime string, a date/datetime, or a decimal year.

    Raises MagretinaError naming the value if it cannot be read.
    """
    if isinstance(date, _dt.datetime):
        return date.replace(tzinfo=None) if date.tzinfo is None else \
            date.astimezone(_dt.timezone.utc).replace(tzinfo=None)
    if isinstance(date, _dt.date):
        return _dt.datetime(date.year, date.month, date.day)
    if isinstance(date, (int, float)) and not isinstance(date, bool):
        return decimal_year_to_datetime(float(date))
    if isinstance(date, str):
        s = date.strip()
        try:
            return parse_date(_dt.datetime.fromisoformat(s.replace("Z", "+00:00")))
        except ValueError:
            pass
        try:
            return decimal_year_to_datetime(float(s))
        except ValueError:
            pass
    raise MagretinaError(f"date {date!r} is not an ISO 8601 date (YYYY-MM-DD) or a decimal year")


def decimal_year(when: _dt.datetime) -> float:
    """Decimal year of a datetime (fraction of the calendar year elapsed)."""
    start = _dt.datetime(when.year, 1, 1)
    end = _dt.datetime(when.year + 1, 1, 1)
    return when.year + (when - start).total_seconds() / (end - start).total_seconds()


def decimal_year_to_datetime(y: float) -> _dt.datetime:
    if not math.isfinite(y) or not (1.0 <= y < 9999.0):
        raise MagretinaError(f"decimal year {y!r} is not a valid year")
    year = int(math.floor(y))
    start = _dt.datetime(year, 1, 1)
    end = _dt.datetime(year + 1, 1, 1)
    return start + (end - start) * (y - year)


def check_igrf_date(date) -> _dt.datetime:
    """Parse ``date`` and refuse dates outside IGRF-14's validity (never clamp)."""
    when = parse_date(date)
    y = decimal_year(when)
    lo, hi = IGRF_VALID
    if not (lo <= y <= hi):
        raise MagretinaError(f"date {date!r} (decimal year {y:.3f}) is outside IGRF-14's "
                             f"validity {lo:.1f} to {hi:.1f}")
    return when


def check_site(lat_deg, lon_deg, alt_km):
    """Validate a site; return floats (lat, lon wrapped to [-180, 180), alt)."""
    lat = check_range("latitude (lat_deg)", lat_deg, -90.0, 90.0, unit="degrees")
    lon = check_range("longitude (lon_deg)", lon_deg, -360.0, 360.0, unit="degrees")
    alt = check_range("altitude (alt_km)", alt_km, -10.0, 1000.0, unit="km above the WGS84 ellipsoid")
    lon = (lon + 180.0) % 360.0 - 180.0
    return lat, lon, alt


@dataclass(frozen=True)
class SiteModel:
    """A geomagnetic model of site and date: one entry of :data:`renderer.field.MODELS`.

    Calling the record evaluates one site (``model(lat_deg, lon_deg, alt_km, date)``).

    Attributes
    ----------
    name : str
        Name used on the command line and in study files.
    at : callable
        ``at(lat_deg, lon_deg, alt_km=0.0, date=...) -> FieldVector`` for one site
        (validated; degrees, km above WGS84).
    ned_T : callable
        ``ned_T(lat_deg (n,), lon_deg (n,), alt_km (n,), date) -> ndarray (n, 3)``: many
        points of one date, local NED, tesla (the form batches of frames use).
    source : str
        Where the numbers come from, as written into outputs.
    """

    name: str
    at: Callable
    ned_T: Callable
    source: str

    def __call__(self, lat_deg, lon_deg, alt_km=0.0, date="2026-06-01") -> FieldVector:
        return self.at(lat_deg, lon_deg, alt_km, date)
