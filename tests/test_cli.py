"""The ``magretina`` command: outputs, exit status 2 with one clear message on bad input."""

import json
import os
import subprocess
import sys

import numpy as np
import pytest

from renderer.cli import main

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def run(argv, capsys):
    rc = main(argv)
    out = capsys.readouterr()
    return rc, out.out, out.err


def test_field_json_keys(capsys):
    rc, out, _ = run(["field", "--lat", "52", "--lon", "9.5", "--date", "2026-06-01", "--json"], capsys)
    assert rc == 0
    d = json.loads(out)
    for k in ("field_north_ut", "field_east_ut", "field_down_ut", "field_total_ut",
              "inclination_deg", "declination_deg", "model", "date"):
        assert k in d
    assert d["model"] == "igrf" and d["date"] == "2026-06-01"
    assert np.isclose(d["field_total_ut"],
                      np.linalg.norm([d["field_north_ut"], d["field_east_ut"], d["field_down_ut"]]))


def test_field_dipole_text(capsys):
    rc, out, _ = run(["field", "--lat", "10", "--lon", "20", "--model", "dipole"], capsys)
    assert rc == 0 and "inclination" in out and "dipole" in out


@pytest.mark.parametrize("argv, needle", [
    (["field", "--lat", "95", "--lon", "0"], "latitude"),
    (["field", "--lat", "10", "--lon", "0", "--model", "wmm"], "unknown field model"),
    (["field", "--lat", "10", "--lon", "0", "--date", "2031-01-01"], "1900.0 to 2030.0"),
])
def test_bad_field_input_exit_2(argv, needle, capsys):
    rc, _, err = run(argv, capsys)
    assert rc == 2 and needle in err and "Traceback" not in err


def test_render_writes_and_refuses_overwrite(tmp_path, capsys):
    out = tmp_path / "f.png"
    argv = ["render", "--lat", "52", "--lon", "9.5", "--yaw", "30", "--width", "64", "--out", str(out),
            "--png16", str(tmp_path / "f16.png"), "--pattern", str(tmp_path / "p.png")]
    rc, _, err = run(argv, capsys)
    assert rc == 0, err
    from renderer.io import read_image_linear

    assert read_image_linear(out).shape == (32, 64, 3)
    assert read_image_linear(tmp_path / "f16.png").shape == (32, 64, 3)
    before = out.read_bytes()
    rc, _, err = run(argv, capsys)
    assert rc == 2 and "--force" in err and out.read_bytes() == before
    assert run(argv + ["--force"], capsys)[0] == 0


def test_render_from_toml(tmp_path, capsys):
    cfg = tmp_path / "frame.toml"
    cfg.write_text('lat = 40.0\nlon = -3.7\nyaw = 90\nlegendre = [0.7, 0, 0.1]\nwidth = 64\n'
                   'view = "eye-disc"\neye = "left"\nout = "disc.png"\n')
    rc, _, err = run(["render", "--config", str(cfg)], capsys)
    assert rc == 0, err
    assert (tmp_path / "disc.png").exists()
    cfg.write_text('lat = 40.0\nlon = -3.7\nyawn = 90\nout = "x.png"\n')
    rc, _, err = run(["render", "--config", str(cfg)], capsys)
    assert rc == 2 and "unknown key 'yawn'" in err


def test_bad_scene_and_layout_files(tmp_path, capsys):
    import imageio.v3 as iio

    sq = tmp_path / "square.png"
    iio.imwrite(sq, np.zeros((32, 32, 3), np.uint8))
    junk = tmp_path / "junk.png"
    junk.write_bytes(b"\x89PNG\r\n\x1a\n not really a png")
    lay = tmp_path / "eyes.toml"
    lay.write_text('name = "x"\n[[eye]]\nretina_radius_mm = -2.0\n')
    base = ["render", "--lat", "52", "--lon", "9.5", "--width", "32", "--out", str(tmp_path / "o.png")]
    rc, _, err = run(base + ["--scene", str(sq)], capsys)
    assert rc == 2 and "2:1" in err and "square.png" in err
    rc, _, err = run(base + ["--scene", str(junk)], capsys)
    assert rc == 2 and "not a readable image" in err and "junk.png" in err
    rc, _, err = run(base + ["--layout", str(lay)], capsys)
    assert rc == 2 and "retina_radius_mm" in err and "eyes.toml" in err
    rc, _, err = run(base + ["--legendre", "0.7,a"], capsys)
    assert rc == 2 and "--legendre" in err
    assert not (tmp_path / "o.png").exists()


def test_demo_twice_and_refuses_foreign_folder(tmp_path, capsys):
    out = tmp_path / "demo"
    rc, stdout, err = run(["demo", "--out", str(out), "--width", "64"], capsys)
    assert rc == 0, err
    assert "world_heading000.png" in stdout and (out / "contact_sheet.png").exists()
    n = len(os.listdir(out))
    rc, _, err = run(["demo", "--out", str(out), "--width", "64"], capsys)
    assert rc == 0 and len(os.listdir(out)) == n
    foreign = tmp_path / "mine"
    foreign.mkdir()
    (foreign / "notes.txt").write_text("keep me")
    rc, _, err = run(["demo", "--out", str(foreign), "--width", "64"], capsys)
    assert rc == 2 and "not empty" in err
    assert (foreign / "notes.txt").read_text() == "keep me"


def test_python_dash_m():
    r = subprocess.run([sys.executable, "-m", "renderer", "--help"], capture_output=True, text=True,
                       cwd=ROOT)
    assert r.returncode == 0 and "demo" in r.stdout


def test_render_with_spin_table_and_alignment(tmp_path, capsys):
    """A spin table from 'response compute' and an alignment hypothesis reach the renderer:
    the frame equals the library's render of the same configuration."""
    import renderer
    from renderer.eye import load_layout
    from renderer.eye.alignment import Tilt
    from renderer.field import igrf
    from renderer.io import read_image_linear
    from renderer.pose import Pose
    from renderer.response.spin_table import SpinTable
    from renderer.scene import dusk
    from renderer.views import WorldPanorama

    table = tmp_path / "toy.npz"
    rc, _, err = run(["response", "compute", "toy-axial-n", "--field-uT", "50", "--k-s", "1e6",
                      "--out", str(table)], capsys)
    assert rc == 0, err
    out = tmp_path / "f.png"
    rc, _, err = run(["render", "--lat", "52", "--lon", "9.5", "--date", "2026-06-01", "--yaw", "20",
                      "--width", "64", "--response-table", str(table), "--alignment", "tilt,tilt_deg=30",
                      "--gain", "2", "--out", str(out)], capsys)
    assert rc == 0, err
    from renderer.composite import to_uint8_srgb

    ref = renderer.render(igrf(52, 9.5), Pose(20), load_layout("lateral").with_alignment(Tilt(tilt_deg=30)),
                          SpinTable.load(table), WorldPanorama(64), gain=2.0, scene=dusk(1024))
    assert np.array_equal(to_uint8_srgb(read_image_linear(out)), to_uint8_srgb(ref))
    rc, _, err = run(["render", "--lat", "52", "--lon", "9.5", "--width", "64", "--alignment",
                      "tilt,tilt_deg", "--out", str(tmp_path / "g.png")], capsys)
    assert rc == 2 and "--alignment" in err
