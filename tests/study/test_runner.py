"""Running studies: exact outputs, resume, atomicity under SIGKILL, refusal of a
different study (renderer.study.runner / outputs)."""

import csv
import hashlib
import json
import os
import re
import signal
import subprocess
import sys
import time

import numpy as np
import pytest

from renderer.errors import MagretinaError
from renderer.study import run_study
from studyhelp import GRID_STUDY, tree_digest, write

REPO = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))


def _sha(path):
    with open(path, "rb") as fh:
        return hashlib.sha256(fh.read()).hexdigest()


def test_grid_study_files_manifest_conditions_resume(tmp_path, grid_study):
    """3 x 2 grid x 12-frame heading sweep: exactly 72 frame files, 6 manifest lines
    whose SHA-256 match the files (hashlib), 72 conditions rows; a rerun changes no
    byte; deleting one frame recreates only that frame."""
    out = str(tmp_path / "out")
    s = run_study(grid_study, out, progress=False)
    assert (s["shots"], s["frames"], s["frames_rendered"]) == (6, 72, 72)
    expected = {f"frames/shot{i:03d}/world_{k:04d}.png" for i in range(6) for k in range(12)}
    frames = {os.path.relpath(os.path.join(d, f), out) for d, _, fs in os.walk(out) for f in fs
              if f.endswith(".png")}
    assert frames == expected
    assert set(os.listdir(out)) == {"frames", "study.json", "manifest.jsonl", "conditions.csv",
                                    "metrics.csv", "metrics.nc", "timing"}
    assert sorted(os.listdir(os.path.join(out, "timing"))) == [f"shot{i:03d}_world.csv"
                                                                 for i in range(6)]
    lines = open(os.path.join(out, "manifest.jsonl")).read().splitlines()
    assert len(lines) == 6
    for i, line in enumerate(lines):
        e = json.loads(line)
        assert e["shot"] == i and len(e["files"]) == 12 and len(e["metrics"]) == 12
        for rec in e["files"]:
            assert _sha(os.path.join(out, rec["path"])) == rec["sha256"]
    with open(os.path.join(out, "conditions.csv"), newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == 72
    # Experiment-software conventions (common practice): unique snake_case headers
    # starting with a letter; paths relative to the CSV; varied parameters as columns.
    header = list(rows[0])
    assert len(set(header)) == len(header)
    assert all(re.fullmatch(r"[a-z][a-z0-9_]*", h) for h in header), header
    assert {"latitude_deg", "response_shape", "yaw_deg", "file"} <= set(header)
    assert all(os.path.isfile(os.path.join(out, r["file"])) for r in rows)
    assert {r["response_shape"] for r in rows} == {"p2_plus", "p2_minus"}
    assert sorted({float(r["yaw_deg"]) for r in rows}) == list(np.arange(0.0, 360.0, 30.0))
    side = json.load(open(os.path.join(out, "study.json")))
    assert side["study_file_sha256"] == _sha(grid_study)
    assert side["seeds"]["shot000"] == json.loads(lines[0])["seed"]
    assert "numpy" in side["package_versions"] and "igrf" in side["field_models"]
    assert "8-bit sRGB" in json.dumps(side["encodings"])

    before = tree_digest(out)
    stat_before = {p: os.stat(os.path.join(out, p)).st_mtime_ns for p in before}
    s2 = run_study(grid_study, out, progress=False)
    assert s2["frames_rendered"] == 0
    assert tree_digest(out) == before

    victim = "frames/shot004/world_0007.png"
    os.remove(os.path.join(out, victim))
    s3 = run_study(grid_study, out, progress=False)
    assert s3["frames_rendered"] == 1
    assert tree_digest(out) == before
    changed = [p for p in before if os.stat(os.path.join(out, p)).st_mtime_ns != stat_before[p]]
    # Only that frame is rewritten (the manifest gets its shot's line again, same bytes
    # after compaction).
    assert sorted(changed) == sorted([victim, "manifest.jsonl"])


def test_netcdf_dims_and_config_attribute(tmp_path, grid_study):
    """metrics.nc opens with xarray (engine h5netcdf): sweep axes are labelled
    dimensions, the resolved configuration is a JSON string attribute."""
    import xarray as xr

    out = str(tmp_path / "out")
    run_study(grid_study, out, progress=False)
    with xr.open_dataset(os.path.join(out, "metrics.nc"), engine="h5netcdf") as ds:
        assert dict(ds.sizes) == {"latitude_deg": 3, "response_shape": 2, "frame": 12}
        np.testing.assert_allclose(ds["latitude_deg"].values, [30.0, 45.0, 60.0])
        assert list(ds["response_shape"].values) == ["p2_plus", "p2_minus"]
        cfg = json.loads(ds.attrs["config"])
        side = json.load(open(os.path.join(out, "study.json")))
        assert cfg == json.loads(json.dumps(side["resolved_config"]))
        yaw = ds["yaw_deg"].sel(latitude_deg=45.0, response_shape="p2_minus").values
        np.testing.assert_allclose(yaw, np.arange(0.0, 360.0, 30.0))
        # Inclination grows with latitude (IGRF, northern hemisphere, same meridian).
        inc = ds["inclination_deg"].isel(frame=0, response_shape=0).values
        assert np.all(np.diff(inc) > 0)


def test_other_study_refused_unless_force(tmp_path):
    """A folder of another study (other resolved configuration) is refused unless
    forced; a non-empty folder without a study is refused too."""
    one = GRID_STUDY.replace("{output_extra}", "").split("[[sweep.axis]]")[0]
    study = write(tmp_path, one)
    out = str(tmp_path / "out")
    run_study(study, out, progress=False)
    other = write(tmp_path, one.replace("seed = 42", "seed = 43"), "o.toml")
    with pytest.raises(MagretinaError, match="another study"):
        run_study(other, out, progress=False)
    s = run_study(other, out, force=True, progress=False)
    assert s["frames_rendered"] == 12
    # Comments do not change the study: same resolved configuration resumes.
    same = write(tmp_path, "# a comment\n" + one.replace("seed = 42", "seed = 43"), "c.toml")
    assert run_study(same, out, progress=False)["frames_rendered"] == 0
    (tmp_path / "junk").mkdir()
    (tmp_path / "junk" / "notes.txt").write_text("keep me")
    with pytest.raises(MagretinaError, match="not empty"):
        run_study(study, str(tmp_path / "junk"), progress=False)


KILL_STUDY = GRID_STUDY.replace("width = 64", "width = 128").replace(
    "step_deg = 30.0", "step_deg = 60.0").replace(
    "values = [30.0, 45.0, 60.0]", "values = [20.0, 30.0, 40.0, 50.0, 60.0, 70.0]").replace(
    "{output_extra}", "png16 = true")


def test_sigkill_partway_then_resume_is_byte_identical(tmp_path):
    """A run killed with SIGKILL after some shots leaves no visible partial file, and
    rerunning gives outputs byte-identical to an uninterrupted run (local pool, 2
    processes)."""
    study = write(tmp_path, KILL_STUDY)
    ref = str(tmp_path / "ref")
    run_study(study, ref, progress=False)
    out = str(tmp_path / "killed")
    cmd = [sys.executable, "-m", "renderer", "run", study, "--out", out, "--jobs", "2", "--quiet"]
    proc = subprocess.Popen(cmd, cwd=REPO, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    man = os.path.join(out, "manifest.jsonl")
    t0 = time.time()
    n = 0
    while time.time() - t0 < 120 and proc.poll() is None:
        if os.path.isfile(man):
            n = sum(1 for _ in open(man))
            if n >= 2:
                break
        time.sleep(0.005)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    assert 2 <= n < 12, f"kill came at {n} manifest lines; the test needs a partial run"
    s = run_study(study, out, progress=False)
    # Frames are recorded one by one as they reach the disk: only the rest is redone.
    assert 0 < s["frames_rendered"] < 72
    assert tree_digest(out) == tree_digest(ref)
