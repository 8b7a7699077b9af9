"""The ``[orientation]`` table of a study file: conditions, hypotheses, preferred heading.

Glue between a study's resolved configuration and :mod:`renderer.orientation` (the
table is checked by :mod:`.orientation_config`, which study validation calls):

* ``[orientation]``: ``preferred_heading_deg``, ``headings`` (grid size), ``kappa``
  (behavioural von Mises concentration, 0 = none), ``non_orienting`` (share),
  ``monte_carlo`` (simulated animals per condition, 0 = off), ``seed``, ``gain``
  (modulation gain of the counts; default ``[render] gain``);
* ``[orientation.receptors]``: the mosaic and count options of
  ``[metrics.options.prediction]`` (:data:`renderer.predict.OPTION_KEYS`);
* ``[[orientation.condition]]``: ``name`` and ``steps``, an array of coil actions
  exactly as in ``[timeline]`` but without ``t_s`` (``rotate``, ``invert``, ``scale``,
  ``zero``, ``ambient``, ``response``, ``rf-on``, ``rf-off``), applied in order to
  the ambient field with :data:`renderer.study.sequences.TIMELINE_ACTIONS`; a
  response switch (``response``/``rf-on``) applies to every hypothesis;
* ``[[orientation.hypothesis]]``: ``name``, ``response`` ("default" = ``[response]``
  or a ``[responses.NAME]``), optional ``alignment`` (as ``[layout] alignment``),
  ``description``;
* ``[orientation.power]``: ``test`` ("v" toward the predicted heading, or
  "rayleigh"), ``alpha``, ``target`` power, ``n_max``, ``n_sim``.

Every key is sweepable with ``[[sweep.axis]]`` (e.g.
``key = "orientation.receptors.flux_per_s"``, ``key = "field.inclination_deg"``):
:func:`predict_plan` predicts each shot.  Outputs are predictions of a hypothetical
model, never measurements.
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
import tempfile

import numpy as np

from ..errors import MagretinaError
from ..field import FieldVector
from ..mosaic import build_mosaic
from ..orientation.model import (CAUTION, Behaviour, Condition, Hypothesis, Predictor,
                                 sample_headings)
from ..orientation.plots import plot_conditions, plot_power
from ..orientation.power import animals_needed, animals_to_discriminate
from ..orientation.statistics import describe
from ..predict import options_to_models
from . import outputs
from .build import build_layout, build_response
from .expand import plan
from .orientation_config import CONDITION, HYPOTHESIS, ORIENTATION, POWER, check_orientation
from .sequences import TIMELINE_ACTIONS, CoilState

__all__ = ["check_orientation", "conditions_of", "hypotheses_of", "predict_config",
           "power_table", "predict_plan", "flat_rows", "csv_bytes", "json_bytes",
           "write_outputs", "study_outputs", "ORIENTATION", "CONDITION", "HYPOTHESIS", "POWER",
           "OUTPUT_JSON", "OUTPUT_CSV"]

OUTPUT_JSON = "orientation.json"
OUTPUT_CSV = "orientation.csv"


# ----------------------------------------------------------------------------- building
def conditions_of(ocfg, ambient_ned_T):
    """:class:`renderer.orientation.model.Condition` list from the resolved table."""
    out = []
    for c in ocfg["condition"]:
        st = CoilState()
        for s in c["steps"]:
            st = TIMELINE_ACTIONS[s["action"]](st, s)
        out.append(Condition(c["name"], st.apply(np.asarray(ambient_ned_T, float)),
                             st.response, st.label()))
    return out


def hypotheses_of(cfg, base_dir):
    """:class:`renderer.orientation.model.Hypothesis` list (layouts with their alignment)."""
    layout = build_layout(cfg["layout"], base_dir)
    responses = {"default": build_response(cfg["response"], base_dir)}
    products = {"default": cfg["response"].get("product", "singlet")}
    for name, r in cfg["responses"].items():
        responses[name] = build_response(r, base_dir)
        products[name] = r.get("product", "singlet")
    out = []
    for h in cfg["orientation"]["hypothesis"]:
        lay = layout
        if h.get("alignment") is not None:
            lay = layout.with_alignment(h["alignment"])
        key = h.get("response", "default")
        alts = {k: v for k, v in responses.items() if k != "default"}
        out.append(Hypothesis(h["name"], lay, responses[key], products[key], alts,
                              h.get("description", "")))
    return out


def predict_config(cfg, base_dir, ambient_ned_T, monte_carlo=None, power=True, seed=None):
    """Predict every hypothesis in every condition for one shot configuration.

    Returns
    -------
    (predictions, results) : predictions = dict hypothesis -> dict condition ->
        Prediction; results = JSON-ready dict (conditions, hypotheses, rows,
        power, caution).
    """
    o = cfg["orientation"]
    gain = o.get("gain")
    gain = float(cfg["render"]["gain"] if gain is None else gain)
    spec, counts = options_to_models(dict(o["receptors"]), gain)
    behaviour = Behaviour(o["preferred_heading_deg"], o["kappa"], o["non_orienting"],
                          cfg["pose"]["pitch_deg"], cfg["pose"]["roll_deg"])
    conds = conditions_of(o, ambient_ned_T)
    hyps = hypotheses_of(cfg, base_dir)
    ambient = FieldVector(np.asarray(ambient_ned_T, float), model="ambient")
    mc = o["monte_carlo"] if monte_carlo is None else int(monte_carlo)
    seed = o["seed"] if seed is None else int(seed)
    preds, rows = {}, []
    mosaics = {}
    for hi, h in enumerate(hyps):
        if h.layout not in mosaics:
            mosaics[h.layout] = build_mosaic(h.layout, spec)
        pr = Predictor(h, ambient, mosaics[h.layout], counts, behaviour, o["headings"])
        preds[h.name] = {}
        for ci, c in enumerate(conds):
            p = pr.predict(c)
            preds[h.name][c.name] = p
            row = {"hypothesis": h.name, "condition": c.name, "manipulation": c.label,
                   "mean_deg": p.stats["mean_deg"], "r": p.stats["r"],
                   "circular_sd_deg": p.stats["circular_sd_deg"],
                   "sensory_mean_deg": p.sensory["mean_deg"], "sensory_r": p.sensory["r"],
                   "sensory_circular_sd_deg": p.sensory["circular_sd_deg"]}
            if mc:
                rng = np.random.default_rng([seed, hi, ci])
                d = describe(pr.monte_carlo(c, mc, rng))
                row.update({"mc_n": mc, "mc_mean_deg": d["mean_deg"], "mc_r": d["r"],
                            "mc_circular_sd_deg": d["circular_sd_deg"]})
            rows.append(row)
    results = {"caution": CAUTION,
               "model": {"receptors": spec.describe(), "counts": counts.describe(),
                         "behaviour": {"preferred_heading_deg": behaviour.preferred_heading_deg,
                                       "kappa": behaviour.kappa,
                                       "non_orienting": behaviour.non_orienting},
                         "headings": o["headings"], "ambient_ned_T": list(map(float, ambient.ned_T))},
               "conditions": [{"name": c.name, "manipulation": c.label,
                               "b_ned_uT": [x * 1e6 for x in c.b_ned_T],
                               "response": c.response_key} for c in conds],
               "hypotheses": [{"name": h.name, "description": h.description} for h in hyps],
               "rows": rows}
    if power:
        results["power"] = power_table(preds, o["power"], seed)
    return preds, results


def power_table(preds, pcfg, seed=0) -> list:
    """Animals needed per hypothesis and condition (test of ``[orientation.power]``),
    and to tell the hypotheses apart (model comparison at fixed behaviour)."""
    out = []
    for h, byc in preds.items():
        for c, p in byc.items():
            exp = p.stats["mean_deg"]
            if pcfg["test"] == "v" and not math.isfinite(exp):
                out.append({"hypothesis": h, "condition": c, "test": "v", "n": None,
                            "note": "uniform prediction: no expected heading"})
                continue
            res = animals_needed(lambda n, rng, p=p: sample_headings(p, n, rng), pcfg["target"],
                                 pcfg["n_max"], test=pcfg["test"], alpha=pcfg["alpha"],
                                 n_sim=pcfg["n_sim"], seed=seed,
                                 expected_deg=exp if pcfg["test"] == "v" else None)
            out.append({"hypothesis": h, "condition": c, "test": pcfg["test"], "n": res["n"],
                        "target": pcfg["target"], "alpha": pcfg["alpha"], "curve": res["curve"]})
    if len(preds) >= 2:
        for h in preds:
            res = animals_to_discriminate(preds, h, pcfg["target"], pcfg["n_max"],
                                          n_sim=max(20, pcfg["n_sim"] // 4), seed=seed)
            out.append({"hypothesis": h, "condition": "all", "test": "model comparison",
                        "n": res["n"], "target": pcfg["target"], "curve": res["curve"]})
    return out


def predict_plan(study, monte_carlo=None, power=True, plan_=None):
    """Predictions for every shot of a study (sweeps included).

    ``plan_`` reuses an expanded :class:`renderer.study.expand.Plan` (else the study is
    expanded here).

    Returns
    -------
    (per_shot, document) : per_shot = list of (shot, predictions); document =
        JSON-ready dict with one entry per shot (``shot_id``, ``params``, results).
    """
    if not study.resolved.get("orientation"):
        raise MagretinaError(f"{study.path}: no [orientation] table (conditions, hypotheses, "
                             f"preferred heading); see the example study")
    p = plan_ if plan_ is not None else plan(study)
    per_shot, shots = [], []
    for shot in p.shots:
        amb = np.asarray(shot.frames.ambient_ned_T, float)[0]
        preds, res = predict_config(shot.config, study.base_dir, amb, monte_carlo, power,
                                    seed=None)
        per_shot.append((shot, preds))
        shots.append({"shot_id": shot.shot_id, "params": shot.params, **res})
    return per_shot, {"study": study.resolved["study"].get("name", ""), "shots": shots}


def flat_rows(document) -> list:
    """One row per shot, hypothesis and condition (for orientation.csv)."""
    rows = []
    for s in document["shots"]:
        for r in s["rows"]:
            rows.append({"shot_id": s["shot_id"],
                         **{f"param_{k}": v for k, v in s["params"].items()}, **r})
    return rows


def csv_bytes(document) -> bytes:
    rows = flat_rows(document)
    cols = []
    for r in rows:
        for k in r:
            if k not in cols:
                cols.append(k)
    buf = io.StringIO()
    w = csv.DictWriter(buf, cols, lineterminator="\n")
    w.writeheader()
    for r in rows:
        w.writerow({k: (f"{v:.10g}" if isinstance(v, float) else v) for k, v in r.items()})
    return buf.getvalue().encode()


def json_bytes(document) -> bytes:
    """Strict JSON (NaN and infinities written as null)."""
    return (json.dumps(_finite(document), indent=1, sort_keys=True, default=_jsonable,
                       allow_nan=False) + "\n").encode()


def _finite(x):
    if isinstance(x, dict):
        return {k: _finite(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_finite(v) for v in x]
    if isinstance(x, (float, np.floating)):
        return float(x) if math.isfinite(x) else None
    return x


def _jsonable(x):
    if isinstance(x, (np.floating, np.integer)):
        return x.item()
    if isinstance(x, np.ndarray):
        return x.tolist()
    return str(x)


def write_outputs(out_dir, per_shot, document) -> list:
    """Write orientation.json, orientation.csv and the plots (one compass figure and one
    power figure per shot) into ``out_dir``; unchanged bytes are not rewritten.
    Returns the paths."""
    os.makedirs(out_dir, exist_ok=True)
    paths = [os.path.join(out_dir, OUTPUT_JSON), os.path.join(out_dir, OUTPUT_CSV)]
    outputs.write_if_changed(paths[0], json_bytes(document))
    outputs.write_if_changed(paths[1], csv_bytes(document))
    for (shot, preds), s in zip(per_shot, document["shots"]):
        conds = [c["name"] for c in s["conditions"]]
        paths.append(_plot_if_changed(out_dir, f"orientation-{shot.shot_id}.png",
                                      lambda q: plot_conditions(q, conds, preds)))
        curves = _power_curves(s)
        if curves:
            paths.append(_plot_if_changed(
                out_dir, f"orientation-power-{shot.shot_id}.png",
                lambda q: plot_power(q, curves, target=s["power"][0].get("target"))))
    return paths


def _power_curves(shot_doc) -> dict:
    """Curves worth drawing: telling the hypotheses apart, plus each hypothesis' test
    in the first condition (all 3 × 6 curves would be unreadable)."""
    rows = [p for p in shot_doc.get("power", []) if p.get("curve")]
    first = shot_doc["conditions"][0]["name"] if shot_doc.get("conditions") else None
    keep = [p for p in rows if p["test"] == "model comparison" or p["condition"] == first]
    return {f"{p['hypothesis']}: {p['test']}" + ("" if p["condition"] == "all"
                                                 else f" ({p['condition']})"): p["curve"]
            for p in keep}


def _plot_if_changed(out_dir, name, draw):
    """Draw into a temporary file, then keep the old file if the bytes are the same."""
    with tempfile.TemporaryDirectory(prefix="magretina-orient-") as tmp:
        q = os.path.join(tmp, name)
        draw(q)
        with open(q, "rb") as fh:
            data = fh.read()
    path = os.path.join(out_dir, name)
    outputs.write_if_changed(path, data)
    return path


def study_outputs(plan, out_dir):
    """Runner hook: predictions of a study with ``[orientation]`` into its folder.

    The document records the study's configuration digest; a rerun of an unchanged
    study whose orientation files are all present leaves them as they are (the
    predictions are deterministic, so recomputing would give the same bytes).
    """
    digest = plan.study.config_sha256
    path = os.path.join(out_dir, OUTPUT_JSON)
    try:
        with open(path, encoding="utf-8") as fh:
            old = json.load(fh)
        if old.get("config_sha256") == digest and all(
                os.path.isfile(os.path.join(out_dir, f)) for f in old.get("files", [])):
            return [os.path.join(out_dir, f) for f in old["files"]]
    except (OSError, ValueError, AttributeError):
        pass
    per, doc = predict_plan(plan.study, plan_=plan)
    doc["config_sha256"] = digest
    names = [OUTPUT_JSON, OUTPUT_CSV]
    for (shot, _), s in zip(per, doc["shots"]):
        names.append(f"orientation-{shot.shot_id}.png")
        if _power_curves(s):
            names.append(f"orientation-power-{shot.shot_id}.png")
    doc["files"] = names
    return write_outputs(out_dir, per, doc)


__all__ = ["ORIENTATION", "check_orientation", "conditions_of", "hypotheses_of",
           "predict_config", "predict_plan", "power_table", "write_outputs", "study_outputs",
           "csv_bytes", "json_bytes", "flat_rows"]
