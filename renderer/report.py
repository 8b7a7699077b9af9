"""A static HTML report of a finished study.

:func:`build_report` reads a study folder written by the study runner
(``study.json``, ``manifest.jsonl``, ``metrics.csv``, the frame files) and writes
one HTML file beside them: the caution, the study's parameters (sweep axes and the
resolved configuration), a contact sheet of thumbnails each linking to its full
image, plots of the metrics against every sweep axis (and against the frame index
within shots), and the metrics table.  Thumbnails and plots are embedded as PNG
data URIs and the page has no scripts, fonts or links outside the folder, so it
opens from disk with no server and no network.  Checking the page in a headless
browser is :mod:`renderer.browser`.  This module does not run studies.
"""

from __future__ import annotations

import base64
import csv
import html
import io
import json
import math
import os
import shutil
import tempfile

import numpy as np
from PIL import Image

from . import plots
from .defaults import DEFAULT_GAIN
from .errors import MagretinaError
from .field import fixed
from .io import atomic_write_text
from .mosaic import build_mosaic
from .orientation.report import html_section
from .pose import Pose
from .predict import fisher_information, options_to_models
from .study.build import build_layout, build_response
from .vocabulary import label, latlon_text, split

REPORT_NAME = "report.html"
CAUTION = ("The images and numbers in this report are predictions of a model under the stated "
           "assumptions (field, eye geometry, receptor alignment hypothesis, response function, "
           "gain, receptor mosaic and noise model). They are not measurements of any animal.")

#: Metrics drawn against the sweep axes first, if present (others follow up to the limit).
_PREFERRED = ("crb_mean_deg", "crb_at_yaw_deg", "asymmetry_rms", "asymmetry_dprime_mean")
_MAX_PLOTS = 12


# ---------------------------------------------------------------------------
# reading a study folder
# ---------------------------------------------------------------------------

def _read_json(path):
    try:
        with open(path, encoding="utf-8") as fh:
            return json.load(fh)
    except OSError as exc:
        raise MagretinaError(f"{path}: cannot read ({exc.strerror})") from None
    except ValueError as exc:
        raise MagretinaError(f"{path}: not valid JSON ({exc})") from None


def _read_manifest(path):
    out = {}
    if not os.path.isfile(path):
        return out
    with open(path, encoding="utf-8") as fh:
        for line in fh:
            line = line.strip()
            if not line:
                continue
            try:
                e = json.loads(line)
                out[int(e["shot"])] = e
            except (ValueError, KeyError, TypeError):
                continue  # torn line of an interrupted run
    return out


