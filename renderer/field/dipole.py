"""A centred (tilted) dipole from the IGRF-14 degree-1 coefficients of a date.

V = a (a/r)² (g10 cos θ + (g11 cos φ + h11 sin φ) sin θ) gives, in Earth-centred
Cartesian coordinates, B = (a/r)³ [3 (ĝ·r̂) r̂ − ĝ] with ĝ = (g11, h11, g10); at the
geomagnetic equator on r = a its magnitude is B0 = |ĝ|, and in the dipole's own
frame tan I = 2 tan λm.  The site is placed on the WGS84 ellipsoid and the field
projected onto its geodetic NED axes.  This is a sanity and teaching model only
(off by about 12° in inclination and 60 % in intensity in the South Atlantic); it
is not a substitute for IGRF.
"""

from __future__ import annotations

import numpy as np

from ..frames import vec_to_azel
from .base import FieldVector, SiteModel, check_igrf_date, check_site, decimal_year
from .igrf import _ppigrf, coefficient_file

#: Provenance text of every dipole value.
SOURCE = "centred dipole from IGRF-14 g10, g11, h11"

#: IGRF reference radius, km (IAGA WG V-MOD).
REFERENCE_RADIUS_KM = 6371.2
#: WGS84 semi-major axis (km) and flattening (NIMA TR8350.2, common practice).
WGS84_A_KM = 6378.137
WGS84_F = 1.0 / 298.257223563


def dipole_coefficients(date) -> tuple[float, float, float]:
    """(g10, g11, h11) in nT of IGRF-14 at ``date``, linear in time between epochs."""
    when = check_igrf_date(date)
    g, h = _ppigrf().ppigrf.read_shc(coefficient_file())
    t = np.array([ts.timestamp() for ts in g.index.to_pydatetime()])
    x = when.timestamp()
    g10 = float(np.interp(x, t, g[(1, 0)].to_numpy(float)))
    g11 = float(np.interp(x, t, g[(1, 1)].to_numpy(float)))
    h11 = float(np.interp(x, t, h[(1, 1)].to_numpy(float)))
    return g10, g11, h11


def geodetic_to_ecef_km(lat_deg, lon_deg, alt_km) -> np.ndarray:
    """Earth-centred Cartesian position (km) of a WGS84 geodetic point, shape (..., 3)."""
    lat = np.radians(np.asarray(lat_deg, float))
    lon = np.radians(np.asarray(lon_deg, float))
    e2 = WGS84_F * (2.0 - WGS84_F)
    n = WGS84_A_KM / np.sqrt(1.0 - e2 * np.sin(lat) ** 2)
    x = (n + alt_km) * np.cos(lat) * np.cos(lon)
    y = (n + alt_km) * np.cos(lat) * np.sin(lon)
    z = (n * (1.0 - e2) + alt_km) * np.sin(lat)
    return np.stack([x, y, z], axis=-1)


def ned_basis_ecef(lat_deg, lon_deg) -> np.ndarray:
    """Rows north, east, down of the local frame at (lat, lon) in ECEF, shape (3, 3).

    With geodetic latitude this is the geodetic NED frame; with geocentric latitude
    it is the geocentric one.
    """
    lat = np.radians(float(lat_deg))
    lon = np.radians(float(lon_deg))
    sl, cl, so, co = np.sin(lat), np.cos(lat), np.sin(lon), np.cos(lon)
    north = np.array([-sl * co, -sl * so, cl])
    east = np.array([-so, co, 0.0])
    down = -np.array([cl * co, cl * so, sl])
    return np.stack([north, east, down])


def dipole_field_ecef_nT(r_ecef_km, g10, g11, h11) -> np.ndarray:
    """Centred-dipole field (nT) in ECEF at positions (km), shape (..., 3)."""
    r = np.asarray(r_ecef_km, float)
    rn = np.linalg.norm(r, axis=-1, keepdims=True)
    rhat = r / rn
    gvec = np.array([g11, h11, g10], float)
    gr = np.sum(rhat * gvec, axis=-1, keepdims=True)
    return (REFERENCE_RADIUS_KM / rn) ** 3 * (3.0 * gr * rhat - gvec)


def dipole_pole(date) -> tuple[float, float]:
    """Geocentric latitude/longitude (degrees) of the north geomagnetic pole."""
    g10, g11, h11 = dipole_coefficients(date)
    m = -np.array([g11, h11, g10])  # the pole is where the field points straight down
    # geocentric z points north: the frames' elevation is against +z down, so negate z
    lon, lat = vec_to_azel(m * np.array([1.0, 1.0, -1.0]))
    return float(lat), float(lon)


def dipole(lat_deg, lon_deg, alt_km=0.0, date="2026-06-01") -> FieldVector:
    """Centred-dipole field at a site (geodetic WGS84 input), local NED.

    Parameters and return as :func:`renderer.field.igrf`.
    """
    lat, lon, alt = check_site(lat_deg, lon_deg, alt_km)
    when = check_igrf_date(date)
    g10, g11, h11 = dipole_coefficients(when)
    b_ecef = dipole_field_ecef_nT(geodetic_to_ecef_km(lat, lon, alt), g10, g11, h11)
    ned = ned_basis_ecef(lat, lon) @ b_ecef * 1e-9
    return FieldVector(ned, model="dipole", date=when.date().isoformat(),
                       site={"lat_deg": lat, "lon_deg": lon, "alt_km": alt},
                       source=SOURCE,
                       extra={"decimal_year": decimal_year(when), "g10_nT": g10,
                              "g11_nT": g11, "h11_nT": h11})


def dipole_ned_T(lat_deg, lon_deg, alt_km, date) -> np.ndarray:
    """Centred-dipole field at many points of one date.

    Parameters
    ----------
    lat_deg, lon_deg, alt_km : array_like (n,)
        Geodetic latitude, longitude (degrees), altitude above WGS84 (km).
    date : date-like
        One date within IGRF-14's validity.

    Returns
    -------
    ndarray (n, 3)
        North, east, down in tesla (each point evaluated by :func:`dipole`).
    """
    if not np.size(lat_deg):
        return np.zeros((0, 3))
    return np.stack([dipole(a, b, c, date).ned_T for a, b, c in zip(lat_deg, lon_deg, alt_km)])


MODEL = SiteModel("dipole", dipole, dipole_ned_T, SOURCE)
