"""Frame series within a shot: great-circle legs, route CSVs, head scans, coil steps
(renderer.study.sequences), and the route's field against the field command."""

import json
import math

import numpy as np
import pytest
from pyproj import Geod
from scipy.spatial.transform import Rotation

from renderer.cli import main
from renderer.errors import MagretinaError
from renderer.study import load_study, plan
from renderer.study.sequences import (EARTH_RADIUS_M, CoilState, bearings, coil_states,
                                      great_circle, read_route_csv)
from studyhelp import write

SPHERE = Geod(a=EARTH_RADIUS_M, b=EARTH_RADIUS_M)


def angle_diff(a, b):
    return (np.asarray(a) - np.asarray(b) + 180.0) % 360.0 - 180.0


def test_great_circle_matches_pyproj_on_a_sphere():
    """Points, forward azimuths and length of a great-circle leg agree with PROJ's
    geodesic on a sphere of the same radius (pyproj.Geod; Karney 2013, J. Geodesy 87)."""
    lat1, lon1, lat2, lon2 = 51.2, -3.5, 38.7, 22.1
    frac = np.linspace(0.0, 1.0, 9)
    lat, lon, az, dist = great_circle(lat1, lon1, lat2, lon2, frac)
    az12, _, d = SPHERE.inv(lon1, lat1, lon2, lat2)
    assert dist == pytest.approx(d, rel=1e-9)
    inner = np.array(SPHERE.npts(lon1, lat1, lon2, lat2, 7))  # excludes both ends
    np.testing.assert_allclose(lat[1:-1], inner[:, 1], atol=1e-7)
    np.testing.assert_allclose(lon[1:-1], inner[:, 0], atol=1e-7)
    assert angle_diff(az[0], az12) == pytest.approx(0.0, abs=1e-7)
    for k in range(1, 8):  # the azimuth toward the destination along the same circle
        ref = SPHERE.inv(lon[k], lat[k], lon2, lat2)[0]
        assert angle_diff(az[k], ref) == pytest.approx(0.0, abs=1e-6)
    back = SPHERE.inv(lon2, lat2, lon1, lat1)[0]  # arrival azimuth = back azimuth + 180
    assert angle_diff(az[-1], back + 180.0) == pytest.approx(0.0, abs=1e-6)


def test_route_csv_bearings_match_pyproj(tmp_path):
    """Without a heading column the head points along the track: the initial bearing
    to the next point (pyproj.Geod.inv on a sphere)."""
    p = tmp_path / "track.csv"
    p.write_text("time_s,lat_deg,lon_deg,alt_km\n0,52.0,4.0,0.1\n60,52.3,4.6,0.1\n"
                 "120,52.1,5.4,0.2\n", encoding="utf-8")
    r = read_route_csv(str(p))
    b = bearings(r["lat_deg"], r["lon_deg"])
    for k in range(2):
        ref = SPHERE.inv(r["lon_deg"][k], r["lat_deg"][k], r["lon_deg"][k + 1],
                         r["lat_deg"][k + 1])[0]
        assert angle_diff(b[k], ref) == pytest.approx(0.0, abs=1e-9)
    assert b[2] == b[1]
    p.write_text("time_s,lat_deg,lon\n0,52,4\n", encoding="utf-8")
    with pytest.raises(MagretinaError, match="unknown column 'lon'"):
        read_route_csv(str(p))
    p.write_text("time_s,lat_deg,lon_deg\n0,52,4\n0,53,4\n", encoding="utf-8")
    with pytest.raises(MagretinaError, match="line 3: time_s must increase"):
        read_route_csv(str(p))


