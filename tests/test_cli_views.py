"""``render`` sets the perspective view's field of view and direction and the eye disc's
radius, as a study's ``[views]`` table does.

Each frame from the command line must equal, byte for byte, the library's frame for
the same view object (the command is a thin layer over ``renderer.render``).
"""

import numpy as np
import pytest

from renderer.cli import main

BASE = ["render", "--lat-deg", "52", "--lon-deg", "9.5", "--date", "2026-06-01", "--width", "64"]


def _frame(view):
    import renderer
    from renderer.composite import to_uint8_srgb
    from renderer.eye import load_layout
    from renderer.field import igrf
    from renderer.pose import Pose
    from renderer.response import Legendre
    from renderer.scene import dusk

    img = renderer.render(igrf(52, 9.5, 0.0, "2026-06-01"), Pose(0), load_layout("lateral"),
                          Legendre([0.7, 0, 0.1]), view, scene=dusk(1024))
    return to_uint8_srgb(img)


def _read(path):
    from renderer.composite import to_uint8_srgb
    from renderer.io import read_image_linear

    return to_uint8_srgb(read_image_linear(path))


def test_perspective_fov_and_direction(tmp_path, capsys):
    from renderer.views import PerspectiveScreen

    out = tmp_path / "p.png"
    assert main(BASE + ["--view", "perspective", "--fov-deg", "60", "--look-yaw-deg", "90",
                        "--look-pitch-deg", "10", "--out", str(out)]) == 0, capsys.readouterr().err
    ref = _frame(PerspectiveScreen(width=64, height=36, hfov_deg=60, yaw_deg=90, pitch_deg=10))
    got = _read(out)
    assert got.shape == (36, 64, 3) and np.array_equal(got, ref)


def test_eye_disc_radius(tmp_path, capsys):
    from renderer.views import EyeDisc

    out = tmp_path / "d.png"
    assert main(BASE + ["--view", "eye-disc", "--eye", "right", "--disc-radius-deg", "40",
                        "--out", str(out)]) == 0, capsys.readouterr().err
    assert np.array_equal(_read(out), _frame(EyeDisc(eye="right", size=64, radius_deg=40)))


@pytest.mark.parametrize("extra, needle", [
    (["--fov-deg", "60"], "--fov-deg applies to --view perspective"),
    (["--view", "perspective", "--disc-radius-deg", "40"], "--disc-radius-deg applies to --view eye-disc"),
    (["--view", "perspective", "--fov-deg", "200"], "170"),
])
def test_view_options_refused_with_the_wrong_view(extra, needle, tmp_path, capsys):
    rc = main(BASE + extra + ["--out", str(tmp_path / "x.png")])
    err = capsys.readouterr().err
    assert rc == 2 and needle in err and err.count("\n") == 1
    assert not (tmp_path / "x.png").exists()


def test_filter_and_supersample_options(tmp_path, capsys):
    """--filter and --supersample reach the view (byte-equal to the library's frame);
    values outside the allowed set exit 2 with one line."""
    from renderer.views import HeadPanorama

    out = tmp_path / "h.png"
    assert main(BASE + ["--view", "head-panorama", "--filter", "trilinear", "--supersample", "2",
                        "--out", str(out)]) == 0, capsys.readouterr().err
    assert np.array_equal(_read(out), _frame(HeadPanorama(64, filter="trilinear", supersample=2)))
    rc = main(BASE + ["--view", "head-panorama", "--supersample", "0", "--out",
                      str(tmp_path / "x.png")])
    err = capsys.readouterr().err
    assert rc == 2 and "supersample" in err and err.count("\n") == 1
