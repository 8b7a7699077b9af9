"""Checking the ``[orientation]`` table of a study file (see :mod:`.orientation`).

The key schemas and :func:`check_orientation`, which :func:`.config.validate` calls
when the table is present; predictions from the checked table are in
:mod:`.orientation`.  This module builds nothing and predicts nothing.
"""

from __future__ import annotations

from ..errors import MagretinaError
from ..eye.alignment import parse_alignment
from ..predict import OPTION_KEYS
from .schema import REQUIRED, Key, check_even, check_named_tables, check_names_in, check_table
from .sequences import STEP_KEYS, TIMELINE_ACTIONS

ORIENTATION = {
    "preferred_heading_deg": Key(float, 0.0, lo=-360.0, hi=360.0, unit="degrees"),
    "headings": Key(int, 360, lo=36, hi=7200, unit="grid headings (even)"),
    "kappa": Key(float, 0.0, lo=0.0, hi=1e6),
    "non_orienting": Key(float, 0.0, lo=0.0, hi=1.0, hi_open=True, unit="share"),
    "monte_carlo": Key(int, 0, lo=0, hi=1_000_000, unit="simulated animals per condition"),
    "seed": Key(int, 0, lo=0),
    "gain": Key(float, None, lo=0.0, hi=1e6),
}
CONDITION = {"name": Key(str, REQUIRED), "steps": Key(list, [])}
HYPOTHESIS = {"name": Key(str, REQUIRED), "response": Key(str, "default"),
              "alignment": Key((str, dict), None), "description": Key(str, "")}
POWER = {"test": Key(str, "v", choices=("v", "rayleigh")),
         "alpha": Key(float, 0.05, lo=0.0, hi=1.0, lo_open=True, hi_open=True),
         "target": Key(float, 0.8, lo=0.0, hi=1.0, lo_open=True, hi_open=True),
         "n_max": Key(int, 100, lo=4, hi=10000, unit="animals"),
         "n_sim": Key(int, 200, lo=10, hi=100000, unit="simulated experiments")}


def check_orientation(tbl, response_names, problems) -> dict:
    """Validate ``[orientation]``; returns it resolved (problems appended with key paths)."""
    if not isinstance(tbl, dict):
        problems.append("orientation: must be a table")
        return {}
    out = check_table("orientation", tbl, ORIENTATION, problems,
                      extra_ok=("receptors", "condition", "hypothesis", "power"))
    check_even("orientation.headings", out.get("headings"), problems)
    out["receptors"] = check_names_in("orientation.receptors", out.get("receptors", {}),
                                      OPTION_KEYS, problems)
    rc = []
    for path, cc in check_named_tables("orientation.condition", out.get("condition", []),
                                       CONDITION, problems, hint="name, steps"):
        steps = []
        for j, s in enumerate(cc.get("steps", []) or []):
            sp = f"{path}.steps[{j}]"
            if not isinstance(s, dict) or s.get("action") not in TIMELINE_ACTIONS:
                problems.append(f"{sp}.action = {s.get('action') if isinstance(s, dict) else s!r}: "
                                f"allowed {', '.join(map(repr, TIMELINE_ACTIONS))}")
                continue
            ss = check_table(sp, s, {"action": Key(str, REQUIRED), **STEP_KEYS[s["action"]]},
                             problems)
            sel = ss.get("select")
            if sel is not None and sel != "default" and sel not in response_names:
                problems.append(f"{sp}.select = {sel!r}: allowed 'default'"
                                + "".join(f", {n!r}" for n in sorted(response_names)))
            steps.append(ss)
        cc["steps"] = steps
        rc.append(cc)
    out["condition"] = rc
    rh = []
    for path, x in check_named_tables("orientation.hypothesis", out.get("hypothesis", []),
                                      HYPOTHESIS, problems, hint="name, response"):
        r = x.get("response")
        if r is not None and r != "default" and r not in response_names:
            problems.append(f"{path}.response = {r!r}: allowed 'default'"
                            + "".join(f", {n!r}" for n in sorted(response_names))
                            + " (define alternatives as [responses.NAME])")
        if x.get("alignment") is not None:
            try:
                parse_alignment(x["alignment"])
            except MagretinaError as exc:
                problems.append(f"{path}.alignment: {exc}")
        rh.append(x)
    out["hypothesis"] = rh
    out["power"] = check_table("orientation.power", out.get("power", {}), POWER, problems)
    return out
