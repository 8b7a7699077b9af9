"""The study folder: file names, ``study.json``, ``manifest.jsonl``, verification, resume.

Layout of a study folder::

    study.json                  resolved configuration, hashes, versions, seeds, encodings
    manifest.jsonl              one JSON line per finished shot: files with SHA-256, metrics
    frames/<shot>/<view>_<frame>.png          display codes (8-bit sRGB by default)
    frames/<shot>/<view>_<frame>_lin16.png    16-bit linear (gAMA 1.0, cICP)
    timing/<shot>_<view>.csv                  frame files with onset times (s)
    figures/<shot>/<view>_<frame>.png         annotated figures (output.figures; not stimuli)
    previews/<shot>_<view>.gif|.png           animated previews (APNG uses .png)
    video/<shot>_<view>.mp4|.mkv              videos (lossless: libx264rgb .mp4 or FFV1 .mkv)
    conditions.csv, metrics.csv, metrics.nc   tables for experiment and analysis software

Every file is written under a hidden temporary name and renamed
(:mod:`renderer.io`); manifest lines are appended whole and a torn last line (a
killed run) is ignored.  A folder is claimed by ``study.json``: a different study
(another resolved configuration) is refused unless forced, the same study resumes
and skips every file whose size and checksum match the manifest.  No timestamps
are written (PNG frames carry no Creation Time for that reason), so rerunning a
finished study changes no byte.  This module does not
render.
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
import subprocess
import sys
from importlib import metadata

import numpy as np

from ..errors import MagretinaError
from ..io import atomic_write_bytes, atomic_write_json, atomic_write_text
from ..version import __version__
from .schema import resolve_path

STUDY_JSON = "study.json"
MANIFEST = "manifest.jsonl"

ENCODINGS = {
    "png8": "8-bit sRGB PNG (IEC 61966-2-1 transfer function; sRGB, gAMA and cHRM chunks)",
    "png16": "16-bit linear-light PNG (code value / 65535 = linear luminance; gAMA 1.0 and "
             "cICP linear)",
    "figure": "annotated 8-bit sRGB figure (heading, eyes, modulation scale, caution); not a "
              "stimulus",
    "gif": "animated GIF preview, 8-bit sRGB, palette-quantised (not for measurement)",
    "apng": "animated PNG preview, 8-bit sRGB (downscaled; not for measurement)",
    "mp4": "H.264 yuv420p MP4 (lossy) from the 8-bit sRGB frames, no resizing",
    "lossless-libx264rgb": "H.264 RGB MP4, libx264rgb crf 0 (pixel-exact 8-bit sRGB)",
    "lossless-ffv1": "FFV1 Matroska (pixel-exact 8-bit sRGB)",
}

CAUTION = ("Images and numbers are predictions of a model under the stated hypothesis "
           "(receptor response, alignment, gain); they are not measurements of what an animal "
           "perceives.")


def display_encoding(d) -> str:
    """Description of display-coded frames for a non-default ``[display]`` table."""
    store = {8: "8-bit PNG", 10: "10-bit codes in 16-bit PNG samples (bit replication, sBIT 10)",
             16: "16-bit PNG"}[d["bits"]]
    curve = {"srgb": "sRGB transfer (sRGB chunk)",
             "gamma": f"power law gamma {d.get('gamma')} (gAMA chunk)",
             "table": f"measured table {d.get('table')} (no colour chunk: codes for that display)"}
    return (f"{store}, display codes: {curve[d['kind']]}, dither {d['dither']}"
            f"{' (per frame)' if d['temporal'] and d['dither'] != 'none' else ''}")


def sha256_bytes(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def sha256_file(path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def frame_name(shot_id, view, frame, digits, encoding) -> str:
    if encoding == "figure":
        return f"figures/{shot_id}/{view}_{frame:0{digits}d}.png"
    suffix = "_lin16.png" if encoding == "png16" else ".png"
    return f"frames/{shot_id}/{view}_{frame:0{digits}d}{suffix}"


def preview_name(shot_id, view, kind) -> str:
    return f"previews/{shot_id}_{view}.{'gif' if kind == 'gif' else 'png'}"


def video_name(shot_id, view, video, codec) -> str:
    ext = "mkv" if video == "lossless" and codec == "ffv1" else "mp4"
    return f"video/{shot_id}_{view}.{ext}"


def record_ok(out_dir, rec) -> bool:
    """True if the file of a manifest record exists with the recorded size and SHA-256."""
    p = os.path.join(out_dir, rec["path"])
    try:
        if os.path.getsize(p) != rec["bytes"]:
            return False
    except OSError:
        return False
    return sha256_file(p) == rec["sha256"]


def read_manifest(out_dir) -> dict:
    """shot index -> its latest manifest entry (torn or unreadable lines skipped)."""
    p = os.path.join(out_dir, MANIFEST)
    out = {}
    if not os.path.isfile(p):
        return out
    with open(p, encoding="utf-8") as fh:
        for line in fh:
            line = line.strip()
            if not line:
                continue
            try:
                entry = json.loads(line)
                k = int(entry["shot"])
                if entry.get("partial"):
                    _merge_partial(out, k, entry)
                else:
                    out[k] = entry
            except (ValueError, KeyError, TypeError, AttributeError):
                continue  # a line torn by a killed run
    return out


def _merge_partial(out, k, line):
    """Fold a per-frame line (written as soon as a frame is on disk) into shot ``k``."""
    prev = out.get(k)
    if prev is None:
        prev = out[k] = {"shot": k, "partial": True, "files": [], "metrics": {}}
    elif not prev.get("partial"):
        # A complete entry followed by re-rendered frames (a file had been damaged).
        m = prev.get("metrics") or []
        prev = out[k] = {**prev, "partial": True,
                         "metrics": {str(i): v for i, v in enumerate(m) if v is not None}}
    files = {r["path"]: r for r in prev["files"]}
    files.update({r["path"]: r for r in line.get("files", [])})
    prev["files"] = list(files.values())
    prev["metrics"].update({str(i): v for i, v in (line.get("metrics") or {}).items()
                            if v is not None})


def entry_metrics(entry) -> dict:
    """frame index -> metrics of a manifest entry (complete: a list; partial: a mapping)."""
    m = entry.get("metrics") or {}
    if isinstance(m, dict):
        return {int(i): v for i, v in m.items() if v is not None}
    return {i: v for i, v in enumerate(m) if v is not None}


def manifest_line(entry) -> str:
    return json.dumps(entry, sort_keys=True, separators=(",", ":")) + "\n"


def append_manifest(out_dir, entry):
    """Append one whole line (a single write, then fsync)."""
    p = os.path.join(out_dir, MANIFEST)
    data = manifest_line(entry).encode()
    fd = os.open(p, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o644)
    try:
        # A torn line from a killed run would glue onto ours: start on a fresh line.
        if os.fstat(fd).st_size:
            with open(p, "rb") as fh:
                fh.seek(-1, os.SEEK_END)
                if fh.read(1) != b"\n":
                    data = b"\n" + data
        os.write(fd, data)
        os.fsync(fd)
    finally:
        os.close(fd)


def compact_manifest(out_dir, entries: dict):
    """Rewrite the manifest atomically, one line per shot in shot order (if it differs)."""
    text = "".join(manifest_line(entries[k]) for k in sorted(entries))
    write_if_changed(os.path.join(out_dir, MANIFEST), text.encode())


def write_if_changed(path, data: bytes) -> bool:
    try:
        with open(path, "rb") as fh:
            if fh.read() == data:
                return False
    except OSError:
        pass
    atomic_write_bytes(path, data)
    return True


#: The study folder's hidden work area (resource files handed to workers).
WORK_DIR = ".magretina-work"


def is_own_temp(name) -> bool:
    """True for names of the project's own temporary files (atomic-write temps, work area)."""
    return name == WORK_DIR or (name.startswith(".") and name.endswith(".tmp"))


