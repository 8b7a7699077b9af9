"""What made an image: the parameter record written into PNG files and sidecars.

:func:`frame_params` gathers, for one rendered frame, the site and date, the field
model and vector, the pose, the layout with each eye's alignment hypothesis, the
response, the view, the gain, the display model and the quantiser with its seed,
as plain JSON-able values; :func:`params_digest` is the SHA-256 of its canonical
JSON (the "config hash" of a single render; a study frame records the study's own
resolved-configuration hash instead).  Used by ``render``, the study runner and the
demo so every file describes itself the same way.  Nothing here renders or writes.
"""

from __future__ import annotations

import hashlib
import json

CAUTION = ("Model prediction under the stated hypothesis (receptor response, alignment, "
           "gain); not a measurement of what an animal perceives.")


def frame_params(field, pose, layout, response, view, gain, product="singlet", display=None,
                 dither="none", dither_seed=None, temporal=None, config_sha256=None,
                 **extra) -> dict:
    """A flat-ish dict describing one frame (see the module docstring).

    Parameters
    ----------
    field : renderer.field.FieldVector (``as_dict()``: NED components in µT, model, date,
        site)
    pose : renderer.pose.Pose (degrees)
    layout : renderer.eye.Layout (name; each eye's alignment ``describe()``)
    response : an axial or full response with ``describe()``
    view : a view with ``describe()``
    gain, product : modulation gain and receptor product
    display : renderer.display.Display or None (``describe()``)
    dither, dither_seed, temporal : quantiser name, seed and whether it changes per frame
    config_sha256 : a hash identifying the configuration (None: computed from the rest)
    extra : further JSON-able items (e.g. frame index, time)
    """
    f = field.as_dict() if hasattr(field, "as_dict") else dict(field)
    out = {
        "site": f.get("site"), "date": f.get("date"), "field_model": f.get("model"),
        "field_ned_ut": [f.get("field_north_ut"), f.get("field_east_ut"), f.get("field_down_ut")],
        "pose_deg": {"yaw": pose.yaw_deg, "pitch": pose.pitch_deg, "roll": pose.roll_deg},
        "layout": layout.name,
        "alignment": {e.name: _describe(e.alignment) for e in layout.eyes},
        "response": _describe(response), "product": product,
        "view": _describe(view), "gain": float(gain),
        "display": display.describe() if display is not None else None,
        "dither": {"method": dither, "seed": dither_seed, "temporal": temporal},
    }
    out.update(extra)
    out["config_sha256"] = config_sha256 or params_digest(out)
    return out


def _describe(obj):
    d = getattr(obj, "describe", None)
    return d() if callable(d) else str(obj)


def params_digest(params) -> str:
    text = json.dumps({k: v for k, v in params.items() if k != "config_sha256"}, sort_keys=True,
                      separators=(",", ":"), default=str)
    return hashlib.sha256(text.encode()).hexdigest()
