"""Plots (PNG files decoded by imageio) and the ``magretina predict`` command."""

import json

import imageio.v3 as iio
import numpy as np
import pytest

from renderer import plots
from renderer.cli import main
from renderer.errors import MagretinaError
from renderer.eye import load_layout
from renderer.field import fixed
from renderer.mosaic import MosaicSpec
from renderer.pose import Pose
from renderer.predict import CountModel, fisher_information
from renderer.mosaic import build_mosaic
from renderer.predict.summary import predict_summary
from renderer.response import Legendre


def _png(path):
    img = iio.imread(path)
    assert img.ndim == 3 and img.shape[2] in (3, 4)
    assert img.std() > 5  # something was drawn
    return img


def test_plots_write_decodable_pngs(tmp_path):
    lay = load_layout("lateral")
    f, r = fixed(50, 65, 0), Legendre([0.7, 0, 0.1])
    fr = fisher_information(f, lay, r, build_mosaic(lay, MosaicSpec(density=0.02)), CountModel(),
                            np.arange(0, 360, 10.0))
    paths = [plots.plot_response(r, tmp_path / "r.png"),
             plots.plot_pattern(f, Pose(20), lay, r, tmp_path / "p.png", width=180),
             plots.plot_pattern(f, Pose(20), lay, r, tmp_path / "pw.png", width=180, frame="world"),
             plots.plot_precision(fr, tmp_path / "c.png"),
             plots.plot_metric_sweep([0, 30, 60], {"a": [1, 2, 3]}, tmp_path / "s.png"),
             plots.plot_metric_sweep(["x", "y"], {"a": [1, 2], "b": [2, 1]}, tmp_path / "t.png")]
    for p in paths:
        _png(p)
    assert _png(paths[0]).shape[:2] == (400, 900)
    with pytest.raises(MagretinaError, match="3 x values"):
        plots.plot_metric_sweep([0, 1, 2], {"a": [1, 2]}, tmp_path / "bad.png")
    with pytest.raises(MagretinaError, match="frame"):
        plots.plot_pattern(f, Pose(), lay, r, tmp_path / "bad.png", frame="eye")


ARGS = ["predict", "--field-uT", "50", "--inclination", "65", "--yaw", "30", "--density", "0.02",
        "--heading-step", "10", "--gain", "0.5"]


def test_predict_json_matches_the_library(capsys):
    """The command is a thin layer: its JSON equals predict_summary for the same inputs,
    with the caution and the assumptions stated."""
    assert main(ARGS + ["--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert "not measurements" in out["caution"]
    assert out["assumptions"]["counts"]["flux_per_s"] == 1e4
    ref, _ = predict_summary(fixed(50, 65, 0), Pose(30), load_layout("lateral"),
                             Legendre([0.7, 0, 0.1]), MosaicSpec(density=0.02),
                             CountModel(gain=0.5), headings_deg=np.arange(0, 360, 10.0))
    assert out["metrics"].keys() == ref.keys()
    for k, v in ref.items():
        assert out["metrics"][k] == pytest.approx(v, rel=1e-12), k
    assert len(out["crb_deg_vs_yaw"]["crb_deg"]) == 36 == len(out["crb_deg_vs_yaw"]["yaw_deg"])


def test_predict_table_and_plots(capsys, tmp_path):
    assert main(ARGS + ["--plots", str(tmp_path), "--noise", "gaussian", "--noise-floor", "3"]) == 0
    text = capsys.readouterr().out
    assert text.startswith("CAUTION:") and "gaussian noise (floor 3 counts rms" in text
    # a readable table with units, the field and inclination used, no raw keys or dicts
    assert "Cramér–Rao bound, mean over headings" in text and "°" in text
    assert "total 50.000 µT, inclination 65.00°" in text
    assert "crb_mean_deg" not in text and "{" not in text
    for line in text.splitlines():
        if line.startswith("  Michelson contrast"):
            assert len(line.split()) == 4  # label words + one value per eye (left, right)
    for n in ("response.png", "pattern.png", "precision.png"):
        _png(tmp_path / n)
    noisy = tmp_path / "noisy.png"
    assert main(ARGS + ["--noisy", str(noisy), "--width", "128", "--flux", "300"]) == 0
    assert iio.imread(noisy).shape == (64, 128, 3)
    assert main(ARGS + ["--plots", str(tmp_path)]) == 2  # refuses to overwrite
    assert "--force" in capsys.readouterr().err


@pytest.mark.parametrize("extra, words", [
    (["--flux", "-5"], ["--flux", "-5"]),
    (["--density", "-1"], ["density", "-1"]),
    (["--pool-deg", "150"], ["pool_radius_deg", "larger than the field"]),
    (["--integration-ms", "0"], ["--integration-ms"]),
    (["--noise", "pink"], ["noise", "poisson"]),
    (["--eccentricity", "0-1"], ["--eccentricity"]),
    (["--threshold", "0"], ["threshold"]),
])
def test_predict_bad_input_exits_2_without_traceback(capsys, extra, words):
    assert main(ARGS + extra) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err and err.startswith("magretina predict: error:")
    for w in words:
        assert w in err


def test_predict_pictures_are_labelled(tmp_path):
    """``predict --noisy`` and ``--plots`` PNGs say what they show (units, encoding), what
    made them and that they are model predictions, in the PNG specification's text
    keywords (W3C PNG 3rd edition, 2025, §11.3.4.2), read back with Pillow (not the
    writer's code); the noisy picture also carries the sRGB chunk and the parameters JSON
    with its mosaic, counts and seed."""
    from PIL import Image

    noisy = tmp_path / "noisy.png"
    assert main(ARGS + ["--noisy", str(noisy), "--width", "64", "--flux", "300",
                        "--noisy-seed", "7", "--plots", str(tmp_path)]) == 0
    with Image.open(noisy) as im:
        t = dict(im.text)
        assert "srgb" in im.info
    assert t["Software"].startswith("magretina ")
    for words in (["noisy realisation", "seed 7", "300 absorptions/s", "8-bit sRGB",
                   "linear scene luminance"],):
        for w in words:
            assert w in t["Description"], w
    assert "not measurements" in t["Disclaimer"] and "not a calibrated stimulus" in t["Warning"]
    assert "Creation Time" in t
    p = json.loads(t["magretina parameters"])
    assert p["noisy_seed"] == 7 and p["counts"]["flux_per_s"] == 300.0
    assert p["mosaic"] and p["layout"] == "lateral" and p["command"].startswith("magretina")
    for n in ("response.png", "pattern.png", "precision.png"):
        with Image.open(tmp_path / n) as im:
            t = dict(im.text)
        assert t["Software"].startswith("magretina ") and "not a stimulus" in t["Disclaimer"]
        assert "model prediction" in t["Description"] and "(deg" in t["Description"]
