"""Study exports: animated previews, videos, ``conditions.csv``, ``metrics.csv``, NetCDF.

Videos go through imageio's FFMPEG plugin with the ffmpeg binary of the
imageio-ffmpeg wheel.  ``macro_block_size=1`` stops imageio from silently resizing
frames to multiples of 16; H.264 in yuv420p needs even sizes, which the study
checks up front.  The lossy MP4 is yuv420p (chroma subsampled, for viewing); the
lossless options are libx264rgb at ``-crf 0`` (RGB, no chroma subsampling) and
FFV1 in Matroska, both pixel-exact for 8-bit sRGB frames.  Previews (GIF or APNG
via Pillow) are downscaled by an integer factor and are not for measurement.
Tables follow what experiment software expects: one row per stimulus file,
snake_case headers starting with a letter, paths relative to the CSV.  NetCDF is
written by xarray with the ``h5netcdf`` engine (needs ``h5py``; the
``magretina[scale]`` extra); the resolved configuration is a JSON string
attribute since nested mappings are not valid NetCDF attributes.  This module
does not render.
"""

from __future__ import annotations

import csv
import io
import json

import numpy as np
from PIL import Image

from ..errors import MagretinaError
from ..io import atomic_path, atomic_write_bytes
from ..version import __version__
from .expand import snake
from .outputs import CAUTION


def write_video(path, frames_u8, fps, video="mp4", codec="libx264rgb", crf=18,
                label=None) -> str:
    """Encode an iterable of (H, W, 3) uint8 sRGB frames to a video file, atomically.

    Parameters
    ----------
    video : "mp4" (H.264 yuv420p, lossy, ``crf``) or "lossless" (``codec``
        libx264rgb at crf 0 in MP4, or ffv1 in Matroska)
    fps : float, playback frame rate
    label : dict or None, container tags (``title``, ``comment``): what made the file

    Frames are never resized: a frame of odd width or height raises for yuv420p.
    """
    import imageio.v2 as iio2  # deferred: the ffmpeg plugin loads only when a video is written

    if video == "mp4":
        kw = dict(codec="libx264", pixelformat="yuv420p", output_params=["-crf", str(int(crf))])
        fmt = "mp4"
    elif codec == "libx264rgb":
        kw = dict(codec="libx264rgb", pixelformat="rgb24",
                  output_params=["-crf", "0", "-preset", "medium"])
        fmt = "mp4"
    elif codec == "ffv1":
        kw = dict(codec="ffv1", pixelformat="bgr0", output_params=["-level", "3"])
        fmt = "matroska"
    else:
        raise MagretinaError(f"video codec {codec!r}: allowed libx264rgb, ffv1")
    tags = []
    for k, v in (label or {}).items():
        tags += ["-metadata", f"{k}={v}"]
    with atomic_path(path, ".mkv" if fmt == "matroska" else ".mp4") as tmp:
        w = iio2.get_writer(tmp, format="FFMPEG", mode="I", fps=float(fps), quality=None,
                            macro_block_size=1, ffmpeg_log_level="error", input_params=None,
                            ffmpeg_params=["-threads", "1", *tags, "-f", fmt], **kw)
        shape = None
        try:
            for fr in frames_u8:
                fr = np.ascontiguousarray(fr, dtype=np.uint8)
                if shape is None:
                    shape = fr.shape
                    if video == "mp4" and (shape[0] % 2 or shape[1] % 2):
                        raise MagretinaError(f"video {path}: frame {shape[1]} x {shape[0]} must "
                                             f"have even width and height for H.264 yuv420p")
                w.append_data(fr)
        finally:
            w.close()
    return path


def read_video(path) -> np.ndarray:
    """Decode a video into (N, H, W, 3) uint8 RGB (for checks)."""
    import imageio.v2 as iio2  # deferred: the ffmpeg plugin loads only when a video is read

    r = iio2.get_reader(path, format="FFMPEG", pixelformat="rgb24")
    try:
        return np.stack([np.asarray(f) for f in r])
    finally:
        r.close()