def work_dir(out_dir) -> str:
    return os.path.join(out_dir, WORK_DIR)


def remove_work_dir(out_dir):
    """Delete the work area and everything in it (stale files of a killed run included)."""
    shutil.rmtree(work_dir(out_dir), ignore_errors=True)


def remove_stale_temps(out_dir):
    """Delete hidden temporary files and the work area left by an interrupted run."""
    remove_work_dir(out_dir)
    for root, _dirs, files in os.walk(out_dir):
        for f in files:
            if f.startswith(".") and ".tmp" in f:
                try:
                    os.remove(os.path.join(root, f))
                except OSError:
                    pass


def claim_folder(out_dir, config_sha, force) -> dict:
    """Prepare ``out_dir`` for a study; returns the manifest entries to resume from.

    Same study (same resolved-configuration hash): resume.  Another study, or a
    non-empty folder that holds no study: refused unless ``force`` (then the other
    study's manifest is discarded and its listed files removed).
    """
    try:
        os.makedirs(out_dir, exist_ok=True)
    except OSError as exc:
        raise MagretinaError(f"--out {out_dir}: cannot create the folder "
                             f"({exc.strerror or exc})") from None
    verdict = folder_verdict(out_dir, config_sha, force)
    if verdict == "resume":
        remove_stale_temps(out_dir)
        return read_manifest(out_dir)
    if verdict == "replace":
        for entry in read_manifest(out_dir).values():
            for rec in entry.get("files", []):
                p = os.path.join(out_dir, rec["path"])
                if os.path.isfile(p):
                    os.remove(p)
        for name in (MANIFEST, STUDY_JSON):
            p = os.path.join(out_dir, name)
            if os.path.exists(p):
                os.remove(p)
    remove_stale_temps(out_dir)
    return {}


