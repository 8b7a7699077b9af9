"""Every site model of the registry (``renderer.field.MODELS``), the ones added later
included: the single-site and the batched forms agree, and the surface field lies in the
range the geomagnetic field takes at the Earth's surface."""

import numpy as np
import pytest

from renderer.field import MODELS, at_site

#: Invented sites (no research station) spread over latitudes and longitudes.
SITES = [(0.0, 0.0), (40.0, 5.0), (-33.0, 150.5), (65.0, -20.0), (-70.0, 100.0)]
DATE = "2026-05-20"


@pytest.mark.parametrize("name", sorted(MODELS))
def test_batched_and_single_site_forms_agree(name):
    """ned_T over many points equals the per-site record (the same model evaluated two
    ways; relative 1e-12, float64 rounding of the same synthesis)."""
    model = MODELS[name]
    lat = np.array([s[0] for s in SITES])
    lon = np.array([s[1] for s in SITES])
    alt = np.zeros(len(SITES))
    many = np.asarray(model.ned_T(lat, lon, alt, DATE))
    for k, (la, lo) in enumerate(SITES):
        one = at_site(name, la, lo, 0.0, DATE)
        assert one.model == name
        np.testing.assert_allclose(many[k], one.ned_T, rtol=1e-12, atol=1e-18)


@pytest.mark.parametrize("name", sorted(MODELS))
def test_surface_field_is_geomagnetic(name):
    """|B| at sea level between 22 and 67 µT: the main field's total intensity at the
    surface runs from about 22,000 nT (South Atlantic) to about 67,000 nT (near the south
    magnetic pole) (from memory), and a centred dipole of the same epoch, 30-60 µT from
    equator to poles, lies within it."""
    for la, lo in SITES:
        b = np.linalg.norm(at_site(name, la, lo, 0.0, DATE).ned_T)
        assert 22e-6 <= b <= 67e-6, (name, la, lo, b)