def test_coil_rotation_and_inversion_against_scipy():
    """'rotate' turns the horizontal field clockwise seen from above (about NED +z, the
    scipy Rotation 'z' sense); 'invert' flips Z; 'scale' multiplies; 'ambient' resets."""
    b = np.array([20e-6, 3e-6, 45e-6])
    steps = [{"t_s": 1.0, "action": "rotate", "angle_deg": 90.0},
             {"t_s": 2.0, "action": "invert"},
             {"t_s": 3.0, "action": "scale", "factor": 2.0},
             {"t_s": 4.0, "action": "zero"},
             {"t_s": 5.0, "action": "ambient"}]
    st = coil_states([0.0, 1.0, 2.0, 3.0, 4.0, 5.0], steps)
    rot = Rotation.from_euler("z", 90.0, degrees=True).apply(b)
    np.testing.assert_allclose(st[0].apply(b), b)
    np.testing.assert_allclose(st[1].apply(b), rot, atol=1e-18)
    np.testing.assert_allclose(st[2].apply(b), rot * [1, 1, -1], atol=1e-18)
    np.testing.assert_allclose(st[3].apply(b), 2 * rot * [1, 1, -1], atol=1e-18)
    np.testing.assert_array_equal(st[4].apply(b), 0.0)
    assert st[5] == CoilState() and st[5].label() == "ambient"
    assert [s.label() for s in st[1:4]] == ["rotate90", "rotate90+invert",
                                            "rotate90+invert+scale2"]


ROUTE = """
[study]
name = "route"

[site]
lat_deg = 60.0
lon_deg = 5.0

[field]
model = "igrf"
date = "2026-05-20"

[views.world]
kind = "world-panorama"
width = 16

[sequence]
kind = "route"
from = {{ name = "North Cape (invented)", lat_deg = 60.0, lon_deg = 5.0 }}
to = {{ name = "South Bay (invented)", lat_deg = 30.0, lon_deg = 5.0 }}
speed_m_s = {speed}
fps = 0.01
"""


def test_north_south_route_reevaluates_field(tmp_path, capsys):
    """A meridian leg from 60 N to 30 N: heading 180 throughout, latitude linear in
    time, and the inclination at each point equals `magretina field` there (IGRF-14),
    falling monotonically southward as IGRF gives in this region."""
    d = 30.0 * math.pi / 180.0 * EARTH_RADIUS_M
    p = plan(load_study(write(tmp_path, ROUTE.format(speed=d / 600.0))))
    fs = p.shots[0].frames
    assert len(fs) == 7
    np.testing.assert_allclose(fs.lat_deg, 60.0 - 5.0 * np.arange(7), atol=1e-9)
    np.testing.assert_allclose(fs.yaw_deg, 180.0, atol=1e-9)
    inc = np.degrees(np.arctan2(fs.ambient_ned_T[:, 2], np.hypot(*fs.ambient_ned_T[:, :2].T)))
    assert np.all(np.diff(inc) < 0)
    for k in (0, 3, 6):
        capsys.readouterr()
        assert main(["field", "--lat", repr(float(fs.lat_deg[k])), "--lon", "5.0",
                     "--date", "2026-05-20", "--json"]) == 0
        ref = json.loads(capsys.readouterr().out)
        assert inc[k] == pytest.approx(ref["inclination_deg"], abs=1e-9)
        assert fs.ambient_ned_T[k, 2] * 1e6 == pytest.approx(ref["field_down_ut"], rel=1e-12)


def test_head_scan_and_sweep_counts(tmp_path):
    """heading-sweep: stop excluded as numpy.arange; head scan: amplitude and period."""
    base = ROUTE.split("[sequence]")[0].replace("{{", "{").replace("}}", "}")
    p = plan(load_study(write(tmp_path, base + """
[sequence]
kind = "heading-sweep"
start_deg = 10.0
stop_deg = 100.0
step_deg = 15.0
""")))
    np.testing.assert_allclose(p.shots[0].frames.yaw_deg, np.arange(10.0, 100.0, 15.0))
    p = plan(load_study(write(tmp_path, base + """
[pose]
yaw_deg = 40.0

[sequence]
kind = "head-scan"
amplitude_deg = 25.0
period_s = 2.0
fps = 8.0
duration_s = 4.0
""", "scan.toml")))
    fs = p.shots[0].frames
    assert len(fs) == 32
    assert fs.yaw_deg[4] == pytest.approx(65.0) and fs.yaw_deg[12] == pytest.approx(15.0)
    np.testing.assert_allclose(fs.yaw_deg[:16], fs.yaw_deg[16:], atol=1e-12)
