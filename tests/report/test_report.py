"""The HTML study report, built from a real study run and checked in headless Chromium."""

import io
import json
import os
import re
import shutil

import pytest

from renderer.cli import main
from renderer.errors import MagretinaError
from renderer.browser import browser_check, find_browser
from renderer.report import build_report

STUDY = """
[study]
name = "report-fixture"
seed = 7

[site]
lat_deg = 40.0
lon_deg = 5.0

[field]
model = "dipole"
date = "2026-05-20"

[layout]
preset = "lateral"

[response]
kind = "legendre"
coeffs = [0.70, 0.0, 0.10]

[views.world]
kind = "world-panorama"
width = 64

[scene]
kind = "dusk"

[render]
gain = 1.0

[sequence]
kind = "heading-sweep"
start_deg = 0.0
stop_deg = 360.0
step_deg = 120.0
fps = 1.0

[output]
preview = "gif"                  # previews carry no frame number: the report must cope
netcdf = true

[metrics]
providers = ["basic", "prediction"]
grid_width = 60

[metrics.options.prediction]
density = 0.01
heading_step_deg = 30.0

[[sweep.axis]]
key = "site.lat_deg"
values = [0.0, 60.0]
name = "latitude_deg"
"""

NEED_BROWSER = ("no Chromium found on PATH (chromium, chromium-browser, google-chrome); "
                "install it with 'apt-get install -y chromium' to run the browser check")


@pytest.fixture(scope="module")
def study_dir(tmp_path_factory):
    from renderer.study.runner import run_study

    base = tmp_path_factory.mktemp("study")
    toml = base / "fixture.toml"
    toml.write_text(STUDY)
    out = base / "out"
    run_study(str(toml), str(out), jobs=1, progress=False, stream=io.StringIO())
    return out


def _refs(text):
    return re.findall(r"""(?:src|href)=['"]([^'"]+)['"]""", text)


def test_report_is_self_contained(study_dir):
    """Every reference is a data URI or a relative path to a file of the study folder
    (so the page opens from disk with no server or network); the caution, the sweep
    axis, each frame link and the metrics table are present."""
    path = build_report(study_dir)
    assert path == os.path.join(str(study_dir), "report.html")
    text = open(path, encoding="utf-8").read()
    assert "not measurements" in text and "latitude_deg" in text
    refs = _refs(text)
    links = [r for r in refs if not r.startswith("data:")]
    manifest = [json.loads(line) for line in open(study_dir / "manifest.jsonl")]
    frames = sorted(f["path"] for e in manifest for f in e["files"] if f["encoding"] == "png8")
    assert sorted(links) == frames and len(frames) == 6
    for r in links:
        assert "://" not in r and not r.startswith("/")
        assert os.path.isfile(os.path.join(str(study_dir), r))
    assert sum(r.startswith("data:image/png;base64,") for r in refs) >= 6 + 1
    header = open(study_dir / "metrics.csv").readline().strip().split(",")
    assert all(f"<th title='{h}'>" in text for h in header)
    assert "Cramér–Rao bound, mean over headings (°) against latitude deg" in text \
        or "Cramér–Rao bound, mean over headings (°) against latitude" in text
    for caption in ("Receptor response", "Predicted modulation pattern in the head frame with θ",
                    "Cramér–Rao bound on heading error against heading"):
        assert caption in text
    assert "Model plots left out" not in text


def _captions(text):
    return re.findall(r"<figcaption>(.*?)</figcaption>", text, flags=re.S)


def test_report_reads_as_a_document(study_dir):
    """Caution once; an overview first; key figures before the frames; thumbnails captioned
    with the condition values (sweep value and heading); no snake_case or dicts in captions;
    provenance last."""
    text = open(build_report(study_dir), encoding="utf-8").read()
    assert text.count("class='caution'") == 1 and text.count("not measurements") == 1
    order = [text.index(h) for h in ("<h2>Overview</h2>", "<h2>Key results</h2>",
                                     "<h2>Model of the first condition</h2>", "<h2>Frames</h2>",
                                     "<h2>Metrics</h2>", "<h2>Provenance</h2>")]
    assert order == sorted(order)
    assert "<strong>Varied:</strong>" in text and "0, 60" in text
    caps = _captions(text)
    thumbs = [c for c in caps if c.startswith("latitude ")]
    assert len(thumbs) == 6
    assert "latitude 60°; heading 120°" in thumbs
    for c in caps:
        assert "{" not in c and not re.search(r"\b[a-z]+_[a-z_]+\b", c), c
        assert "shot000" not in c


CATEGORICAL = STUDY.replace("""[[sweep.axis]]
key = "site.lat_deg"
values = [0.0, 60.0]
name = "latitude_deg"
""", """[[sweep.axis]]
key = "response.coeffs"
values = [[0.7, 0.0, 0.1], [0.7, 0.0, -0.1]]
labels = ["p2_plus", "p2_minus"]
name = "response_shape"

[[sweep.axis]]
key = "site.lon_deg"
values = [5.0]
name = "site_lon_deg"
""")


