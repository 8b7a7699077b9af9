"""Study-file validation and sweep expansion (renderer.study.config / expand)."""

import numpy as np
import pytest

from renderer.cli import main
from renderer.errors import ConfigError
from renderer.study import load_study, plan
from renderer.study.expand import parse_key_path, set_key_path, shot_seeds

from studyhelp import GRID_STUDY, write

BAD = """
[study]
name = "bad"

[site]
lat_dge = 52.0
lon_deg = 4.0

[field]
model = "igrf"
date = "2026-05-20"

[pose]
pitch_deg = 120.0

[response]
kind = "tabulated"
csv = "missing_table.csv"

[views.world]
kind = "world-panorama"
widht = 64

[views.disc]
kind = "fisheye-of-doom"

[render]
gain = "high"

[sequence]
kind = "heading-sweep"
step_deg = 30.0
stpo_deg = 90.0

[output]
video = "avi"

[[sweep.axis]]
key = "pose.yaw_deg"
values = [0.0, 720.0]
"""


def test_every_problem_is_reported_at_once_with_key_and_allowed(tmp_path):
    """Validation up front lists all problems, each with its key path and the allowed
    values or range (issue 5: no silent defaults for typos)."""
    with pytest.raises(ConfigError) as ei:
        load_study(write(tmp_path, BAD))
    probs = ei.value.problems
    text = "\n".join(probs)
    expect = [
        ("site.lat_dge", "unknown key"),
        ("site.lat_deg", "missing"),
        ("pose.pitch_deg", "[-90, 90]"),
        ("response.csv", "no such file"),
        ("views.world.widht", "allowed: "),
        ("views.disc.kind", "'world-panorama'"),
        ("render.gain", "must be a number"),
        ("sequence.stpo_deg", "unknown key"),
        ("output.video", "'lossless'"),
    ]
    for key, allowed in expect:
        line = [p for p in probs if key in p]
        assert line, f"no problem reported for {key}:\n{text}"
        assert any(allowed in p for p in line), (key, line)
    assert len(probs) >= len(expect)


def test_bad_sweep_value_is_named_with_axis_and_range(tmp_path):
    """A value of a sweep axis that is out of range is reported before rendering."""
    text = GRID_STUDY.replace("{output_extra}", "").replace(
        "values = [30.0, 45.0, 60.0]", "values = [30.0, 95.0, 60.0]")
    with pytest.raises(ConfigError) as ei:
        plan(load_study(write(tmp_path, text)))
    msg = str(ei.value)
    assert "sweep.axis[0]" in msg and "value 1" in msg and "site.lat_deg" in msg
    assert "[-90, 90]" in msg


def test_cli_bad_study_exit_2_no_traceback(tmp_path, capsys):
    """Bad input: exit status 2 and one message, no traceback (RULES 6)."""
    rc = main(["run", write(tmp_path, BAD), "--dry-run"])
    err = capsys.readouterr().err
    assert rc == 2
    assert "Traceback" not in err and "site.lat_dge" in err


def test_grid_expansion_order_and_seeds(grid_study):
    """3 x 2 grid: 6 shots, last axis fastest (itertools.product order); seeds are
    numpy.random.SeedSequence(42).spawn(6) (NumPy reference, computed independently)."""
    p = plan(load_study(grid_study))
    assert [d[:2] for d in p.dims] == [("latitude_deg", 3), ("response_shape", 2)]
    got = [(s.params["latitude_deg"], s.labels["response_shape"]) for s in p.shots]
    assert got == [(a, b) for a in (30.0, 45.0, 60.0) for b in ("p2_plus", "p2_minus")]
    ref = [int(c.generate_state(1, np.uint64)[0]) for c in np.random.SeedSequence(42).spawn(6)]
    assert [s.seed for s in p.shots] == ref == shot_seeds(42, 6)
    assert len(set(ref)) == 6
    assert all(len(s.frames) == 12 for s in p.shots)
    assert p.shots[3].config["site"]["lat_deg"] == 45.0
    assert p.shots[3].config["response"]["coeffs"] == [0.7, 0.0, -0.1]