def _read_csv(path):
    if not os.path.isfile(path):
        return [], []
    with open(path, newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    if not rows:
        return [], []
    return rows[0], rows[1:]


def read_study(study_dir) -> dict:
    """The parts of a finished study folder the report uses.

    Raises MagretinaError if the folder is missing, holds no ``study.json`` or has no
    finished shot in ``manifest.jsonl``.
    """
    d = os.fspath(study_dir)
    if not os.path.isdir(d):
        raise MagretinaError(f"study folder {d}: no such folder")
    sj = os.path.join(d, "study.json")
    if not os.path.isfile(sj):
        raise MagretinaError(f"study folder {d}: no study.json (not a study output folder; run "
                             f"'magretina run STUDY.toml --out {d}' first)")
    sidecar = _read_json(sj)
    entries = _read_manifest(os.path.join(d, "manifest.jsonl"))
    if not entries:
        raise MagretinaError(f"study folder {d}: no finished shots (manifest.jsonl is missing or "
                             f"empty); run or resume the study first")
    header, rows = _read_csv(os.path.join(d, "metrics.csv"))
    return {"dir": d, "sidecar": sidecar, "entries": entries, "metrics_header": header,
            "metrics_rows": rows}


# ---------------------------------------------------------------------------
# building blocks
# ---------------------------------------------------------------------------

def _data_uri_png(data: bytes) -> str:
    return "data:image/png;base64," + base64.b64encode(data).decode("ascii")


def _thumbnail(path, px):
    with Image.open(path) as im:
        im = im.convert("RGB") if im.mode not in ("RGB", "L") else im
        im.thumbnail((px, px))
        buf = io.BytesIO()
        im.save(buf, format="PNG", optimize=True)
        return buf.getvalue(), im.size


def _frames(study, limit):
    out = []
    for idx in sorted(study["entries"]):
        e = study["entries"][idx]
        # previews and videos carry frame = None: sort them after the frames
        for rec in sorted(e.get("files", []),
                          key=lambda r: (str(r.get("view")), r.get("frame") is None,
                                         r.get("frame") or 0, r["path"])):
            p = rec.get("path", "")
            if rec.get("encoding", "png8") != "png8" or not p.endswith(".png"):
                continue
            if os.path.isfile(os.path.join(study["dir"], p)):
                out.append((e.get("shot_id", str(idx)), rec.get("view", ""), rec.get("frame"), p))
    return out[:limit], len(out)


def _float(v):
    try:
        return float(v)
    except (TypeError, ValueError):
        return math.nan


def _axis_labels(study):
    """[(name, key, [labels], numeric)] of the sweep axes with two or more values."""
    out = []
    for a in study["sidecar"].get("axes", []):
        labels = [str(x) for x in (a.get("labels") or a.get("values") or [])]
        if len(set(labels)) < 2:
            continue  # a constant is not an axis of the results
        vals = a.get("values") or []
        numeric = bool(vals) and all(isinstance(v, (int, float)) and not isinstance(v, bool)
                                     for v in vals)
        out.append((a.get("name"), a.get("key"), labels, numeric))
    return out


def _shot_conditions(study):
    """shot_id -> "name = label, ..." of the swept values of that shot (readable)."""
    varied = {n for n, _k, _l, _num in _axis_labels(study)}
    axes = [a for a in study["sidecar"].get("axes", []) if a.get("name") in varied]
    out = {}
    for sh in study["sidecar"].get("shots", []):
        parts = []
        for a in axes:
            v = sh.get("params", {}).get(a.get("name"))
            vals, labs = a.get("values") or [], a.get("labels") or []
            lab = next((str(labs[i]) for i, x in enumerate(vals) if x == v and i < len(labs)), str(v))
            parts.append(f"{label(a.get('name'), unit=False)} {lab}{_unit_of(a.get('name'))}")
        out[sh.get("shot_id")] = ", ".join(parts)
    return out


def _unit_of(name):
    u = split(name)[1]
    return "" if not u else ("°" if u == "°" else f" {u}")


def _metric_columns(study):
    header, rows = study["metrics_header"], study["metrics_rows"]
    axes = [a["name"] for a in study["sidecar"].get("axes", []) if a.get("name") in header]
    skip = {"shot_id", "frame", "t_s", "coil", "response", *axes}
    cols = {h: [r[i] if i < len(r) else "" for r in rows] for i, h in enumerate(header)}
    metrics = [h for h in header if h not in skip
               and np.isfinite([_float(v) for v in cols[h]]).any()
               and len({v for v in cols[h]}) > 1]
    metrics = [m for m in _PREFERRED if m in metrics] + [m for m in metrics if m not in _PREFERRED]
    return cols, metrics


def _sweep_plots(study, tmp, eyes=(), key_only=None, progress=None):
    """PNG bytes of metric-vs-axis plots: list of (caption, bytes).

    Only axes with two or more values; categorical axes drawn as points. ``key_only``
    True: the preferred metrics only (the key figures); False: the others; None: all.
    """
    header, rows = study["metrics_header"], study["metrics_rows"]
    if not header or not rows:
        return []
    cols, metrics = _metric_columns(study)
    if key_only is True:
        metrics = [m for m in metrics if m in _PREFERRED]
    elif key_only is False:
        metrics = [m for m in metrics if m not in _PREFERRED]
    metrics = metrics[:_MAX_PLOTS]
    out = []
    n = 0
    for name, _key, _labels, numeric in _axis_labels(study):
        if name not in cols:
            continue
        xs_raw = cols[name]
        labels = list(dict.fromkeys(xs_raw))
        xs = [_float(v) for v in labels] if numeric and all(np.isfinite(_float(v)) for v in labels) \
            else labels
        for m in metrics:
            y = np.array([_float(v) for v in cols[m]])
            vals = []
            for lab in labels:
                sel = y[[i for i, v in enumerate(xs_raw) if v == lab]]
                vals.append(float(np.nanmean(sel)) if np.isfinite(sel).any() else math.nan)
            path = os.path.join(tmp, f"sweep_{n}.png")
            n += 1
            plots.plot_metric_sweep(xs, {label(m, eyes): vals}, path, xlabel=label(name),
                                    ylabel=label(m, eyes), title=label(m, eyes, unit=False))
            with open(path, "rb") as fh:
                out.append((f"{label(m, eyes)} against {label(name)}; each point is the mean over "
                            f"the frames of the shots at that value.", fh.read()))
            if progress:
                progress()
    if key_only is True:
        return out
    # within-shot sequences: metric against heading for the first shot with > 1 frame
    frames = np.array([_float(v) for v in cols.get("frame", [])])
    if frames.size and np.nanmax(frames) > 0:
        sid = cols["shot_id"]
        first = next(s for s in sid if sum(1 for t in sid if t == s) > 1)
        sel = [i for i, s in enumerate(sid) if s == first]
        xkey = "yaw_deg" if "yaw_deg" in cols and len({cols["yaw_deg"][i] for i in sel}) > 1 \
            else "frame"
        x = [_float(cols[xkey][i]) for i in sel]
        cond = _shot_conditions(study).get(first, "")
        for m in [m for m in _metric_columns(study)[1] if m != xkey][:6]:
            y = [_float(cols[m][i]) for i in sel]
            if len({v for v in y}) < 2:
                continue
            path = os.path.join(tmp, f"seq_{n}.png")
            n += 1
            plots.plot_metric_sweep(x, {label(m, eyes): y}, path,
                                    xlabel=label(xkey) if xkey != "frame" else "frame",
                                    ylabel=label(m, eyes), title=label(m, eyes, unit=False))
            with open(path, "rb") as fh:
                out.append((f"{label(m, eyes)} against {label(xkey)} within one shot ({cond}).",
                            fh.read()))
            if progress:
                progress()
    return out


def _model_plots(study, tmp):
    """Response, pattern and heading-precision plots for the first frame of the first shot.

    Rebuilt from the resolved configuration with the study builder's public functions
    and the field and pose recorded in metrics.csv (basic provider).  Returns
    (list of (caption, bytes), note or "").
    """
    header, rows = study["metrics_header"], study["metrics_rows"]
    cfg = study["sidecar"].get("resolved_config")
    if not rows or not isinstance(cfg, dict):
        return [], "Model plots left out: no resolved configuration or metrics rows."
    row = dict(zip(header, rows[0]))
    try:
        layout = build_layout(cfg["layout"], study["dir"])
        response = build_response(cfg["response"], study["dir"])
        product = cfg["response"].get("product", "singlet")
        gain = float(cfg.get("render", {}).get("gain", DEFAULT_GAIN))
        field = fixed(float(row["field_total_ut"]), float(row["inclination_deg"]),
                      float(row["declination_deg"]))
        pose = Pose(float(row["yaw_deg"]), float(row["pitch_deg"]), float(row["roll_deg"]))
        out = []
        cond = _shot_conditions(study).get(row.get("shot_id"), "")
        where = (f"the first condition ({cond}; " if cond else "the first frame (") + (
            f"field {field.total_T * 1e6:.1f} µT, inclination {field.inclination_deg:.1f}°, "
            f"heading {pose.yaw_deg:g}°)")
        p = plots.plot_response(response, os.path.join(tmp, "response.png"), product)
        out.append((f"Receptor response ({product} signal) against the angle θ between receptor "
                    f"axis and field, for {where}.", open(p, "rb").read()))
        p = plots.plot_pattern(field, pose, layout, response, os.path.join(tmp, "pattern.png"),
                               width=360, product=product, gain=gain)
        out.append((f"Predicted modulation pattern in the head frame with θ contours, for "
                    f"{where}, gain {gain:g}.", open(p, "rb").read()))
        opts = cfg.get("metrics", {}).get("options", {}).get("prediction", {}) or {}
        spec, counts = options_to_models(opts, gain)
        fr = fisher_information(field, layout, response, build_mosaic(layout, spec), counts,
                                np.arange(0.0, 360.0, 5.0), pose.pitch_deg, pose.roll_deg, product)
        p = plots.plot_precision(fr, os.path.join(tmp, "precision.png"))
        out.append((f"Cramér–Rao bound on heading error against heading (0° at the top, "
                    f"clockwise) for {where}; {spec.density:g} receptors per "
                    f"{'deg²' if spec.unit == 'deg2' else 'mm²'}, {counts.flux_per_s:g} "
                    f"absorptions/s, {counts.integration_s * 1e3:g} ms integration.",
                    open(p, "rb").read()))
        return out, ""
    except (MagretinaError, KeyError, TypeError, ValueError, ImportError) as exc:
        return [], f"Model plots left out: {type(exc).__name__}: {exc}"


_CSS = """
body{font-family:sans-serif;margin:1.5em auto;max-width:1100px;color:#222;line-height:1.4}
.caution{border:2px solid #b60;background:#fff4e0;padding:.6em 1em;margin:1em 0}
table{border-collapse:collapse;font-size:12px}
td,th{border:1px solid #ccc;padding:2px 6px;text-align:right}
th{background:#eee;position:sticky;top:0}
td.l,th.l{text-align:left}
.sheet{display:flex;flex-wrap:wrap;gap:8px}
.sheet figure{margin:0;width:min-content;font-size:11px;text-align:center}
.sheet img{display:block;border:1px solid #999}
.plots figure{margin:1em 0}
.plots img{max-width:100%;border:1px solid #ddd}
figcaption{font-size:13px;color:#333}
pre{background:#f6f6f6;padding:.6em;overflow:auto;max-height:40em;font-size:12px}
.scroll{max-height:40em;overflow:auto}
"""


def _overview(study, esc):
    """HTML: what was varied, what was held fixed, how much was rendered."""
    sc = study["sidecar"]
    cfg = sc.get("resolved_config", {}) or {}
    shots = sc.get("shots", [])
    n_frames = sum(int(s.get("frames", 0)) for s in shots)
    seq = (cfg.get("sequence") or {}).get("kind", "single frame")
    parts = ["<h2>Overview</h2>"]
    desc = (cfg.get("study") or {}).get("description")
    if desc:
        parts.append(f"<p>{esc(str(desc))}</p>")
    parts.append(f"<p>{len(shots) or len(study['entries'])} condition(s) (shots), "
                 f"{len(study['entries'])} finished; {n_frames} frame(s) in all; each shot is a "
                 f"{esc(str(seq).replace('-', ' '))} sequence.</p>")
    varied = _axis_labels(study)
    if varied:
        parts.append("<p><strong>Varied:</strong></p><ul>")
        for name, key, labels, numeric in varied:
            parts.append(f"<li>{esc(label(name))}: {esc(', '.join(labels))} "
                         f"<small>(study key <code>{esc(str(key))}</code>"
                         f"{'' if numeric else ', categories'})</small></li>")
        parts.append("</ul>")
    else:
        parts.append("<p>No parameter was varied between shots.</p>")
    fixed_rows = []
    site, field = cfg.get("site") or {}, cfg.get("field") or {}
    keys = {k for _n, k, _l, _num in varied}
    if site.get("lat_deg") is not None and "site.lat_deg" not in keys:
        fixed_rows.append(("site", f"{site.get('name') or ''} "
                                   f"{latlon_text(site['lat_deg'], site.get('lon_deg', 0.0), 2)}"))
    if field:
        fixed_rows.append(("field model", f"{field.get('model')}"
                           + (f", {field.get('date')}" if field.get("date") else "")))
    lay = cfg.get("layout") or {}
    if lay:
        fixed_rows.append(("eye layout", str(lay.get("preset") or lay.get("file") or "custom")))
    resp = cfg.get("response") or {}
    if resp and not any(k.startswith("response") for k in keys):
        fixed_rows.append(("response", f"{resp.get('kind')}"
                           + (f", product {resp.get('product')}" if resp.get("product") else "")))
    if cfg.get("render"):
        fixed_rows.append(("modulation gain", f"{cfg['render'].get('gain')}"))
    if fixed_rows:
        parts.append("<p><strong>Held fixed:</strong></p><table>")
        for k, v in fixed_rows:
            parts.append(f"<tr><th class='l'>{esc(k)}</th><td class='l'>{esc(v.strip())}</td></tr>")
        parts.append("</table>")
    return parts


def _figures(plot_list, esc):
    out = ["<div class='plots'>"]
    for cap, data in plot_list:
        out.append(f"<figure><img src='{_data_uri_png(data)}' alt='{esc(cap)}'>"
                   f"<figcaption>{esc(cap)}</figcaption></figure>")
    out.append("</div>")
    return out


def build_report(study_dir, out=None, thumb_px=192, max_frames=400, max_rows=2000, force=True,
                 progress=None):
    """Write the HTML report of a finished study; returns its path.

    The page reads as a document: the caution once, an overview of what was varied and
    what was held fixed, the key figures (the preferred metrics against every axis
    that varies), the model plots of the first condition, the frames captioned with
    their condition values, further plots, the metrics table with labelled columns,
    and the provenance (files, seeds, versions, resolved configuration) last.

    Parameters
    ----------
    study_dir : path of the study folder
    out : output HTML path (default ``STUDY_DIR/report.html``); it should sit in the
        study folder or a sub-folder so that links to full images stay relative.
    thumb_px : largest thumbnail side, pixels
    max_frames : at most this many thumbnails (the page says when frames are left off)
    max_rows : at most this many rows of the metrics table
    force : overwrite an existing report
    progress : callable(stage: str, done: int, total: int) or None
        Called as the report is built (thumbnails, then plots), for a progress bar.
    """
    study = read_study(study_dir)
    d = study["dir"]
    out = os.path.join(d, REPORT_NAME) if out is None else os.fspath(out)
    if os.path.exists(out) and not force:
        raise MagretinaError(f"{out} already exists; pass --force to overwrite")
    if not (isinstance(thumb_px, int) and 16 <= thumb_px <= 1024):
        raise MagretinaError(f"thumbnail size = {thumb_px!r}: allowed integers 16..1024 pixels")
    say = progress or (lambda stage, done, total: None)
    out_dir = os.path.dirname(os.path.abspath(out))
    sc = study["sidecar"]
    cfg = sc.get("resolved_config", {}) or {}
    name = (cfg.get("study", {}) or {}).get("name") or os.path.basename(os.path.abspath(d))
    eyes = _eye_names(cfg, d)
    esc = html.escape
    parts = [f"<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
             f"<title>magretina study report: {esc(str(name))}</title><style>{_CSS}</style>"
             f"</head><body>",
             f"<h1>Study report: {esc(str(name))}</h1>",
             f"<p class='caution'><strong>Caution.</strong> {esc(CAUTION)}</p>"]
    parts += _overview(study, esc)
    # plots first (the key figures), then frames
    frames, total = _frames(study, max_frames)
    cols, metrics = _metric_columns(study) if study["metrics_header"] else ({}, [])
    n_plots = 3 + len(_axis_labels(study)) * min(len(metrics), _MAX_PLOTS) + 6
    done = [0]

    def tick():
        done[0] += 1
        say("plots", done[0], n_plots)

    tmp = tempfile.mkdtemp(prefix="magretina-report-")
    try:
        key = _sweep_plots(study, tmp, eyes, key_only=True, progress=tick)
        model_list, model_note = _model_plots(study, tmp)
        done[0] += 3
        say("plots", done[0], n_plots)
        further = _sweep_plots(study, tmp, eyes, key_only=False, progress=tick)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    parts.append("<h2>Key results</h2>")
    if key:
        parts += _figures(key, esc)
    else:
        parts.append("<p>No key metric (heading precision, ψ/ψ+180° asymmetry) varies across "
                     "the sweep axes" + ("" if _axis_labels(study) else "; nothing was varied")
                     + ".</p>")
    parts.append("<h2>Model of the first condition</h2>")
    if model_note:
        parts.append(f"<p>{esc(model_note)}</p>")
    parts += _figures(model_list, esc)
    # contact sheet, captioned with the condition values
    conds = _shot_conditions(study)
    yaw = _frame_yaws(d)
    parts.append(f"<h2>Frames</h2><p>{total} frame file(s)"
                 + (f"; the first {len(frames)} are shown" if total > len(frames) else "")
                 + ". Each caption gives the condition; click a thumbnail for the full image.</p>"
                 "<div class='sheet'>")
    for i, (shot_id, view, frame, rel) in enumerate(frames):
        data, (w, h) = _thumbnail(os.path.join(d, rel), thumb_px)
        href = os.path.relpath(os.path.join(d, rel), out_dir).replace(os.sep, "/")
        bits = [conds.get(shot_id, "")]
        if rel in yaw:
            bits.append(f"heading {yaw[rel]:g}°")
        if len({f[1] for f in frames}) > 1:
            bits.append(f"view {view}")
        cap = "; ".join(b for b in bits if b) or f"frame {frame}"
        parts.append(f"<figure><a href='{esc(href)}'><img src='{_data_uri_png(data)}' width='{w}' "
                     f"height='{h}' alt='{esc(cap)}' title='{esc(shot_id)} {esc(str(view))} frame "
                     f"{esc(str(frame))}'></a><figcaption>{esc(cap)}</figcaption></figure>")
        say("thumbnails", i + 1, len(frames))
    parts.append("</div>")
    parts.append(html_section(d))
    if further:
        parts.append("<h2>Further plots</h2>")
        parts += _figures(further, esc)
    # metrics table
    header, rows = study["metrics_header"], study["metrics_rows"]
    parts.append("<h2>Metrics</h2>")
    if not header:
        parts.append("<p>No metrics.csv in the study folder.</p>")
    else:
        parts.append(f"<p>{len(rows)} row(s)" + (f"; the first {max_rows} are shown" if len(rows) > max_rows
                                                else "") + " from metrics.csv; column names and "
                     "units: docs/data-dictionary.md.</p>")
        parts.append("<div class='scroll'><table><tr>"
                     + "".join(f"<th title='{esc(h)}'>{esc(label(h, eyes))}</th>" for h in header)
                     + "</tr>")
        for r in rows[:max_rows]:
            parts.append("<tr>" + "".join(f"<td>{esc(_fmt(v))}</td>" for v in r) + "</tr>")
        parts.append("</table></div>")
    # provenance last
    n_shots = len(sc.get("shots", [])) or len(study["entries"])
    parts.append("<h2>Provenance</h2><table>")
    for k, v in (("finished shots", f"{len(study['entries'])} of {n_shots}"),
                 ("study file", sc.get("study_file")), ("study file SHA-256", sc.get("study_file_sha256")),
                 ("master seed", sc.get("master_seed")), ("git commit", sc.get("git_commit")),
                 ("package versions", ", ".join(f"{k2} {v2}" for k2, v2 in
                                                sorted((sc.get("package_versions") or {}).items())))):
        if v is not None:
            parts.append(f"<tr><th class='l'>{esc(k)}</th><td class='l'>{esc(str(v))}</td></tr>")
    parts.append("</table>")
    if sc.get("axes"):
        parts.append("<h3>Sweep axes</h3><table><tr><th class='l'>name</th><th class='l'>key</th>"
                     "<th class='l'>values</th></tr>")
        for a in sc["axes"]:
            parts.append(f"<tr><td class='l'>{esc(str(a.get('name')))}</td><td class='l'>"
                         f"{esc(str(a.get('key')))}</td><td class='l'>"
                         f"{esc(', '.join(map(str, a.get('labels') or a.get('values', []))))}</td></tr>")
        parts.append("</table>")
    parts.append("<details><summary>Resolved configuration (JSON)</summary><pre>"
                 + esc(json.dumps(sc.get("resolved_config", sc), indent=2, sort_keys=True,
                                  default=str)) + "</pre></details>")
    parts.append("<p><small>Written by magretina from the files in this folder; no network "
                 "resources are used.</small></p></body></html>\n")
    return atomic_write_text(out, "".join(parts))


def _eye_names(cfg, base_dir):
    try:
        return tuple(e.name for e in build_layout(cfg["layout"], base_dir).eyes)
    except Exception:  # the report still works without eye names (raw suffixes shown)
        return ()


def _frame_yaws(study_dir):
    """Frame file (relative path) -> head yaw from conditions.csv, if present."""
    header, rows = _read_csv(os.path.join(study_dir, "conditions.csv"))
    if "file" not in header or "yaw_deg" not in header:
        return {}
    i, j = header.index("file"), header.index("yaw_deg")
    return {r[i]: _float(r[j]) for r in rows if len(r) > max(i, j) and np.isfinite(_float(r[j]))}


def _fmt(v):
    f = _float(v)
    if not np.isfinite(f) or str(v).strip() == "" or not any(c.isdigit() for c in str(v)):
        return str(v)
    if float(f).is_integer() and "." not in str(v) and "e" not in str(v).lower():
        return str(v)
    return f"{f:.6g}"


__all__ = ["build_report", "read_study", "REPORT_NAME", "CAUTION"]