def test_report_plots_only_axes_that_vary(tmp_path, capsys):
    """A constant axis gets no plot; a categorical axis is listed as categories; the
    report command shows its progress on stderr."""
    from renderer.study.runner import run_study

    (tmp_path / "c.toml").write_text(CATEGORICAL)
    run_study(str(tmp_path / "c.toml"), out_dir=str(tmp_path / "out"), progress=False)
    assert main(["report", str(tmp_path / "out")]) == 0
    res = capsys.readouterr()
    assert "plots" in res.err and "thumbnails" in res.err
    text = (tmp_path / "out" / "report.html").read_text()
    caps = _captions(text)
    assert any("against response shape" in c for c in caps)
    assert not any("longitude" in c for c in caps)
    assert "categories" in text


def test_prediction_metrics_are_study_outputs(study_dir):
    """The "prediction" provider's numbers land in metrics.csv and in the NetCDF dataset
    over the sweep axis and frame, and equal a direct library call for the same shot."""
    import csv

    import numpy as np
    import xarray as xr

    from renderer.eye import load_layout
    from renderer.field import fixed
    from renderer.mosaic import MosaicSpec
    from renderer.pose import Pose
    from renderer.predict import CountModel
    from renderer.predict.summary import predict_summary
    from renderer.response import Legendre

    rows = list(csv.DictReader(open(study_dir / "metrics.csv")))
    assert len(rows) == 6 and "crb_mean_deg" in rows[0] and "michelson_left" in rows[0]
    r = rows[4]
    ref, _ = predict_summary(fixed(float(r["field_total_ut"]), float(r["inclination_deg"]),
                                   float(r["declination_deg"])),
                             Pose(float(r["yaw_deg"])), load_layout("lateral"),
                             Legendre([0.7, 0.0, 0.1]), MosaicSpec(density=0.01),
                             CountModel(gain=1.0), headings_deg=np.arange(0, 360, 30.0))
    assert float(r["crb_at_yaw_deg"]) == pytest.approx(ref["crb_at_yaw_deg"], rel=1e-9)
    ds = xr.open_dataset(study_dir / "metrics.nc", engine="h5netcdf")
    try:
        assert ds["crb_mean_deg"].dims == ("latitude_deg", "frame")
        assert float(ds["crb_mean_deg"].isel(latitude_deg=1, frame=1)) == pytest.approx(
            float(r["crb_mean_deg"]), rel=1e-12)
    finally:
        ds.close()


def test_report_loads_in_headless_chromium(study_dir):
    """Real browser: Chromium from the system packages, headless, fresh profile, driven
    over the DevTools protocol; the page must load with no console errors and every image
    must decode (complete with a natural width > 0)."""
    if find_browser() is None:
        pytest.skip(NEED_BROWSER)
    path = build_report(study_dir)
    res = browser_check(path)
    assert res["console_errors"] == []
    assert len(res["images"]) == len(re.findall(r"<img ", open(path).read()))
    assert all(i["complete"] and i["w"] > 0 and i["h"] > 0 for i in res["images"]), res["images"]
    assert res["title"].startswith("magretina study report")


def test_browser_check_sees_broken_pages(tmp_path):
    """Negative control: a missing image and a console error are reported, so a clean
    result on the report means something."""
    if find_browser() is None:
        pytest.skip(NEED_BROWSER)
    page = tmp_path / "bad.html"
    page.write_text("<!DOCTYPE html><html><head><title>x</title></head><body>"
                    "<img src='missing.png'><script>console.error('boom')</script></body></html>")
    res = browser_check(page)
    assert any("boom" in e for e in res["console_errors"])
    assert not res["images"][0]["complete"] or res["images"][0]["w"] == 0


def test_report_cli_with_browser_check(study_dir, capsys):
    if find_browser() is None:
        pytest.skip(NEED_BROWSER)
    out = study_dir / "sub" / "r.html"
    assert main(["report", str(study_dir), "--out", str(out), "--check-browser"]) == 0
    text = capsys.readouterr().out
    assert "0 not rendered, 0 console error(s)" in text
    assert all(os.path.isfile(os.path.join(str(out.parent), r))
               for r in _refs(out.read_text()) if not r.startswith("data:"))


def test_report_bad_inputs(tmp_path, study_dir, capsys):
    with pytest.raises(MagretinaError, match="no such folder"):
        build_report(tmp_path / "nope")
    with pytest.raises(MagretinaError, match="no study.json"):
        build_report(tmp_path)
    empty = tmp_path / "empty"
    empty.mkdir()
    shutil.copy(study_dir / "study.json", empty / "study.json")
    with pytest.raises(MagretinaError, match="no finished shots"):
        build_report(empty)
    assert main(["report", str(empty)]) == 2
    err = capsys.readouterr().err
    assert "no finished shots" in err and "Traceback" not in err
    with pytest.raises(MagretinaError, match="no Chromium browser found"):
        browser_check(tmp_path / "x.html", browser="no-such-browser-here")
    fake = tmp_path / "fakebrowser"
    fake.write_text("#!/bin/sh\nexit 3\n")
    fake.chmod(0o755)
    page = tmp_path / "p.html"
    page.write_text("<html></html>")
    with pytest.raises(MagretinaError, match="cannot start"):
        browser_check(page, browser=str(fake), timeout_s=5)
    assert main(["report", str(study_dir), "--force", "--check-browser", "--browser", str(fake)]) == 2
    assert "cannot start" in capsys.readouterr().err
    assert main(["report", str(study_dir)]) == 2  # report.html exists: needs --force