def folder_verdict(out_dir, config_sha, force) -> str:
    """What :func:`claim_folder` would do with ``out_dir``, changing nothing.

    Returns ``"resume"`` (the same study), ``"replace"`` (another study, ``force``)
    or ``"fresh"`` (absent, empty, or only our own temporary files); raises
    MagretinaError where the run would refuse, so a dry run refuses too.
    """
    if not os.path.isdir(out_dir):
        # The nearest existing ancestor must be a folder we may write in.
        parent = os.path.abspath(out_dir)
        while not os.path.exists(parent):
            parent = os.path.dirname(parent)
        if not os.path.isdir(parent) or not os.access(parent, os.W_OK | os.X_OK):
            raise MagretinaError(f"--out {out_dir}: cannot create the folder ({parent} is not "
                                 f"a writable folder)")
        return "fresh"
    sj = os.path.join(out_dir, STUDY_JSON)
    # A folder holding only our own temporary files (a run killed while writing its
    # first file) is a fresh start.
    entries = [e for e in os.listdir(out_dir) if not is_own_temp(e)]
    if os.path.isfile(sj):
        try:
            with open(sj, encoding="utf-8") as fh:
                old = json.load(fh)
            old_sha = old.get("config_sha256")
        except (OSError, ValueError):
            old_sha = None
        if old_sha == config_sha:
            return "resume"
        if not force:
            raise MagretinaError(f"{out_dir} holds another study (study.json config_sha256 "
                                 f"{str(old_sha)[:12]}..., this one {config_sha[:12]}...); choose "
                                 f"another --out or pass --force to replace it")
        return "replace"
    if entries and not force:
        raise MagretinaError(f"{out_dir} is not empty and holds no study (no {STUDY_JSON}); "
                             f"choose another --out or pass --force")
    return "fresh"


def package_versions() -> dict:
    out = {"python": sys.version.split()[0]}
    for name in ("magretina", "numpy", "scipy", "numba", "ppigrf", "imageio", "imageio-ffmpeg",
                 "pillow", "xarray", "h5netcdf", "h5py", "dask", "distributed"):
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            pass
    out.setdefault("magretina", __version__)
    return out


def git_commit() -> str | None:
    """The commit of the source tree the package runs from, if it is a git checkout."""
    here = os.path.dirname(os.path.abspath(__file__))
    try:
        r = subprocess.run(["git", "-C", here, "rev-parse", "HEAD"], capture_output=True,
                           text=True, timeout=5)
    except (OSError, subprocess.SubprocessError):
        return None
    if r.returncode != 0:
        return None
    commit = r.stdout.strip()
    try:
        d = subprocess.run(["git", "-C", here, "status", "--porcelain", "--", "."],
                           capture_output=True, text=True, timeout=5)
        if d.returncode == 0 and d.stdout.strip():
            commit += "+modified"
    except (OSError, subprocess.SubprocessError):
        pass
    return commit


def input_files(study) -> dict:
    """SHA-256 of every file the study refers to (layout, response tables, scene, route)."""
    r = study.resolved
    paths = []
    if r["layout"].get("file"):
        paths.append(r["layout"]["file"])
    for resp in [r["response"], *r["responses"].values()]:
        if resp.get("csv"):
            paths.append(resp["csv"])
    if r["scene"].get("path"):
        paths.append(r["scene"]["path"])
    if r["sequence"].get("csv"):
        paths.append(r["sequence"]["csv"])
    if r.get("display", {}).get("table"):
        paths.append(r["display"]["table"])
    return {p: sha256_file(resolve_path(study.base_dir, p)) for p in paths}


def study_sidecar(plan, encodings) -> dict:
    st = plan.study
    return {
        "caution": CAUTION,
        "study_file": os.path.basename(st.path),
        "study_file_sha256": st.sha256,
        "config_sha256": st.config_sha256,
        "resolved_config": st.resolved,
        **({"command_line": st.given} if st.given else {}),
        "input_files_sha256": input_files(st),
        "package_versions": package_versions(),
        "git_commit": git_commit(),
        "field_models": plan.field_info,
        "master_seed": st.resolved["study"]["seed"],
        "seeds": {s.shot_id: s.seed for s in plan.shots},
        "seed_derivation": "numpy.random.SeedSequence(master_seed).spawn(n_shots)[i]"
                           ".generate_state(1, uint64)[0]",
        "axes": [{"name": a.name, "key": a.key, "values": list(a.values), "labels": list(a.labels),
                  "group": a.group} for a in plan.axes],
        "dimensions": [{"name": d[0], "size": d[1], "axes": list(d[2])} for d in plan.dims],
        "shots": [{"shot_id": s.shot_id, "index": s.index, "params": s.params,
                   "frames": len(s.frames)} for s in plan.shots],
        "encodings": encodings,
        "layout": "frames/<shot>/<view>_<frame>.png (8-bit sRGB), *_lin16.png (16-bit linear)",
    }


def write_sidecar(out_dir, sidecar):
    def conv(o):
        if isinstance(o, np.ndarray):
            return o.tolist()
        if isinstance(o, (np.floating, np.integer)):
            return o.item()
        return str(o)

    text = json.dumps(sidecar, indent=2, sort_keys=True, default=conv) + "\n"
    write_if_changed(os.path.join(out_dir, STUDY_JSON), text.encode())


__all__ = ["atomic_write_json", "atomic_write_text"]
