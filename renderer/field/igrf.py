"""IGRF-14 through ppigrf: the geomagnetic main field at a site and date, local NED.

ppigrf takes geodetic WGS84 input and returns east, north, up in nT; we convert to
NED tesla and compute angles ourselves (its inclination/declination helper folds
declinations beyond ±90°).  Dates outside 1900.0-2030.0 are refused, because
ppigrf would silently return NaN or the 2030 value.  Not for crustal or external
fields, which IGRF does not contain.
"""

from __future__ import annotations

import os

import numpy as np

from .base import FieldVector, SiteModel, check_igrf_date, check_site, decimal_year

#: Provenance text of every IGRF value.
SOURCE = "IGRF-14 via ppigrf (IGRF14.shc)"


def _ppigrf():
    import ppigrf  # deferred: ppigrf imports pandas (~0.5 s), needed only when evaluating

    return ppigrf


def coefficient_file() -> str:
    """Path of the IGRF-14 coefficient file shipped with ppigrf."""
    return os.path.join(os.path.dirname(_ppigrf().__file__), "IGRF14.shc")


def igrf_ned_T(lat_deg, lon_deg, alt_km, when) -> np.ndarray:
    """IGRF-14 field at many points of one date.

    Parameters
    ----------
    lat_deg, lon_deg, alt_km : array_like, same shape (...)
        Geodetic latitude, longitude (degrees), altitude above WGS84 (km).
    when : date-like
        One date (validated against IGRF-14's range).

    Returns
    -------
    ndarray, shape (..., 3)
        North, east, down in tesla.
    """
    when = check_igrf_date(when)
    lat, lon, alt = np.broadcast_arrays(np.asarray(lat_deg, float), np.asarray(lon_deg, float),
                                        np.asarray(alt_km, float))
    shape = lat.shape
    e, n, u = _ppigrf().igrf(lon.ravel(), lat.ravel(), alt.ravel(), when,
                             coeff_fn=coefficient_file())
    ned = np.stack([np.ravel(n), np.ravel(e), -np.ravel(u)], axis=-1) * 1e-9
    return ned.reshape(shape + (3,))


def igrf(lat_deg, lon_deg, alt_km=0.0, date="2026-06-01") -> FieldVector:
    """IGRF-14 main field at a site.

    Parameters
    ----------
    lat_deg : float
        Geodetic latitude, degrees in [-90, 90].
    lon_deg : float
        Longitude, degrees east.
    alt_km : float
        Altitude above the WGS84 ellipsoid, km.
    date : str, date or float
        ISO 8601 date or decimal year within 1900.0-2030.0.

    Returns
    -------
    FieldVector
    """
    lat, lon, alt = check_site(lat_deg, lon_deg, alt_km)
    when = check_igrf_date(date)
    ned = igrf_ned_T(lat, lon, alt, when)
    return FieldVector(ned, model="igrf", date=when.date().isoformat(),
                       site={"lat_deg": lat, "lon_deg": lon, "alt_km": alt},
                       source=SOURCE,
                       extra={"decimal_year": decimal_year(when)})


MODEL = SiteModel("igrf", igrf, igrf_ned_T, SOURCE)
