"""Run a study: plan, claim the folder, skip what verifies, render the rest, export.

:func:`run_study` is what ``magretina run`` calls.  It validates and expands the
study (nothing renders if any problem is found), builds the shared resources once
per distinct geometry, claims the output folder (resume the same study, refuse
another unless forced), works out which frame files are missing or do not match
their manifest checksums, and has an executor render only those, in chunks of
frames so that one long sequence still uses every worker.  As shots finish, their
previews and videos are made and a manifest line is appended; at the end the
tables (``conditions.csv``, ``metrics.csv``, ``metrics.nc``) are rewritten from the
manifest if their content changed.  :func:`dry_run` describes the work instead.
"""

from __future__ import annotations

import json
import math
import os
import sys
import time
from dataclasses import dataclass, field

from tqdm import tqdm

from .. import budget
from ..budget import check_jobs
from ..errors import ConfigError, MagretinaError
from ..warmup import ensure, names_for
from ..inputs import image_size
from ..io import check_png_encoder
from . import exports, outputs
from .build import build_resources, build_view
from .executors import make_executor, start_dask, start_local
from .expand import load_study, snake
from .expand import plan as make_plan
from .orientation import study_outputs
from .schema import resolve_path

PREVIEW_ENCODING = {"gif": "gif", "apng": "apng"}


def encodings_of(cfg) -> dict:
    o = cfg["output"]
    enc = {}
    if o["png8"]:
        d = cfg["display"]
        enc["frames/*/*.png"] = outputs.ENCODINGS["png8"] if (d["kind"], d["bits"]) == (
            "srgb", 8) else outputs.display_encoding(d)
    if o["png16"]:
        enc["frames/*/*_lin16.png"] = outputs.ENCODINGS["png16"]
    if o["figures"]:
        enc["figures/*/*.png"] = outputs.ENCODINGS["figure"]
    if o["preview"] != "none":
        enc[f"previews/*.{'gif' if o['preview'] == 'gif' else 'png'}"] = \
            outputs.ENCODINGS[o["preview"]]
    if o["video"] == "mp4":
        enc["video/*.mp4"] = outputs.ENCODINGS["mp4"] + f", crf {o['crf']}"
    elif o["video"] == "lossless":
        ext = "mkv" if o["lossless_codec"] == "ffv1" else "mp4"
        enc[f"video/*.{ext}"] = outputs.ENCODINGS["lossless-" + o["lossless_codec"]]
    if o["netcdf"]:
        enc["metrics.nc"] = "NetCDF-4 (HDF5) via xarray, engine h5netcdf"
    return enc


def frame_digits(plan) -> int:
    return max(4, len(str(plan.max_frames - 1)))


def expected_files(plan, shot):
    """{frame: {view: {encoding: relpath}}} and the shot-level items (previews, videos)."""
    cfg = shot.config
    o = cfg["output"]
    digits = frame_digits(plan)
    encs = [e for e in ("png8", "png16", "figures") if o[e]]
    encs = ["figure" if e == "figures" else e for e in encs]
    per_frame = {i: {v: {e: outputs.frame_name(shot.shot_id, v, i, digits, e) for e in encs}
                     for v in cfg["views"]} for i in range(len(shot.frames))}
    fps = exports.playback_fps(cfg)
    items = []
    for v in cfg["views"]:
        frames8 = [per_frame[i][v]["png8"] for i in range(len(shot.frames))] if o["png8"] else []
        if o["preview"] != "none":
            items.append({"kind": o["preview"], "view": v, "frames": frames8, "fps": fps,
                          "max_width": o["preview_width"], "encoding": o["preview"],
                          "label": exports.shot_label(plan, shot, v, "preview"),
                          "path": outputs.preview_name(shot.shot_id, v, o["preview"])})
        if o["video"] != "none":
            enc = "mp4" if o["video"] == "mp4" else "lossless-" + o["lossless_codec"]
            items.append({"kind": "video", "view": v, "frames": frames8, "fps": fps,
                          "video": o["video"], "codec": o["lossless_codec"], "crf": o["crf"],
                          "encoding": enc, "label": exports.shot_label(plan, shot, v, "video"),
                          "path": outputs.video_name(shot.shot_id, v, o["video"],
                                                     o["lossless_codec"])})
    return per_frame, items