def preview_bytes(frames_u8, fps, kind="gif", max_width=256, label=None) -> bytes:
    """Animated GIF or APNG bytes of the frames, downscaled by an integer factor.

    ``label`` (dict or None: ``title``, ``comment``) says what made the file: a GIF
    comment extension, or PNG text chunks (Title, Description) in an APNG."""
    ims = []
    for fr in frames_u8:
        fr = np.asarray(fr, np.uint8)
        k = max(1, -(-fr.shape[1] // int(max_width)))
        ims.append(Image.fromarray(np.ascontiguousarray(fr[::k, ::k])))
    if not ims:
        raise MagretinaError("preview: no frames")
    buf = io.BytesIO()
    duration = max(1, int(round(1000.0 / float(fps))))
    label = label or {}
    if kind == "gif":
        extra = {"comment": label_text(label).encode("utf-8")} if label else {}
        ims[0].save(buf, format="GIF", save_all=True, append_images=ims[1:], duration=duration,
                    loop=0, optimize=False, **extra)
    else:
        from PIL import PngImagePlugin  # deferred: only APNG previews need the PNG plugin

        info = PngImagePlugin.PngInfo()
        for k, v in (("Title", label.get("title")), ("Description", label.get("comment"))):
            if v:
                info.add_text(k, v)
        ims[0].save(buf, format="PNG", save_all=True, append_images=ims[1:], duration=duration,
                    loop=0, default_image=False, pnginfo=info)
    return buf.getvalue()


def shot_label(plan, shot, view, what) -> dict:
    """Tags of a shot's preview or video: what it is, the study, its hash, the caution."""

    name = plan.study.resolved["study"]["name"]
    return {"title": f"{what} of study {name}, shot {shot.shot_id}, view {view}",
            "comment": f"made by magretina {__version__} from the study's 8-bit frames; "
                       f"config_sha256 {plan.study.config_sha256}. {CAUTION}"}


def label_text(label) -> str:
    return " | ".join(str(v) for v in label.values() if v)


def csv_header(names) -> list[str]:
    """snake_case, starting with a letter, unique (common practice of experiment software)."""
    out = []
    for n in names:
        s = snake(n)
        base, k = s, 2
        while s in out:
            s = f"{base}_{k}"
            k += 1
        out.append(s)
    return out


def csv_bytes(columns, rows) -> bytes:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(csv_header(columns))
    for r in rows:
        w.writerow([_cell(r.get(c)) for c in columns])
    return buf.getvalue().encode("utf-8")


def _cell(v):
    if v is None:
        return ""
    if isinstance(v, float):
        return repr(v) if np.isfinite(v) else ""
    if isinstance(v, (list, dict)):
        return json.dumps(v, sort_keys=True, separators=(",", ":"))
    return v


def axis_cells(plan, shot) -> dict:
    """Values of the swept parameters of a shot as CSV cells (labels for tables)."""
    out = {}
    for ax in plan.axes:
        v = shot.params[ax.name]
        out[ax.name] = v if isinstance(v, (int, float, str, bool)) else shot.labels[ax.name]
    return out


def frame_cells(shot, i) -> dict:
    fs = shot.frames
    return {"t_s": float(fs.t_s[i]), "yaw_deg": float(fs.yaw_deg[i]),
            "pitch_deg": float(fs.pitch_deg[i]), "roll_deg": float(fs.roll_deg[i]),
            "lat_deg": float(fs.lat_deg[i]), "lon_deg": float(fs.lon_deg[i]),
            "alt_km": float(fs.alt_km[i]),
            "field_north_ut": float(fs.b_ned_T[i, 0] * 1e6),
            "field_east_ut": float(fs.b_ned_T[i, 1] * 1e6),
            "field_down_ut": float(fs.b_ned_T[i, 2] * 1e6),
            "coil": fs.coil[i], "response": fs.response[i]}


def playback_fps(cfg) -> float:
    """Frames per second a sequence is shown at: ``output.fps``, else the sequence's own
    ``fps``, else 10 (the same rule as the videos)."""
    return float(cfg["output"]["fps"] or cfg["sequence"].get("fps") or 10.0)


def onset_s(frame, fps) -> float:
    """Onset of a frame from the start of its sequence when shown at ``fps``, s."""
    return frame / float(fps)


def conditions_csv(plan, entries) -> bytes:
    """One row per frame image file: path (relative), shot, view, frame, playback rate and
    onset, parameters."""
    axes = [a.name for a in plan.axes]
    fcols = list(frame_cells(plan.shots[0], 0))
    cols = ["file", "encoding", "shot_id", "view", "frame", "fps", "onset_s"] + axes + fcols
    rows = []
    for shot in plan.shots:
        entry = entries[shot.index]
        fps = playback_fps(shot.config)
        base = {"shot_id": shot.shot_id, **axis_cells(plan, shot)}
        # Stimulus files only: figures are for papers, not for experiment software.
        frame_recs = [r for r in entry["files"] if r.get("frame") is not None
                      and r["encoding"] in ("png8", "png16")]
        for rec in sorted(frame_recs, key=lambda r: (r["frame"], r["path"])):
            rows.append({**base, "file": rec["path"], "encoding": rec["encoding"],
                         "view": rec["view"], "frame": rec["frame"], "fps": fps,
                         "onset_s": onset_s(rec["frame"], fps),
                         **frame_cells(shot, rec["frame"])})
    return csv_bytes(cols, rows)


def timing_name(shot_id, view) -> str:
    return f"timing/{shot_id}_{view}.csv"


def timing_csvs(plan, entries) -> dict:
    """{relative path: bytes} of one timing table per shot and view.

    Rows: ``frame, file, onset_s, duration_s, t_s`` for the display-coded frames (the
    16-bit linear files when those are the only ones), ``file`` relative to the timing
    table, onset and duration at the playback rate, ``t_s`` the frame's model time.  A
    table of this shape (one row per image, a path and an onset) is what experiment
    software reads as a conditions file (common practice)."""
    out = {}
    for shot in plan.shots:
        fps = playback_fps(shot.config)
        recs = [r for r in entries[shot.index]["files"] if r.get("frame") is not None]
        pick = "png8" if any(r["encoding"] == "png8" for r in recs) else "png16"
        for view in shot.config["views"]:
            vrecs = sorted((r for r in recs if r["view"] == view and r["encoding"] == pick),
                           key=lambda r: r["frame"])
            rows = [{"frame": r["frame"], "file": "../" + r["path"],
                     "onset_s": onset_s(r["frame"], fps), "duration_s": 1.0 / fps,
                     "t_s": float(shot.frames.t_s[r["frame"]])} for r in vrecs]
            out[timing_name(shot.shot_id, view)] = csv_bytes(
                ["frame", "file", "onset_s", "duration_s", "t_s"], rows)
    return out


def metric_names(entries) -> list[str]:
    names = []
    for e in entries.values():
        for m in e.get("metrics", []):
            for k in m:
                if k not in names:
                    names.append(k)
    return names


def metrics_csv(plan, entries) -> bytes:
    axes = [a.name for a in plan.axes]
    names = metric_names(entries)
    cols = ["shot_id", "frame", "t_s"] + axes + ["coil", "response"] + names
    rows = []
    for shot in plan.shots:
        ms = entries[shot.index].get("metrics", [])
        for i, m in enumerate(ms):
            rows.append({"shot_id": shot.shot_id, "frame": i, "t_s": float(shot.frames.t_s[i]),
                         **axis_cells(plan, shot), "coil": shot.frames.coil[i],
                         "response": shot.frames.response[i], **m})
    return csv_bytes(cols, rows)


def metrics_dataset(plan, entries):
    """xarray Dataset: every metric over (sweep dimensions..., frame); NaN-padded frames."""
    import xarray as xr  # deferred: xarray (optional [scale] extra) is needed only for NetCDF

    names = metric_names(entries)
    dims = [d[0] for d in plan.dims] + ["frame"]
    shape = [d[1] for d in plan.dims] + [plan.max_frames]
    data = {n: np.full(shape, np.nan) for n in names}
    t = np.full(shape, np.nan)
    for shot in plan.shots:
        idx = tuple(shot.coords[d[0]] for d in plan.dims)
        for i, m in enumerate(entries[shot.index].get("metrics", [])):
            for n, v in m.items():
                data[n][idx + (i,)] = v
            t[idx + (i,)] = shot.frames.t_s[i]
    coords = {"frame": np.arange(plan.max_frames)}
    for d in plan.dims:
        for name in d[2]:
            ax = next(a for a in plan.axes if a.name == name)
            vals = list(ax.values) if ax.scalar and not any(isinstance(v, bool) for v in ax.values) \
                else list(ax.labels)
            coords[name] = ((d[0],), np.asarray(vals))
            coords[name + "_label"] = ((d[0],), np.asarray(ax.labels, dtype=str))
    ds = xr.Dataset({n: (dims, a) for n, a in data.items()}, coords=coords)
    ds["t_s"] = (dims, t)
    ds["t_s"].attrs["units"] = "s"
    for n in names:
        unit = netcdf_units(n)
        if unit:
            ds[n].attrs["units"] = unit
    ds.attrs["title"] = f"magretina study {plan.study.resolved['study']['name']}"
    ds.attrs["caution"] = CAUTION
    ds.attrs["config"] = json.dumps(plan.study.resolved, sort_keys=True, default=str)
    ds.attrs["config_sha256"] = plan.study.config_sha256
    ds.attrs["study_file_sha256"] = plan.study.sha256
    return ds


#: Unit word at the end of a name -> the NetCDF ``units`` attribute (UDUNITS-2 symbols,
#: the CF convention; ``uT`` is UDUNITS' ASCII spelling of µT).  docs/data-dictionary.md.
NAME_UNITS = (("_ut", "uT"), ("_nt", "nT"), ("_deg", "degree"), ("_km", "km"), ("_ms", "ms"),
              ("_per_s", "s-1"), ("_s", "s"), ("_mhz", "MHz"), ("_per_rad2", "rad-2"))


def netcdf_units(name) -> str | None:
    """UDUNITS-2 unit of a variable from the unit word its name ends with, or None.

    Per-eye names carry the eye after the unit (``crb_mean_deg_left``), so up to two
    trailing words are tried off as well.
    """
    parts = str(name).split("_")
    for cut in range(0, min(3, len(parts))):
        stem = "_".join(parts[:len(parts) - cut])
        for suffix, unit in NAME_UNITS:
            if stem.endswith(suffix):
                return unit
    return None


def netcdf_bytes(ds) -> bytes:
    """NetCDF-4 bytes of a Dataset (engine h5netcdf)."""
    return bytes(ds.to_netcdf(engine="h5netcdf"))


def write_bytes(path, data):
    return atomic_write_bytes(path, data)
