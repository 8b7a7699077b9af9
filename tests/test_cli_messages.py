"""One clear line for the first mistakes a new user makes, and the preset listing.

The command line promises one line on stderr and exit status 2 for bad input
(DEVELOPERS.md, ground rules); these tests feed it the inputs a first hour produces:
a text file given as a scene, a text file given as a response table, a study run
twice, and a search for the available presets.
"""

import os
import textwrap

import pytest

from renderer.cli import main


def run(argv, capsys):
    rc = main(argv)
    out = capsys.readouterr()
    return rc, out.out, out.err


def test_non_image_scene_is_one_line(tmp_path, capsys):
    bad = tmp_path / "notes.txt"
    bad.write_text("not an image\n", "utf-8")
    rc, _, err = run(["render", "--lat-deg", "52", "--lon-deg", "9.5", "--date", "2026-06-01",
                      "--width", "64", "--scene", str(bad), "--out", str(tmp_path / "f.png")],
                     capsys)
    assert rc == 2 and err.count("\n") == 1
    assert str(bad) in err and "expected a PNG" in err
    assert "install" not in err.lower() and "Traceback" not in err
    assert not (tmp_path / "f.png").exists()


def test_response_show_on_non_table_is_one_line(tmp_path, capsys):
    bad = tmp_path / "table.npz"
    bad.write_bytes(b"plain text, not a table\n")
    rc, _, err = run(["response", "show", str(bad)], capsys)
    assert rc == 2 and err.count("\n") == 1
    assert str(bad) in err and ".npz" in err and "pickle" not in err.lower()


def test_presets_lists_every_kind(capsys):
    """Every layout preset, response kind, radical-pair preset, field model, scene kind and
    view appears."""
    from renderer.eye.layout import preset_names
    from renderer.field import MODELS as FIELD_MODELS
    from renderer.response import REGISTRY as RESPONSES
    from renderer.spin.definition import list_presets
    from renderer.views import REGISTRY as VIEWS

    rc, out, err = run(["presets"], capsys)
    assert rc == 0, err
    lines = out.splitlines()
    names = {ln.split()[0] for ln in lines if ln.startswith("  ")}
    for n in [*preset_names(), *RESPONSES, *list_presets(), *VIEWS, *FIELD_MODELS, "dusk",
              "uniform", "file"]:
        assert n in names, n
    for ln in lines:
        if ln.startswith("  "):
            assert len(ln.split(None, 1)) == 2, f"no description: {ln!r}"
            assert len(ln) < 130
    rc, out, _ = run(["presets", "layouts"], capsys)
    assert rc == 0 and "tawny-owl" in out and "fad-trp" not in out


def test_resumed_run_with_nothing_to_do(tmp_path, capsys):
    """A second run of a finished study says all frames are up to date, with no empty bars."""
    study = tmp_path / "s.toml"
    study.write_text(textwrap.dedent("""
        [study]
        name = "resume-check"
        [site]
        lat_deg = 40.0
        lon_deg = 5.0
        [field]
        date = "2026-05-20"
        [views.world]
        kind = "world-panorama"
        width = 32
        [sequence]
        kind = "heading-sweep"
        start_deg = 0.0
        stop_deg = 360.0
        step_deg = 120.0
        [output]
        png8 = true
    """), "utf-8")
    out = tmp_path / "out"
    rc, first, err = run(["run", str(study), "--out", str(out)], capsys)
    assert rc == 0, err and "rendered 3 frames" in first
    rc, again, err = run(["run", str(study), "--out", str(out)], capsys)
    assert rc == 0, err
    assert "all 3 frames (1 shots) up to date" in again and "rendered" not in again
    assert "frames:" not in err and "shots:" not in err
    assert os.path.isfile(out / "conditions.csv")


def test_new_study_header_names_the_written_file(tmp_path, capsys, monkeypatch):
    """The header's commands name the file just written and the folder the run will use."""
    monkeypatch.chdir(tmp_path)
    rc, out, err = run(["new-study", "mine.toml"], capsys)
    assert rc == 0, err
    text = (tmp_path / "mine.toml").read_text("utf-8")
    head = "\n".join(ln for ln in text.splitlines() if ln.startswith("#     magretina"))
    assert "magretina run mine.toml" in head and "example_study.toml" not in head
    from renderer.study import load_study
    from renderer.study.expand import snake

    folder = os.path.join("outputs", snake(load_study("mine.toml").resolved["study"]["name"]))
    assert folder in text
    rc, out, err = run(["run", "mine.toml", "--dry-run"], capsys)
    assert rc == 0, err
    assert folder in out


@pytest.mark.parametrize("argv", [["report", "missing-dir", "--check-browser",
                                   "--browser", "no-such-chromium-xyz"]])
def test_check_browser_says_first_that_it_needs_chromium(argv, tmp_path, capsys):
    """Without a browser, --check-browser refuses before writing anything and says how to get one."""
    d = tmp_path / "study"
    d.mkdir()
    argv = ["report", str(d), "--check-browser", "--browser", str(tmp_path / "no-chromium")]
    rc, out, err = run(argv, capsys)
    assert rc == 2 and err.count("\n") == 1
    assert "Chromium" in err and "apt-get install chromium" in err
    assert not (d / "report.html").exists()


def test_demo_names_its_invented_open_ocean_site(tmp_path, capsys):
    """The demo states its site is invented and prints it with hemispheres.

    The site lies in the open North Pacific; the great-circle distance to Honolulu
    (21.31° N, 157.86° W, from memory) is checked to be over 1500 km with the haversine
    formula (common practice), so it cannot be read as a real station.
    """
    import math

    from renderer.demo import SITE

    lat1, lon1 = math.radians(SITE["lat_deg"]), math.radians(SITE["lon_deg"])
    lat2, lon2 = math.radians(21.31), math.radians(-157.86)
    h = math.sin((lat2 - lat1) / 2) ** 2 + math.cos(lat1) * math.cos(lat2) * math.sin((lon2 - lon1) / 2) ** 2
    assert 2 * 6371.0 * math.asin(math.sqrt(h)) > 1500.0
    rc, out, err = run(["demo", "--out", str(tmp_path / "d"), "--width", "64"], capsys)
    assert rc == 0, err
    first = out.splitlines()[0]
    assert "(invented)" in first and "36.75° N, 152.25° W" in first