def test_range_and_linspace_follow_python_and_numpy(tmp_path):
    """range = [start, stop, step] has Python range / numpy.arange semantics (stop
    excluded); linspace = numpy.linspace (both ends); zip pairs axes element-wise."""
    text = GRID_STUDY.replace("{output_extra}", "").split("[[sweep.axis]]")[0] + """
[sweep]
combine = "zip"

[[sweep.axis]]
key = "pose.pitch_deg"
range = [-20.0, 25.0, 10.0]

[[sweep.axis]]
key = "site.lat_deg"
linspace = [10.0, 50.0, 5]
"""
    p = plan(load_study(write(tmp_path, text)))
    assert len(p.dims) == 1 and p.dims[0][1] == 5
    pitch = [s.config["pose"]["pitch_deg"] for s in p.shots]
    lat = [s.config["site"]["lat_deg"] for s in p.shots]
    np.testing.assert_allclose(pitch, np.arange(-20.0, 25.0, 10.0))
    np.testing.assert_allclose(lat, np.linspace(10.0, 50.0, 5))


def test_zip_lengths_must_agree(tmp_path):
    text = GRID_STUDY.replace("{output_extra}", "").replace(
        'name = "response_shape"', 'name = "response_shape"\ngroup = "latitude_deg"')
    with pytest.raises(ConfigError, match="different lengths"):
        plan(load_study(write(tmp_path, text)))


def test_key_paths_with_indices():
    """Dotted paths with [index] address array elements; missing tables are created."""
    assert parse_key_path("timeline.steps[0].angle_deg") == ["timeline", "steps", 0, "angle_deg"]
    raw = {"timeline": {"steps": [{"t_s": 1.0, "action": "rotate", "angle_deg": 0.0}]}}
    out = set_key_path(raw, "timeline.steps[0].angle_deg", 90.0)
    assert out["timeline"]["steps"][0]["angle_deg"] == 90.0
    assert raw["timeline"]["steps"][0]["angle_deg"] == 0.0  # input untouched
    assert set_key_path({}, "pose.yaw_deg", 5.0) == {"pose": {"yaw_deg": 5.0}}
    with pytest.raises(ValueError):
        set_key_path(raw, "timeline.steps[3].angle_deg", 1.0)


def test_view_keys_pass_through_to_registered_class(tmp_path):
    """View tables are checked against the dataclass fields of the registered view, so
    an eye disc accepts eye/size/radius_deg and rejects a panorama-only key."""
    text = GRID_STUDY.replace("{output_extra}", "").replace(
        '[render]', '[views.left]\nkind = "eye-disc"\neye = "left"\nsize = 32\nradius_deg = 80.0\n\n'
                    '[render]')
    p = plan(load_study(write(tmp_path, text)))
    assert set(p.shots[0].config["views"]) == {"world", "left"}
    bad = text.replace("size = 32", "width = 32")
    with pytest.raises(ConfigError, match=r"views\.left\.width.*EyeDisc.*radius_deg"):
        load_study(write(tmp_path, bad, "bad.toml"))


def test_example_study_is_valid(tmp_path, capsys):
    """`magretina new-study` writes a study that validates and expands (dry run)."""
    path = str(tmp_path / "ex.toml")
    assert main(["new-study", path]) == 0
    assert main(["run", path, "--dry-run"]) == 0
    out = capsys.readouterr().out
    assert "6 shots, 72 frames" in out
    assert main(["new-study", path]) == 2  # refuses to overwrite


def test_sweep_values_reported_with_other_problems(tmp_path):
    """Bad sweep values are listed in the same report as the other problems."""
    with pytest.raises(ConfigError) as ei:
        load_study(write(tmp_path, BAD))
    line = [p for p in ei.value.problems if p.startswith("sweep.axis[0]")]
    assert len(line) == 1 and "value 1" in line[0] and "[-360, 360]" in line[0]
