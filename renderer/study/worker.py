"""Work units run by the executors: render a chunk of frames, finish a shot.

:func:`render_chunk` renders some frames of one shot (every view, every frame
encoding), writes each file atomically, and returns the file records (path,
SHA-256 of the bytes written, size) and the frame metrics.  :func:`finish_shot`
reads the shot's 8-bit frames back and writes its previews and videos.  Both are
plain functions of picklable arguments so a process pool and Dask run the same
code and produce the same bytes.  The shared :class:`~.build.Resources` come
either as an argument (Dask passes a scattered future) or from the per-process
cache, filled on a worker's first unit from the pickle file named in the task (the
local pool, see :mod:`.executors`).  No decisions about what to
render are made here (see :mod:`.runner`).
"""

from __future__ import annotations

import json
import os
from concurrent.futures import ThreadPoolExecutor
import pickle
import signal

import imageio.v3 as iio
import numba
import numpy as np
import PIL.PngImagePlugin  # noqa: F401  (the PNG codec, loaded before the first unit)

from .. import pngmeta
from ..composite import modulation_map, to_uint8_srgb
from ..display import SRGB8, make_display, parse_target
from ..dither import frame_seed, quantise
from ..errors import MagretinaError
from ..field import FieldVector
from ..figure import annotate
from ..io import atomic_write_bytes, display_png_bytes, linear16_png_bytes, png_bytes
from ..pipeline import composite_inputs, prepare, visual_field_mean
from ..pngmeta import label_chunks
from ..pose import Pose
from ..provenance import CAUTION, frame_params
from . import metrics as metrics_mod
from .exports import preview_bytes, write_video
from .outputs import append_manifest, sha256_bytes, sha256_file

_RESOURCES: dict = {}


def init_worker(numba_threads: int | None):
    """Process-pool initializer: set numba's thread count, leave Ctrl-C to the parent
    (which terminates the pool).  Everything a unit needs is imported with this
    module, i.e. when the pool starts, while the parent is still planning."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    _RESOURCES.clear()
    _set_threads(numba_threads)
_PARENT = {"pid": None}


def watch_parent():
    """Remember the parent process, so a unit can stop when the runner was killed."""
    _PARENT["pid"] = os.getppid()


def parent_gone() -> bool:
    """True in a pool worker whose runner has ended (it was re-parented)."""
    return _PARENT["pid"] is not None and os.getppid() != _PARENT["pid"]


def _resources(task, resources):
    if resources is not None:
        return resources
    key = task["res_key"]
    if key not in _RESOURCES:
        with open(task["resources_path"], "rb") as fh:
            _RESOURCES.update(pickle.load(fh))
    return _RESOURCES[key]


def _set_threads(n):
    if n:
        numba.set_num_threads(max(1, min(int(n), numba.config.NUMBA_NUM_THREADS)))


def build_display(cfg):
    """The display model of a task's resolved ``[display]`` table (table path absolute)."""
    if not cfg:
        return SRGB8, 0.5
    d = make_display(cfg["kind"], cfg["bits"], cfg.get("black_cd_m2"), cfg.get("white_cd_m2"),
                     cfg.get("gamma"), cfg.get("table"), where="display")
    return d, parse_target(cfg.get("pattern_grey", 0.5), d, where="display.pattern_grey")


_DISPLAYS: dict = {}


def _display(cfg):
    key = json.dumps(cfg, sort_keys=True, default=str)
    if key not in _DISPLAYS:
        _DISPLAYS[key] = build_display(cfg)
    return _DISPLAYS[key]


def frame_labels(task, fr, vname, view, enc, field, pose, layout, response, product, display):
    """Text chunks of one study frame file (no Creation Time: reruns give the same bytes)."""
    dcfg = task.get("display") or {}
    method = dcfg.get("dither", "none")
    params = frame_params(field, pose, layout, response, view, task["gain"], product, display,
                          method, task["seed"] if method != "none" else None,
                          dcfg.get("temporal") if method != "none" else None,
                          config_sha256=task.get("config_sha256"), study=task.get("study_name"),
                          shot_id=task["shot_id"], frame=fr["index"], t_s=fr["t_s"],
                          view_name=vname, outside=task["outside"])
    if enc == "png16":
        what = "16-bit linear light (code/65535)"
    elif enc == "figure":
        what = "annotated figure, 8-bit sRGB"
    else:
        what = f"codes for display {display.kind} {display.bits}-bit"
    desc = (f"study {task.get('study_name')!s} shot {task['shot_id']} frame {fr['index']} "
            f"(t = {fr['t_s']:g} s), view {vname}: frame composited onto the scene; {what}")
    warn = ("code values for the measured display in the parameters, not sRGB"
            if enc == "png8" and display.kind == "table" else None)
    if enc == "figure":
        warn = "figure for publication; not a stimulus (annotation band, display model not applied)"
    return label_chunks(desc, CAUTION, params, warning=warn, created=False)


