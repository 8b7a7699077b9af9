"""The Dask executor: same bytes as the in-process renderer, geometry shared
(renderer.study.executors)."""

import pytest

from renderer.study import run_study
from studyhelp import GRID_STUDY, tree_digest, write

pytest.importorskip("dask.distributed")

DASK_STUDY = GRID_STUDY.replace("{output_extra}", "png16 = true").replace(
    "step_deg = 30.0", "step_deg = 120.0").replace(
    "values = [30.0, 45.0, 60.0]", "values = [30.0, 30.0]").replace(
    "[render]", '[views.left]\nkind = "eye-disc"\neye = "left"\nsize = 24\n\n[render]')


def test_dask_localcluster_byte_identical_to_inline(tmp_path):
    """A 2-worker LocalCluster gives byte-identical frames, manifest and tables to the
    in-process run.  The sweep repeats a latitude, so shots with equal parameters
    exist: they must each be rendered (pure=False), not merged."""
    study = write(tmp_path, DASK_STUDY)
    ref = str(tmp_path / "inline")
    a = run_study(study, ref, progress=False)
    out = str(tmp_path / "dask")
    b = run_study(study, out, jobs=2, executor="dask", progress=False, chunk_frames=1)
    assert a["frames_rendered"] == b["frames_rendered"] == 12
    assert b["executor"] == "dask"
    da, db = tree_digest(ref), tree_digest(out)
    # frames (4 shots x 3 frames x 2 views x 2 encodings), 5 tables, 8 timing tables
    assert len(da) == 4 * 3 * 2 * 2 + 5 + 4 * 2
    assert da == db
