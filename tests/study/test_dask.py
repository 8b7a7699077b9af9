"""The Dask executor: same bytes as the in-process renderer, geometry shared
(renderer.study.executors)."""

import json
import os

import pytest

from renderer.study import run_study
from studyhelp import GRID_STUDY, tree_digest, write

pytest.importorskip("dask.distributed")

DASK_STUDY = GRID_STUDY.replace("{output_extra}", "png16 = true").replace(
    "step_deg = 30.0", "step_deg = 120.0").replace(
    "values = [30.0, 45.0, 60.0]", "values = [30.0, 30.0]").replace(
    "[render]", '[views.left]\nkind = "eye-disc"\neye = "left"\nsize = 24\n\n[render]')


def test_dask_localcluster_byte_identical_to_inline(tmp_path, monkeypatch):
    """A 2-worker LocalCluster gives byte-identical frames, manifest and tables to the
    in-process run.  The sweep repeats a latitude, so shots with equal parameters
    exist: they must each be rendered (pure=False), not merged.  The workers also
    journal every frame in the manifest as soon as its files are on disk (checked on
    the manifest as it stands just before the final compaction)."""
    from renderer.study import outputs, runner

    study = write(tmp_path, DASK_STUDY)
    ref = str(tmp_path / "inline")
    a = run_study(study, ref, progress=False)
    out = str(tmp_path / "dask")
    journal = []
    real_compact = runner.outputs.compact_manifest

    def spy(out_dir, entries):
        with open(os.path.join(out_dir, outputs.MANIFEST), encoding="utf-8") as fh:
            journal.append(fh.read())
        return real_compact(out_dir, entries)

    monkeypatch.setattr(runner.outputs, "compact_manifest", spy)
    b = run_study(study, out, jobs=2, executor="dask", progress=False, chunk_frames=1)
    assert a["frames_rendered"] == b["frames_rendered"] == 12
    assert b["executor"] == "dask"
    da, db = tree_digest(ref), tree_digest(out)
    # frames (4 shots x 3 frames x 2 views x 2 encodings), 5 tables, 8 timing tables
    assert len(da) == 4 * 3 * 2 * 2 + 5 + 4 * 2
    assert da == db
    _check_frame_journal(journal[0], out)


def _check_frame_journal(text, out):
    """One partial line per (shot, frame), before its shot's line, listing exactly that
    frame's files (which verify); common practice for resumable batch jobs (a journal
    entry per finished unit of work)."""
    from renderer.study import outputs

    lines = [json.loads(x) for x in text.splitlines() if x.strip()]
    partial = [x for x in lines if x.get("partial")]
    whole = {x["shot"]: (k, x) for k, x in enumerate(lines) if not x.get("partial")}
    assert sorted((x["shot"], x["frame"]) for x in partial) == \
        sorted((sh, f) for sh in range(4) for f in range(3))
    for k, x in enumerate(lines):
        if not x.get("partial"):
            continue
        pos, entry = whole[x["shot"]]
        assert k < pos, "a frame was recorded after its shot"
        listed = {r["path"] for r in entry["files"] if r.get("frame") == x["frame"]}
        assert {r["path"] for r in x["files"]} == listed and len(listed) == 4
        for r in x["files"]:
            assert outputs.record_ok(out, r)