def figure_bytes(ctx, vname, img, labels, fr) -> bytes:
    """PNG bytes of the annotated figure of one frame and view (8-bit sRGB)."""
    m = modulation_map(ctx.signal_map(vname), ctx.mean_signal, ctx.gain)
    rng = (float(np.nanmin(m)), float(np.nanmax(m))) if np.isfinite(m).any() else (0.0, 0.0)
    view = ctx.views[vname]
    pick = getattr(view, "pick", None) if hasattr(view, "pick") else getattr(view, "eye", None)
    eyes = [e.name for e in ctx.layout.eyes] if pick is None else [str(pick)]
    fig = annotate(to_uint8_srgb(img), f"heading {fr['yaw_deg']:g} deg, t = {fr['t_s']:g} s, "
                                       f"view {vname}", eyes, rng, CAUTION, grey=ctx.pattern_grey)
    return png_bytes(fig, pngmeta.srgb_chunks() + list(labels))


# Frames whose files may be in the writer's hands at once; beyond that the render loop
# waits.  Two keep the writer busy while the next frame renders, and bound the memory
# (a 2048 x 1024 frame in float32 is 24 MB).
WRITE_AHEAD = 2


def _write_file(path, rel, make_bytes, meta):
    """Writer-thread job: encode, write atomically (fsynced), hash; the file's record."""
    data = make_bytes()
    atomic_write_bytes(path, data)
    return {"path": rel, "sha256": sha256_bytes(data), "bytes": len(data), **meta}


class _FrameWriter:
    """Encodes, hashes and writes a chunk's files on one thread while the render loop
    goes on (PNG encoding, SHA-256 and fsync release the GIL), and hands back each
    frame's records in frame order once all of that frame's files are on disk.

    At most :data:`WRITE_AHEAD` frames are outstanding; ``done`` is called with
    (frame index, records, metrics flag) in submission order, so the journal still
    records a frame only after its files were renamed into place.
    """

    def __init__(self, done):
        self._pool = ThreadPoolExecutor(1, thread_name_prefix="magretina-writer")
        self._pending = []
        self._done = done

    def submit_frame(self, i, jobs, extra):
        """Queue frame i's files (jobs of :func:`_write_file` arguments)."""
        self._pending.append((i, [self._pool.submit(_write_file, *j) for j in jobs], extra))

    def collect(self, keep=WRITE_AHEAD):
        """Hand back the frames already written, and wait while more than ``keep`` are
        outstanding."""
        self._collect(keep)

    def _collect(self, keep):
        while self._pending and (len(self._pending) > keep or
                                 all(f.done() for f in self._pending[0][1])):
            i, futs, extra = self._pending.pop(0)
            self._done(i, [f.result() for f in futs], extra)

    def finish(self):
        self._collect(keep=0)

    def close(self):
        # Let writes already started finish (each is atomic either way), then stop.
        self._pool.shutdown(wait=True, cancel_futures=True)


