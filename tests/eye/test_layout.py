"""Layouts: field bookkeeping against published visual fields, presets, eye movements and
bad input."""

import numpy as np
import pytest

from renderer import pipeline
from renderer.errors import ConfigError, MagretinaError
from renderer.eye import Eye, Layout, load_layout, parse_layout, preset_names, symmetric_bookkeeping
from renderer.eye.alignment import Tilt
from renderer.field import fixed
from renderer.pose import Pose
from renderer.response import Legendre
from renderer.views import EyeDisc, WorldPanorama


def test_short_toed_eagle_bookkeeping():
    """Martin & Katzir 1999 (Brain Behav. Evol. 53:55): monocular 139°, binocular 20°, blind
    area about 100° in the horizontal plane.  The model's blind area is
    360 − (2·139 − 20) = 102°; the paper's 'about 100' (and cyclopean 'about 260') are
    rounded, so 3° is allowed there; sampling is 0.01°."""
    fb = load_layout("short-toed-eagle").field_bookkeeping()
    assert fb.monocular_deg == pytest.approx((139.0, 139.0), abs=0.02)
    assert fb.binocular_deg == pytest.approx(20.0, abs=0.02)
    assert fb.blind_deg == pytest.approx(100.0, abs=3.0)
    assert fb.cyclopean_deg == pytest.approx(260.0, abs=3.0)


def test_tawny_owl_bookkeeping():
    """Martin 1984 (Vision Res. 24:1739): optic axes 55° apart, monocular 124°, binocular
    48°, cyclopean about 201° (independently rounded; the model gives 2·124 − 48 = 200)."""
    lay = load_layout("tawny-owl")
    az = [e.azimuth_deg for e in lay.eyes]
    assert abs(az[0] - az[1]) == pytest.approx(55.0)
    fb = lay.field_bookkeeping()
    assert fb.monocular_deg == pytest.approx((124.0, 124.0), abs=0.02)
    assert fb.binocular_deg == pytest.approx(48.0, abs=0.02)
    assert fb.cyclopean_deg == pytest.approx(201.0, abs=1.5)


@pytest.mark.parametrize("nasal,temporal,psi", [(51.5, 72.5, 27.5), (70.0, 100.0, 60.0),
                                                 (40.0, 110.0, 35.0)])
def test_numeric_bookkeeping_matches_the_symmetric_formula(nasal, temporal, psi):
    """Bilateral symmetry with optic axes at ±ψ: binocular = 2(w_nasal − ψ),
    cyclopean = 2·monocular − binocular, blind = 360° − cyclopean (geometry)."""
    eyes = [Eye(name="left", azimuth_deg=-psi, nasal_deg=nasal, temporal_deg=temporal),
            Eye(name="right", azimuth_deg=psi, nasal_deg=nasal, temporal_deg=temporal)]
    fb = Layout("t", tuple(eyes)).field_bookkeeping(step_deg=0.005)
    want = symmetric_bookkeeping(nasal, temporal, psi)
    for k in ("binocular_deg", "cyclopean_deg", "blind_deg"):
        assert getattr(fb, k) == pytest.approx(want[k], abs=0.02)
    assert fb.monocular_deg[0] == pytest.approx(want["monocular_deg"], abs=0.02)


def test_presets_are_toml_with_sources():
    """Every shipped preset is a TOML file with a name, a description and its source."""
    names = preset_names()
    for n in ("lateral", "frontal", "all-around", "short-toed-eagle", "tawny-owl"):
        assert n in names
    for n in names:
        lay = load_layout(n)
        assert lay.name == n and lay.description.strip() and lay.source.strip()


def test_preset_alignment_tables(tmp_path):
    """A layout-wide alignment applies to eyes without their own; an eye's own wins."""
    p = tmp_path / "two.toml"
    p.write_text('name = "two"\nalignment = {mode = "tilt", tilt_deg = 30}\n'
                 '[[eye]]\nname = "left"\nazimuth_deg = -50\n'
                 '[[eye]]\nname = "right"\nazimuth_deg = 50\nalignment = "chief-ray"\n')
    lay = load_layout(str(p))
    assert lay.eyes[0].alignment == Tilt(tilt_deg=30.0)
    assert lay.eyes[1].alignment.kind == "chief-ray"


