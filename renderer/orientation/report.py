"""The orientation part of a study's HTML report, from the files in the study folder.

Reads ``orientation.json`` (predictions, written by a study run or by ``magretina
orient predict --out``), ``orientation-analysis.json`` (observed headings, written by
``magretina orient analyse --out``) and the ``orientation-*.png`` figures beside them,
and returns an HTML fragment (tables plus PNG data URIs; no scripts, no network).
Returns "" when the folder has none of them.  It computes nothing.
"""

from __future__ import annotations

import base64
import html
import json
import math
import os

__all__ = ["html_section"]

PREDICTIONS = "orientation.json"
ANALYSIS = "orientation-analysis.json"


def _num(v, nd=4):
    if v is None:
        return "-"
    if isinstance(v, float):
        return "-" if math.isnan(v) else f"{v:.{nd}g}"
    return html.escape(str(v))


def _read(path):
    try:
        with open(path, encoding="utf-8") as fh:
            return json.load(fh)
    except (OSError, ValueError):
        return None


def _img(path, alt):
    with open(path, "rb") as fh:
        data = base64.b64encode(fh.read()).decode("ascii")
    return (f"<figure><img src='data:image/png;base64,{data}' alt='{html.escape(alt)}'>"
            f"<figcaption>{html.escape(alt)}</figcaption></figure>")


def html_section(study_dir, max_shots=20) -> str:
    """HTML of the orientation predictions and analysis found in ``study_dir`` ("" if none)."""
    d = os.fspath(study_dir)
    pred = _read(os.path.join(d, PREDICTIONS))
    ana = _read(os.path.join(d, ANALYSIS))
    if pred is None and ana is None:
        return ""
    esc = html.escape
    parts = ["<h2>Orientation experiment</h2>"]
    if pred:
        shots = pred.get("shots", [])
        caution = shots[0].get("caution", "") if shots else ""
        parts.append(f"<p class='caution'>{esc(caution)}</p>")
        for s in shots[:max_shots]:
            params = ", ".join(f"{k} = {v}" for k, v in (s.get("params") or {}).items())
            parts.append(f"<h3>Predicted headings, shot {esc(str(s.get('shot_id')))}"
                         + (f" ({esc(params)})" if params else "") + "</h3>")
            parts.append("<table><tr><th>hypothesis</th><th>condition</th><th>manipulation</th>"
                         "<th>mean °</th><th>r</th><th>circular SD °</th><th>MC mean °</th>"
                         "<th>MC r</th></tr>")
            for r in s.get("rows", []):
                parts.append("<tr>" + "".join(f"<td>{_num(r.get(k))}</td>" for k in (
                    "hypothesis", "condition", "manipulation", "mean_deg", "r",
                    "circular_sd_deg", "mc_mean_deg", "mc_r")) + "</tr>")
            parts.append("</table>")
            if s.get("power"):
                parts.append("<p>Animals needed (power by simulation of the test):</p><table>"
                             "<tr><th>hypothesis</th><th>condition</th><th>test</th>"
                             "<th>animals</th></tr>")
                for p in s["power"]:
                    n = p.get("n") if p.get("n") is not None else p.get("note", "not reached")
                    parts.append("<tr>" + "".join(f"<td>{_num(v)}</td>" for v in (
                        p.get("hypothesis"), p.get("condition"), p.get("test"), n)) + "</tr>")
                parts.append("</table>")
            for name, cap in ((f"orientation-{s.get('shot_id')}.png", "Predicted heading "
                               "distributions per condition (model prediction)"),
                              (f"orientation-power-{s.get('shot_id')}.png", "Power against "
                               "number of animals (simulation)")):
                q = os.path.join(d, name)
                if os.path.isfile(q):
                    parts.append("<div class='plots'>" + _img(q, cap) + "</div>")
    if ana:
        parts.append(f"<h3>Observed headings ({esc(os.path.basename(str(ana.get('file', ''))))})</h3>")
        parts.append("<table><tr><th>condition</th><th>n</th><th>animals</th><th>mean °</th>"
                     "<th>r</th><th>circular SD °</th><th>CI of mean °</th><th>Rayleigh z</th>"
                     "<th>p</th></tr>")
        for r in ana.get("conditions", []):
            ci = r.get("ci_mean_deg")
            parts.append("<tr>" + "".join(f"<td>{_num(r.get(k))}</td>" for k in (
                "condition", "n", "n_animals", "mean_deg", "r", "circular_sd_deg"))
                + f"<td>{esc(f'{ci[0]:.0f}..{ci[1]:.0f}') if ci else '-'}</td>"
                + f"<td>{_num(r.get('rayleigh_z'))}</td><td>{_num(r.get('rayleigh_p'))}</td></tr>")
        parts.append("</table>")
        cmp_ = ana.get("comparison")
        if cmp_:
            parts.append("<p>Model comparison:</p><table><tr><th>hypothesis</th><th>log L</th>"
                         "<th>k</th><th>AIC</th><th>ΔAIC</th><th>weight</th></tr>")
            for r in sorted(cmp_.get("rows", []), key=lambda r: r.get("aic") or 0):
                parts.append("<tr>" + "".join(f"<td>{_num(r.get(k))}</td>" for k in (
                    "hypothesis", "loglik", "k", "aic", "delta_aic", "weight")) + "</tr>")
            parts.append(f"</table><p><strong>{esc(str(cmp_.get('statement', '')))}</strong></p>")
        q = os.path.join(d, "orientation-observed.png")
        if os.path.isfile(q):
            parts.append("<div class='plots'>" + _img(q, "Observed headings with the "
                                                         "predicted distributions") + "</div>")
    return "".join(parts)
