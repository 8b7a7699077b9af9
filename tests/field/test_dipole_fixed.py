"""Centred-dipole and fixed-vector models against textbook relations."""

import numpy as np
import pytest

from renderer.errors import MagretinaError
from renderer.field import dipole, fixed, igrf
from renderer.field.dipole import (REFERENCE_RADIUS_KM, dipole_coefficients,
                                   dipole_field_ecef_nT, dipole_pole, geodetic_to_ecef_km,
                                   ned_basis_ecef)


def test_tan_I_equals_two_tan_magnetic_latitude():
    """Centred dipole: tan I = 2 tan λm in the dipole's own frame (textbook dipole
    relation, e.g. Merrill, McElhinny & McFadden, The Magnetic Field of the Earth, 1996)."""
    g10, g11, h11 = dipole_coefficients("2026-06-01")
    m_north = -np.array([g11, h11, g10]) / np.linalg.norm([g11, h11, g10])
    rng = np.random.default_rng(3)
    v = rng.normal(size=(500, 3))
    r = v / np.linalg.norm(v, axis=1, keepdims=True) * (REFERENCE_RADIUS_KM + 50.0)
    B = dipole_field_ecef_nT(r, g10, g11, h11)
    rhat = r / np.linalg.norm(r, axis=1, keepdims=True)
    lam_m = np.arcsin(rhat @ m_north)
    b_down = -np.sum(B * rhat, axis=1)
    b_h = np.linalg.norm(B + b_down[:, None] * rhat, axis=1)
    inc = np.arctan2(b_down, b_h)
    keep = np.abs(lam_m) < np.radians(85)
    assert np.allclose(np.tan(inc[keep]), 2 * np.tan(lam_m[keep]), rtol=1e-9, atol=1e-9)


def test_equator_intensity_is_B0():
    """At the geomagnetic equator on r = a, |B| = B0 = sqrt(g10² + g11² + h11²) (dipole
    term of the Gauss expansion, common practice)."""
    g10, g11, h11 = dipole_coefficients("2025-01-01")
    B0 = np.sqrt(g10 ** 2 + g11 ** 2 + h11 ** 2)
    m = np.array([g11, h11, g10]) / B0
    e1 = np.cross(m, [0, 0, 1.0])
    e1 /= np.linalg.norm(e1)
    e2 = np.cross(m, e1)
    for t in np.linspace(0, 2 * np.pi, 13):
        r = REFERENCE_RADIUS_KM * (np.cos(t) * e1 + np.sin(t) * e2)
        assert np.isclose(np.linalg.norm(dipole_field_ecef_nT(r, g10, g11, h11)), B0, rtol=1e-12)


def test_igrf14_dipole_numbers():
    """IGRF-14 degree-1 coefficients at 2025.0 (IAGA WG V-MOD 2024): g10 = −29350.0,
    g11 = −1410.3, h11 = 4545.5 nT; north geomagnetic pole about 80.8 N, 72.8 W."""
    assert np.allclose(dipole_coefficients("2025-01-01"), (-29350.0, -1410.3, 4545.5), atol=0.05)
    lat, lon = dipole_pole("2025-01-01")
    assert abs(lat - 80.8) < 0.1 and abs(lon + 72.8) < 0.1


def test_dipole_site_model_is_the_ecef_dipole_in_geodetic_ned():
    f = dipole(45.0, 10.0, 0.0, "2026-06-01")
    g = dipole_coefficients("2026-06-01")
    b = ned_basis_ecef(45.0, 10.0) @ dipole_field_ecef_nT(geodetic_to_ecef_km(45.0, 10.0, 0.0), *g)
    assert np.allclose(f.ned_T, b * 1e-9)
    # A sanity model: near IGRF in Europe (within a few degrees of inclination).
    assert abs(f.inclination_deg - igrf(45.0, 10.0, 0.0, "2026-06-01").inclination_deg) < 5.0


def test_geodetic_to_ecef_against_pyproj():
    """WGS84 geodetic → ECEF conversion vs pyproj (PROJ, EPSG:4979 → EPSG:4978)."""
    pyproj = pytest.importorskip("pyproj")
    t = pyproj.Transformer.from_crs("EPSG:4979", "EPSG:4978", always_xy=True)
    for lat, lon, h in [(52.0, 9.5, 0.1), (-33.0, 151.0, 2.0), (89.0, -40.0, 0.0)]:
        x, y, z = t.transform(lon, lat, h * 1000.0)
        assert np.allclose(geodetic_to_ecef_km(lat, lon, h) * 1000.0, [x, y, z], atol=1e-3)


def test_fixed_vector_components():
    f = fixed(50.0, 60.0, 30.0)
    F, I, D = 50e-6, np.radians(60), np.radians(30)
    assert np.allclose(f.ned_T, [F * np.cos(I) * np.cos(D), F * np.cos(I) * np.sin(D), F * np.sin(I)])
    assert np.isclose(f.inclination_deg, 60.0) and np.isclose(f.declination_deg, 30.0)
    assert np.isclose(f.total_T, 50e-6)


@pytest.mark.parametrize("call, needle", [
    (lambda: igrf(91.0, 0.0), "latitude"),
    (lambda: igrf(-90.5, 0.0), "latitude"),
    (lambda: igrf(10.0, 0.0, date="1899-12-31"), "1900.0 to 2030.0"),
    (lambda: igrf(10.0, 0.0, date="2030-06-01"), "1900.0 to 2030.0"),
    (lambda: igrf(10.0, 0.0, date="not a date"), "ISO 8601"),
    (lambda: dipole(10.0, 0.0, date="2031-01-01"), "1900.0 to 2030.0"),
    (lambda: fixed(-1.0, 60.0), "total intensity"),
    (lambda: fixed(50.0, 95.0), "inclination"),
])
def test_bad_input_messages(call, needle):
    with pytest.raises(MagretinaError, match=needle):
        call()


def test_unknown_model_named():
    from renderer.field import at_site

    with pytest.raises(MagretinaError, match="unknown field model 'wmm'.*igrf, dipole"):
        at_site("wmm", 0.0, 0.0)