def dry_run(plan, out_dir, stream=sys.stdout, first=5, est=None) -> dict:
    """Print the shot and frame counts, an output size estimate, the first shots."""
    n_files, raw_bytes = 0, 0
    for s in plan.shots:
        o = s.config["output"]
        for vcfg in s.config["views"].values():
            H, W = build_view(vcfg).shape
            per = (3 * H * W if o["png8"] else 0) + (6 * H * W if o["png16"] else 0)
            raw_bytes += per * len(s.frames)
            n_files += len(s.frames) * (int(o["png8"]) + int(o["png16"]))
    info = {"shots": len(plan.shots), "frames": plan.n_frames, "files": n_files,
            "estimated_bytes_max": raw_bytes, "out": out_dir}
    w = stream.write
    st = plan.study.resolved["study"]
    w(f"study {st['name']!r}: {len(plan.shots)} shots, {plan.n_frames} frames, "
      f"{n_files} frame files -> {out_dir}\n")
    w(f"estimated size: at most {raw_bytes / 1e6:.1f} MB (uncompressed pixel bytes; PNG "
      f"compression makes the files smaller)\n")
    if est is not None:
        w(f"estimated resources: {est.describe()}; roughly {est.seconds:.3g} s of rendering "
          f"(an order of magnitude only)\n")
        info["estimated_memory_bytes"] = est.memory_bytes
    if plan.dims:
        w("dimensions: " + " x ".join(f"{d[0]}[{d[1]}]" for d in plan.dims) + "\n")
    for s in plan.shots[:first]:
        params = ", ".join(f"{k}={v}" for k, v in s.labels.items()) or "(no swept parameters)"
        w(f"  {s.shot_id}: {params}; {s.config['sequence']['kind']}, {len(s.frames)} frames, "
          f"seed {s.seed}\n")
    if len(plan.shots) > first:
        w(f"  ... and {len(plan.shots) - first} more shots\n")
    return info