@pytest.mark.parametrize("eye_kw,match", [
    ({"nasal_deg": 0.0}, r"nasal_deg = 0.0 is out of range; allowed \(0, 180\]"),
    ({"dorsal_deg": 181.0}, r"dorsal_deg = 181.0 is out of range; allowed \(0, 180\]"),
    ({"retina_radius_mm": 0.0}, r"retina_radius_mm = 0.0 is out of range; allowed \(0, inf"),
    ({"retina_radius_mm": 5.0, "nodal_offset_mm": 5.0}, r"nodal_offset_mm = 5 must satisfy \|d\| <"),
    ({"retina_radius_mm": 5.0, "nodal_offset_mm": -6.0}, r"nodal_offset_mm = -6 must satisfy"),
    ({"name": "left", "azimuth_deg": 20.0}, r"azimuth_deg = 20 points the left eye's optic axis "
                                            r"into the head.*allowed \[-180, 0\]"),
    ({"name": "right", "azimuth_deg": -5.0}, r"into the head.*allowed \[0, 180\]"),
    ({"cornea_radius_mm": 5.55}, "needs both cornea_radius_mm and refractive_index"),
    ({"retina_radius_mm": 5.0, "cornea_radius_mm": 5.55, "refractive_index": 4 / 3},
     r"from the reduced eye\) must satisfy"),
    ({"side": "middle"}, "side = 'middle'"),
])
def test_bad_eye_input_names_key_value_and_range(eye_kw, match):
    """Bad eye parameters raise MagretinaError naming the key, the value and what is allowed."""
    with pytest.raises(MagretinaError, match=match):
        Eye(**eye_kw)


def test_preset_file_with_unknown_keys_reports_all(tmp_path):
    """Unknown keys at the top, in an eye and in an alignment table are all reported at
    once, with the file name."""
    p = tmp_path / "bad.toml"
    p.write_text('name = "bad"\ncolour = "red"\n[[eye]]\nname = "left"\nazimuth_deg = -40\n'
                 'radius_mm = 3\nalignment = {mode = "tilt", gamma = 3}\n')
    with pytest.raises(ConfigError) as exc:
        load_layout(str(p))
    msg = str(exc.value)
    assert str(p) in msg and "'colour'" in msg and "eye[0].radius_mm: unknown key" in msg
    assert "gamma: unknown key for mode 'tilt'" in msg


def test_eye_movement_per_shot():
    """Offsets add to the eye's placement angles: rendering with eye_offsets equals
    rendering the layout whose eye was turned by hand, and the disc follows the eye."""
    lay = load_layout("lateral")
    field, pose, resp = fixed(50.0, 60.0, 2.0), Pose(10.0, 0.0, 0.0), Legendre([0.6, 0.0, 0.2])
    moved = lay.moved({"left": (-12.0, 4.0, 6.0)})
    e0, e1 = lay.eyes[0], moved.eyes[0]
    assert (e1.azimuth_deg, e1.elevation_deg, e1.torsion_deg) == (
        e0.azimuth_deg - 12.0, e0.elevation_deg + 4.0, e0.torsion_deg + 6.0)
    for view in (WorldPanorama(64), EyeDisc("left", 32)):
        a = pipeline.render_pattern(field, pose, lay, resp, view, eye_offsets={"left": (-12, 4, 6)})
        b = pipeline.render_pattern(field, pose, moved, resp, view)
        np.testing.assert_array_equal(a, b)
    assert not np.array_equal(pipeline.render_pattern(field, pose, lay, resp, WorldPanorama(64)),
                              pipeline.render_pattern(field, pose, moved, resp, WorldPanorama(64)),
                              equal_nan=True)
    with pytest.raises(MagretinaError, match="into the head"):
        lay.moved({"left": (80.0, 0.0, 0.0)})
    with pytest.raises(MagretinaError, match="no eye 'middle'"):
        lay.moved({"middle": (1.0,)})


def test_parse_layout_round_trip_of_describe():
    """An eye's describe() (with its alignment table) builds the same eye again."""
    lay = load_layout("lateral").with_alignment({"mode": "ratio", "delta_deg": 60.0})
    d = lay.describe()
    again = parse_layout({"name": d["name"], "eye": [{k: v for k, v in e.items()}
                                                    for e in d["eyes"]]})
    assert again.eyes == lay.eyes
