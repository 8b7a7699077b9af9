"""A fixed set of frames, tables and metrics whose bytes must not change by accident.

Each case returns arrays (or text); :func:`fingerprint` records integer arrays and bytes
exactly and floating-point values to within floating-point noise (see there for why).  The
records live in ``golden.json`` beside this file; a change that alters
outputs on purpose re-records them in the same commit (``python tests/golden/record.py``)
and says why in the commit message.  Sizes are small: the point is byte identity, not
coverage (the kernel-versus-twin tests give that).
"""

from __future__ import annotations

import csv
import hashlib
import json
import os
import re
import textwrap

import numpy as np

SITE = (40.0, 5.0)  # invented site at sea (no research station)
DATE = "2026-05-20"


#: Projections per large float array (see :func:`fingerprint`).
N_PROJ = 48
#: Float arrays up to this size are stored value by value.
SMALL = 256
#: Relative tolerances of the comparison (see :func:`matches`).
RTOL = {"float64": 1e-10, "float32": 1e-8}

_NUMBER = re.compile(r"[-+]?(?:\d+\.\d*|\.\d+|\d+)(?:[eE][-+]?\d+)?|nan|inf")


def _sha(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _float_print(a: np.ndarray) -> dict:
    finite = np.isfinite(a)
    v = np.where(finite, a, 0.0).astype(np.float64).ravel()
    rec = {"kind": "float", "dtype": a.dtype.str, "shape": list(a.shape),
           "mask": _sha(np.packbits(finite.ravel()).tobytes()), "norm": float(np.linalg.norm(v))}
    if v.size <= SMALL:
        rec["values"] = [float(x) for x in v]
    else:
        w = np.random.default_rng(20261202).standard_normal((N_PROJ, v.size))
        rec["proj"] = [float(x) for x in w @ v]
    return rec


def fingerprint(obj) -> dict:
    """What is recorded of one output.

    Integer arrays (PNG pixels) and bytes are hashed exactly (SHA-256 of dtype, shape and
    raw bytes).  Floating-point arrays are recorded as their NaN/inf mask (hashed exactly),
    their 2-norm and either every value (up to :data:`SMALL` values) or :data:`N_PROJ` fixed
    Gaussian projections; text is recorded as its skeleton with numbers replaced by ``#``
    (hashed exactly) plus its numbers as a float array.  Why not hash floats: the same
    kernel compiled in this process and loaded from numba's disk cache, or a BLAS call on
    another thread count, differ in the last bit of some float64 results (measured up to
    4.4e-16), and values that are zero by symmetry come out as noise of order 1e-17; a hash
    at any precision flips whenever such a value sits on a rounding boundary.
    """
    if isinstance(obj, bytes):
        return {"kind": "exact", "sha": _sha(obj)}
    if isinstance(obj, str):
        nums = [float(x) for x in _NUMBER.findall(obj)]
        return {"kind": "text", "skeleton": _sha(_NUMBER.sub("#", obj).encode()),
                "numbers": _float_print(np.asarray(nums, dtype=np.float64))}
    a = np.ascontiguousarray(obj)
    if a.dtype.kind == "f":
        return _float_print(a)
    return {"kind": "exact", "sha": _sha(f"{a.dtype.str}{a.shape}".encode() + a.tobytes())}


def matches(rec: dict, now: dict) -> str:
    """'' if ``now`` reproduces ``rec``, else what differs.

    Tolerances (rtol = 1e-10 for float64 arrays, 1e-8 for float32): stored values must
    satisfy |x - r| <= rtol (|r| + 1e-4 max|r|) (values that are zero by symmetry
    come out as noise of order 1e-17 of the largest); projections |p - r| <= rtol ||r||_2.
    Floating-point noise between builds is below 4.4e-16 per float64 value (measured) and
    one unit in the last place (6e-8 relative) for a rare float32 value, which moves a
    projection by orders of magnitude less than that; a real change of one float32 pixel
    by about 2e-6 of the array's typical value (a 16-bit PNG step is 1.5e-5), or of any
    stored value by 1e-9 relative, fails.
    """
    if rec.get("kind") != now.get("kind"):
        return f"kind {rec.get('kind')} -> {now.get('kind')}"
    if rec["kind"] == "exact":
        return "" if rec["sha"] == now["sha"] else "bytes differ"
    if rec["kind"] == "text":
        if rec["skeleton"] != now["skeleton"]:
            return "text differs outside its numbers"
        return matches(rec["numbers"], now["numbers"])
    for key in ("dtype", "shape", "mask"):
        if rec[key] != now[key]:
            return f"{key} differs"
    rtol = RTOL.get(np.dtype(rec["dtype"]).name, 1e-10)
    if "values" in rec:
        r, v = np.asarray(rec["values"]), np.asarray(now["values"])
        scale = float(np.max(np.abs(r))) if r.size else 0.0
        bad = np.abs(v - r) > rtol * (np.abs(r) + 1e-4 * scale) + 1e-300
        return "" if not bad.any() else f"{int(bad.sum())} of {r.size} values differ (max |diff| {np.max(np.abs(v - r)):.3g})"
    r, v = np.asarray(rec["proj"]), np.asarray(now["proj"])
    tol = rtol * rec["norm"]
    worst = float(np.max(np.abs(v - r)))
    return "" if worst <= tol else f"projections differ by {worst:.3g} (tolerance {tol:.3g})"


class XYResponse:
    """Made-up full response with x/y dependence (test only)."""

    axial = False

    def evaluate_dirs(self, d):
        d = np.asarray(d, float)
        return 0.5 + 0.2 * d[..., 0] ** 2 - 0.1 * d[..., 1] ** 2 + 0.1 * d[..., 0] * d[..., 2]

    def axial_average(self):
        from renderer.response import Legendre
        return Legendre([0.5 + 0.1 / 3, 0.0, -0.1 / 3])


def _common():
    from renderer.field import igrf
    from renderer.pose import Pose
    from renderer.response import Legendre
    return igrf(SITE[0], SITE[1], alt_km=0.0, date=DATE), Pose(30.0, 5.0, -3.0), Legendre([0.7, 0.0, 0.1])


def view_cases() -> dict:
    import renderer
    from renderer.eye import load_layout
    from renderer.scene import dusk
    from renderer.views import EyeDisc, HeadPanorama, PerspectiveScreen, RetinaView, WorldPanorama

    field, pose, resp = _common()
    out = {}
    scene = dusk(256)
    for lay_name in ("lateral", "frontal", "tawny-owl"):
        lay = load_layout(lay_name)
        views = {"world": WorldPanorama(128), "head": HeadPanorama(128), "disc": EyeDisc(size=96),
                 "persp": PerspectiveScreen(width=96, height=64, hfov_deg=80.0, yaw_deg=20.0),
                 "retina": RetinaView(size=96)}
        for vname, view in views.items():
            out[f"pattern/{lay_name}/{vname}"] = renderer.render_pattern(field, pose, lay, resp, view)
            out[f"render/{lay_name}/{vname}"] = renderer.render(field, pose, lay, resp, view,
                                                                scene=scene, gain=2.0)
    return out


def mode_cases() -> dict:
    import renderer
    from renderer.eye import Eye, Layout
    from renderer.eye.alignment import ChiefRay, Disorder, FullFrame, Normal, Ratio, Tilt
    from renderer.scene import dusk
    from renderer.views import HeadPanorama, WorldPanorama

    field, pose, leg = _common()
    modes = {"normal": Normal(), "chief-ray": ChiefRay(), "tilt": Tilt(tilt_deg=35.0),
             "disorder": Disorder(kappa=5.0), "ratio": Ratio(delta_deg=60.0, chi_deg=20.0),
             "full-meridian": FullFrame(in_plane="meridian", in_plane_deg=15.0),
             "full-fixed": FullFrame(in_plane="fixed", in_plane_deg=-30.0),
             "full-random": FullFrame(in_plane="random")}
    out = {}
    scene = dusk(256)
    for name, mode in modes.items():
        eyes = tuple(Eye(name=side, side=side, retina_radius_mm=6.0, nodal_offset_mm=1.7,
                         azimuth_deg=-55.0 if side == "left" else 55.0, elevation_deg=4.0,
                         torsion_deg=7.0, nasal_deg=75.0, temporal_deg=105.0, dorsal_deg=85.0,
                         ventral_deg=70.0, alignment=mode) for side in ("left", "right"))
        lay = Layout("golden", eyes)
        resp = XYResponse() if name.startswith("full") else leg
        out[f"mode/{name}/pattern"] = renderer.render_pattern(field, pose, lay, resp, WorldPanorama(96))
        out[f"mode/{name}/world"] = renderer.render(field, pose, lay, resp, WorldPanorama(96),
                                                    scene=scene, gain=2.0)
        out[f"mode/{name}/head"] = renderer.render(field, pose, lay, resp, HeadPanorama(96),
                                                   scene=scene, gain=2.0)
    return out


def spin_cases() -> dict:
    from renderer.response.spin_table import compute_spin_table
    from renderer.spin import load_pair, singlet_yield

    out = {}
    tab = compute_spin_table(load_pair("toy-axial-n"), 50e-6, lmax=4, use_cache=False)
    out["spin/toy-table/coeffs"] = tab.coeffs
    out["spin/toy-table/values"] = tab.values
    rng = np.random.default_rng(3)
    d = rng.normal(size=(5, 3))
    d /= np.linalg.norm(d, axis=1, keepdims=True)
    pair = load_pair("fad-trp-3n")
    out["spin/fad-trp-3n/yields"] = np.asarray(singlet_yield(pair, 50e-6 * d))
    return out


def predict_cases() -> dict:
    from renderer.eye import load_layout
    from renderer.predict.summary import predict_summary

    field, pose, resp = _common()
    metrics, fr = predict_summary(field, pose, load_layout("lateral"), resp,
                                  headings_deg=np.arange(0.0, 360.0, 30.0))
    text = json.dumps({k: repr(float(v)) for k, v in sorted(metrics.items())}, sort_keys=True)
    return {"predict/lateral/metrics": text,
            "predict/lateral/fisher": np.asarray(fr.J_eye)}


STUDY = """
[study]
name = "golden"
seed = 42

[site]
name = "Golden Shoal (invented)"
lat_deg = 40.0
lon_deg = 5.0

[field]
model = "igrf"
date = "2026-05-20"

[response]
kind = "legendre"
coeffs = [0.7, 0.0, 0.1]

[views.world]
kind = "world-panorama"
width = 64

[render]
gain = 2.0

[sequence]
kind = "heading-sweep"
start_deg = 0.0
stop_deg = 360.0
step_deg = 90.0

[output]
png8 = true
png16 = true

[[sweep.axis]]
key = "site.lat_deg"
values = [30.0, 60.0]
name = "latitude_deg"
"""


def study_cases(tmp_dir) -> dict:
    import imageio.v3 as iio

    from renderer.study.runner import run_study

    src = os.path.join(tmp_dir, "golden.toml")
    with open(src, "w", encoding="utf-8") as fh:
        fh.write(textwrap.dedent(STUDY))
    out_dir = os.path.join(tmp_dir, "out")
    run_study(src, out_dir, jobs=1, progress=False)
    out = {}
    for root, _dirs, files in os.walk(out_dir):
        for f in sorted(files):
            rel = os.path.relpath(os.path.join(root, f), out_dir).replace(os.sep, "/")
            if f.endswith(".png"):
                out[f"study/{rel}"] = iio.imread(os.path.join(root, f))
            elif f == "metrics.csv":
                with open(os.path.join(root, f), newline="", encoding="utf-8") as fh:
                    out[f"study/{rel}"] = fh.read()
    return out


def all_cases(tmp_dir) -> dict:
    cases = {}
    for fn in (view_cases, mode_cases, spin_cases, predict_cases):
        cases.update(fn())
    cases.update(study_cases(tmp_dir))
    return {k: fingerprint(v) for k, v in sorted(cases.items())}