def estimate(plan, jobs=1):
    """The :class:`renderer.budget.Estimate` of running ``plan`` with ``jobs`` workers.

    Every process holds every shared resource (the views' direction tables, the
    scene, the per-eye metric grids of each distinct geometry), so those count once
    per process; frames count for the frame limit and the time estimate.
    """
    est = budget.Estimate(f"study {plan.study.resolved['study']['name']!r}",
                          processes=max(1, int(jobs)))
    for key, cfg in plan.resource_configs.items():
        widths = []
        for name, vcfg in cfg["views"].items():
            H, W = build_view(vcfg).shape
            est.add_image(f"views.{name}", H, W, budget.VIEW_BYTES_PER_PIXEL)
            if vcfg["kind"] in ("world-panorama", "head-panorama"):
                widths.append(W)
        sc = cfg["scene"]
        if sc["kind"] == "file":
            sw, sh = image_size(resolve_path(plan.study.base_dir, sc["path"]), "scene.path")
        else:
            sw = sc.get("width") or max(widths + [256])
            sh = sw // 2
        est.add_image("scene", sh, sw, budget.SCENE_BYTES_PER_PIXEL)
        gw = int(cfg["metrics"]["grid_width"])
        est.add("metric grids", 4 * gw * (gw // 2) * budget.VIEW_BYTES_PER_PIXEL)
    shapes = {}
    for s in plan.shots:
        px = 0
        for v in s.config["views"].values():
            k = json.dumps(v, sort_keys=True, default=str)
            if k not in shapes:
                shapes[k] = build_view(v).shape
            px += shapes[k][0] * shapes[k][1]
        est.pixel_frames += float(px) * len(s.frames)
    est.frames = plan.n_frames
    return est


@dataclass
class _ShotState:
    shot: object
    keep: list = field(default_factory=list)  # verified records from the manifest
    new: list = field(default_factory=list)
    metrics: dict = field(default_factory=dict)
    chunks_left: int = 0
    rendered: int = 0
    items: list = field(default_factory=list)


def run_study(study_path, out_dir=None, jobs=1, executor="local", scheduler=None,
              dry=False, force=False, progress=True, stream=None, chunk_frames=None,
              max_memory_gb=None, force_jobs=False, png_encoder=None, display=None) -> dict:
    """Run (or resume) a study into ``out_dir``; returns a summary dict.

    Parameters
    ----------
    study_path : path of the TOML study file
    out_dir : output folder (default ``outputs/<study name>``)
    jobs : worker processes (``--jobs``); 1 renders in this process
    executor : "local" or "dask"; ``scheduler`` an existing Dask scheduler address
    dry : print the plan only
    force : allow replacing another study's folder
    max_memory_gb : memory limit (GB) instead of the default, see :mod:`renderer.budget`
    force_jobs : allow more workers than CPUs
    png_encoder : "fast" or "small" instead of the study file's ``output.png_encoder``
        (``--png-encoder``; compression only, the decoded pixels are the same)
    display : dict or None, keys replacing the study file's [display] table (``--display``,
        ``--bits``, ``--dither``...); part of the configuration's identity, so a folder made
        with another display is another study
    """
    stream = stream or sys.stdout
    t0 = time.perf_counter()
    check_jobs(jobs, force_jobs)
    if out_dir is not None:
        _check_out_dir(out_dir)
    if png_encoder is not None:
        check_png_encoder(png_encoder, "--png-encoder")
    study = load_study(study_path, display=display)
    started = None
    if not dry and executor == "local" and not scheduler and jobs > 1:
        # Workers spawn and import the library while this process plans; they get the
        # resources with their first unit.
        started = start_local(jobs)
    elif not dry and executor == "dask":
        # The same for Dask: the cluster starts and its workers import the library
        # while this process plans.
        started = start_dask(jobs, scheduler)
    try:
        return _run(study, out_dir, jobs, executor, scheduler, dry, force, progress, stream,
                    chunk_frames, t0, started, max_memory_gb, png_encoder)
    finally:
        if started is not None:
            started.close(cancel=True)


def _check_out_dir(out_dir):
    p = os.fspath(out_dir)
    if not p.strip():
        raise MagretinaError(f"--out {p!r}: must name a folder")
    if "\x00" in p:
        raise MagretinaError(f"--out {p!r}: holds a NUL character")
    if os.path.exists(p) and not os.path.isdir(p):
        raise MagretinaError(f"--out {p}: exists and is not a folder")


def _run(study, out_dir, jobs, executor, scheduler, dry, force, progress, stream, chunk_frames,
         t0, started, max_memory_gb=None, png_encoder=None):
    plan = make_plan(study)
    if out_dir is None:
        out_dir = os.path.join("outputs", snake(study.resolved["study"]["name"]))
    est = estimate(plan, jobs).check(max_memory_gb)
    # A dry run makes every check the run makes before its first frame (resources,
    # the output folder), only without precomputing or writing anything.
    resources, problems = {}, []
    for key, cfg in plan.resource_configs.items():
        try:
            resources[key] = build_resources(cfg, study.base_dir, precompute=not dry)
        except (MagretinaError, TypeError, ValueError) as exc:
            problems.append(str(exc))
    if problems:
        raise ConfigError(sorted(set(problems)), source=study.path)
    if dry:
        resources.clear()
        outputs.folder_verdict(out_dir, study.config_sha256, force)
        return dry_run(plan, out_dir, stream, est=est)

    # On a cold cache: say so and compile what the views need here, in two processes,
    # before any worker starts (workers would otherwise each compile the same kernels).
    ensure([n for r in resources.values()
            for n in names_for(r.views.values(), getattr(getattr(r.scene, "image", None),
                                                         "shape", None), patterns=True)])

    old = outputs.claim_folder(out_dir, study.config_sha256, force)
    sidecar = outputs.study_sidecar(plan, encodings_of(study.resolved))
    sj = os.path.join(out_dir, outputs.STUDY_JSON)
    if not old or not os.path.isfile(sj) or _sidecar_field(sj, "study_file_sha256") != study.sha256:
        outputs.write_sidecar(out_dir, sidecar)

    # What must be (re)done.
    states, units = {}, []
    want_metrics = any(s.config["output"]["metrics"] or s.config["output"]["netcdf"]
                       for s in plan.shots)
    entries = {}
    for shot in plan.shots:
        per_frame, items = expected_files(plan, shot)
        st = _ShotState(shot, items=items)
        prev = old.get(shot.index)
        prev_recs = {r["path"]: r for r in prev.get("files", [])} if prev else {}
        prev_metrics = outputs.entry_metrics(prev) if prev else {}
        todo = []
        for i, views in per_frame.items():
            write = {}
            for v, encs in views.items():
                write[v] = {}
                for e, rel in encs.items():
                    rec = prev_recs.get(rel)
                    if rec is not None and outputs.record_ok(out_dir, rec):
                        st.keep.append(rec)
                    else:
                        write[v][e] = rel
            has_m = i in prev_metrics
            if has_m:
                st.metrics[i] = prev_metrics[i]
            if any(write[v] for v in write) or (want_metrics and not has_m):
                todo.append(_frame_task(shot, i, write, want_metrics and not has_m))
        for it in items:
            rec = prev_recs.get(it["path"])
            if rec is not None and outputs.record_ok(out_dir, rec):
                it["ok_record"] = rec
        states[shot.index] = st
        if not todo:
            if prev is not None and not prev.get("partial") and \
                    all("ok_record" in it for it in items):
                entries[shot.index] = prev
                continue
        st.rendered = len(todo)
        # About 32 chunks per worker for a long sequence, so that the workers finish
        # within a fraction of a second of each other (a unit costs well under a
        # millisecond besides its frames); equal sizes (to within one).
        size = chunk_frames or max(1, min(32, math.ceil(max(1, len(todo)) / (32 * jobs))))
        n_chunks = math.ceil(len(todo) / size) if todo else 0
        bounds = [len(todo) * k // n_chunks for k in range(n_chunks + 1)] if todo else [0]
        for a, b in zip(bounds[:-1], bounds[1:]):
            units.append((shot, todo[a:b]))
        st.chunks_left = n_chunks

    n_frames_todo = sum(len(u[1]) for u in units)
    shots_todo = [s for s in plan.shots if s.index not in entries]
    summary = {"out": out_dir, "shots": len(plan.shots), "frames": plan.n_frames,
               "shots_rendered": len(shots_todo), "frames_rendered": n_frames_todo,
               "executor": executor if jobs > 1 or executor == "dask" else "inline",
               "jobs": jobs}
    # no bars when everything is up to date: the command says so in one line
    quiet = not progress or not shots_todo
    bar_s = tqdm(total=len(plan.shots), initial=len(entries), unit="shot", desc="shots",
                 disable=quiet, position=0, file=sys.stderr)
    bar_f = tqdm(total=n_frames_todo, unit="frame", desc="frames", disable=quiet,
                 position=1, file=sys.stderr)
    ex = None
    try:
        if shots_todo:
            ex = make_executor(executor, resources, jobs, scheduler, started=started,
                               work_dir=outputs.work_dir(out_dir))
            outstanding = 0
            for shot, frames in units:
                ex.submit("render", _chunk_task(plan, shot, frames, out_dir, png_encoder))
                outstanding += 1
            for st in states.values():
                if st.shot.index not in entries and st.chunks_left == 0:
                    outstanding += _after_render(ex, st, out_dir, entries, bar_s)
            while outstanding:
                r = ex.next_result()
                outstanding -= 1
                st = states[r["shot"]]
                st.new.extend(r["records"])
                if r.get("finish"):
                    _complete(st, out_dir, entries, bar_s)
                    continue
                st.metrics.update(r["metrics"])
                bar_f.update(r["frames"])
                st.chunks_left -= 1
                if st.chunks_left == 0:
                    outstanding += _after_render(ex, st, out_dir, entries, bar_s)
            ex.close()
            ex = None
    except BaseException:
        if ex is not None:
            ex.close(cancel=True)
        raise
    finally:
        bar_f.close()
        bar_s.close()
    outputs.remove_work_dir(out_dir)
    outputs.compact_manifest(out_dir, entries)
    _write_tables(plan, entries, out_dir)
    summary["wall_s"] = time.perf_counter() - t0
    return summary


def _sidecar_field(path, key):
    try:
        with open(path, encoding="utf-8") as fh:
            return json.load(fh).get(key)
    except (OSError, ValueError):
        return None


def _frame_task(shot, i, write, metrics):
    fs = shot.frames
    task = {"index": i, "t_s": float(fs.t_s[i]), "yaw_deg": float(fs.yaw_deg[i]),
            "pitch_deg": float(fs.pitch_deg[i]), "roll_deg": float(fs.roll_deg[i]),
            "b_ned_T": fs.b_ned_T[i].tolist(), "ambient_ned_T": fs.ambient_ned_T[i].tolist(),
            "response": fs.response[i], "files": write, "metrics": metrics}
    rf = fs.extra.get("rf_ned")
    if rf is not None and all(math.isfinite(x) for x in rf[i]):
        task["rf_ned"] = [float(x) for x in rf[i]]  # the RF coil's direction (world NED) in this frame
    return task


def _display_task(cfg, base_dir):
    d = dict(cfg["display"])
    if d.get("table"):
        d["table"] = resolve_path(base_dir, d["table"])
    return d


def _chunk_task(plan, shot, frames, out_dir, png_encoder=None):
    cfg = shot.config
    return {"shot": shot.index, "shot_id": shot.shot_id, "seed": shot.seed,
            "display": _display_task(cfg, plan.study.base_dir),
            "config_sha256": plan.study.config_sha256,
            "study_name": plan.study.resolved["study"]["name"],
            "params": shot.params, "res_key": shot.res_key, "out_dir": out_dir,
            "field_model": cfg["field"]["model"], "gain": cfg["render"]["gain"],
            "outside": cfg["render"]["outside"], "frames": frames,
            "png_encoder": png_encoder or cfg["output"].get("png_encoder", "fast"),
            "providers": cfg["metrics"]["providers"],
            "provider_options": cfg["metrics"]["options"]}


def _after_render(ex, st, out_dir, entries, bar_s) -> int:
    """All frames of a shot are on disk: submit its previews/videos, or complete it."""
    # Frames are deterministic, so a preview or video that verifies is still right.
    need = [it for it in st.items if "ok_record" not in it]
    for it in st.items:
        if it not in need:
            st.keep.append(it["ok_record"])
    if need:
        ex.submit("finish", {"shot": st.shot.index, "shot_id": st.shot.shot_id,
                             "res_key": st.shot.res_key, "out_dir": out_dir,
                             "items": [{k: v for k, v in it.items() if k != "ok_record"}
                                       for it in need]})
        return 1
    _complete(st, out_dir, entries, bar_s)
    return 0


def _complete(st, out_dir, entries, bar_s):
    shot = st.shot
    recs = {r["path"]: r for r in st.keep}
    recs.update({r["path"]: r for r in st.new})
    n = len(shot.frames)
    entry = {"shot": shot.index, "shot_id": shot.shot_id, "seed": shot.seed,
             "params": shot.params, "frames": n,
             "files": sorted(recs.values(), key=lambda r: r["path"]),
             "metrics": [st.metrics.get(i) for i in range(n)]}
    outputs.append_manifest(out_dir, entry)
    # As a resumed run will read it back (sorted keys), so tables come out the same.
    entries[shot.index] = json.loads(outputs.manifest_line(entry))
    bar_s.update(1)


def _write_tables(plan, entries, out_dir):
    o = plan.study.resolved["output"]
    if len(entries) != len(plan.shots):
        return
    if o["conditions"]:
        outputs.write_if_changed(os.path.join(out_dir, "conditions.csv"),
                                 exports.conditions_csv(plan, entries))
    if o["timing"]:
        for rel, data in exports.timing_csvs(plan, entries).items():
            outputs.write_if_changed(os.path.join(out_dir, rel), data)
    if o["metrics"]:
        outputs.write_if_changed(os.path.join(out_dir, "metrics.csv"),
                                 exports.metrics_csv(plan, entries))
    if o["netcdf"]:
        outputs.write_if_changed(os.path.join(out_dir, "metrics.nc"),
                                 exports.netcdf_bytes(exports.metrics_dataset(plan, entries)))
    if plan.study.resolved.get("orientation"):
        study_outputs(plan, out_dir)