def render_chunk(task: dict, resources=None) -> dict:
    """Render frames ``task["frames"]`` of one shot; see the module docstring.

    Rendering and file output overlap: each frame's files are encoded, written and
    hashed by a writer thread (:class:`_FrameWriter`) while the metrics and the next
    frame are computed.
    Returns ``{"shot", "records": [...], "metrics": {frame: {...}}, "frames": n}``.
    """
    res = _resources(task, resources)
    _set_threads(task.get("numba_threads"))
    out_dir = task["out_dir"]
    dcfg = task.get("display") or {}
    display, grey = _display(dcfg)
    method = dcfg.get("dither", "none")
    temporal = dcfg.get("temporal", True)
    encoder = task.get("png_encoder")
    records, metrics = [], {}

    def frame_done(i, recs, has_metrics):
        records.extend(recs)
        if task.get("journal", True):
            # Recorded as soon as its files are on disk (each was fsynced and renamed), so a
            # run killed from here on never renders this frame again.
            append_manifest(out_dir, {"shot": task["shot"], "partial": True, "frame": i,
                                      "files": recs,
                                      "metrics": {str(i): metrics.get(i)} if has_metrics
                                      else {}})

    writer = _FrameWriter(frame_done)
    try:
        for fr in task["frames"]:
            if parent_gone():
                # The runner was killed: stop rather than write frames that a resumed run
                # (possibly already running) will write itself.
                raise SystemExit(0)
            i = fr["index"]
            field = FieldVector(np.asarray(fr["b_ned_T"]), model=task["field_model"])
            pose = Pose(fr["yaw_deg"], fr["pitch_deg"], fr["roll_deg"])
            rkey = fr["response"]
            response, product = res.responses[rkey], res.products[rkey]
            if getattr(response, "lab_rf", False):
                # a lab-fixed RF table reads the coil direction of this frame's rf-on step
                response = response.with_rf(fr["rf_ned"])
            inputs = prepare(field, pose, res.layout, response, product)
            mean = visual_field_mean(inputs)
            if mean == 0.0:
                raise MagretinaError(f"{task['shot_id']} frame {i}: the mean signal over the "
                                     f"visual field is 0; modulation undefined")
            ctx = metrics_mod.MetricContext(
                shot=task["shot"], shot_id=task["shot_id"], frame=i, t_s=fr["t_s"],
                seed=task["seed"], params=task["params"], field=field,
                ambient_ned_T=np.asarray(fr["ambient_ned_T"]), pose=pose,
                layout=res.layout, response=response, product=product,
                gain=task["gain"], views=res.views, inputs=inputs, mean_signal=mean,
                metric_views=res.metric_views, display=display, dither=method,
                temporal=temporal, pattern_grey=grey, scene=res.scene,
                outside=task["outside"])
            images, codes_of = ctx.images, ctx.codes
            jobs = []
            for vi, (vname, view) in enumerate(res.views.items()):
                targets = fr["files"][vname]  # encoding -> relative path to write (only those)
                if not targets:
                    continue
                img = composite_inputs(inputs, mean, res.layout, view, res.scene, task["gain"],
                                       task["outside"])
                images[vname] = img
                for enc, rel in targets.items():
                    labels = frame_labels(task, fr, vname, view, enc, field, pose, res.layout,
                                          response, product, display)
                    if enc == "figure":
                        data = figure_bytes(ctx, vname, img, labels, fr)

                        def make(data=data):
                            return data
                    elif enc == "png8":
                        # quantised here: the display metrics reuse the codes
                        codes = quantise(display, img, method,
                                         frame_seed(task["seed"], i, temporal, view=vi))
                        codes_of[vname] = codes

                        def make(codes=codes, labels=labels):
                            return display_png_bytes(codes, display, labels, encoder)
                    else:
                        def make(img=img, labels=labels):
                            return linear16_png_bytes(img, labels, encoder)
                    jobs.append((os.path.join(out_dir, rel), rel, make,
                                 {"frame": i, "view": vname, "encoding": enc}))
            writer.submit_frame(i, jobs, bool(fr["metrics"]))
            if fr["metrics"]:
                # Computed while the writer encodes this frame; its journal line waits
                # for both.
                metrics[i] = metrics_mod.compute(ctx, task["providers"], task["provider_options"])
            writer.collect()
        writer.finish()
    finally:
        writer.close()
    return {"shot": task["shot"], "records": records, "metrics": metrics,
            "frames": len(task["frames"])}


def finish_shot(task: dict, resources=None) -> dict:
    """Write the previews and videos of one shot from its 8-bit frames on disk."""
    out_dir = task["out_dir"]
    records = []
    for item in task["items"]:
        frames = (iio.imread(os.path.join(out_dir, p)) for p in item["frames"])
        path = os.path.join(out_dir, item["path"])
        if item["kind"] in ("gif", "apng"):
            data = preview_bytes(frames, item["fps"], item["kind"], item["max_width"],
                                 item.get("label"))
            atomic_write_bytes(path, data)
            sha, size = sha256_bytes(data), len(data)
        else:
            write_video(path, frames, item["fps"], item["video"], item["codec"], item["crf"],
                        item.get("label"))
            sha, size = sha256_file(path), os.path.getsize(path)
        records.append({"path": item["path"], "sha256": sha, "bytes": size, "frame": None,
                        "view": item["view"], "encoding": item["encoding"]})
    return {"shot": task["shot"], "records": records, "finish": True}


#: The work units by name, as the executors and the pipe pool's workers call them.
UNITS = {"render": render_chunk, "finish": finish_shot}
