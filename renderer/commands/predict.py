"""``magretina predict``: heading information, precision and contrast for one configuration.

Takes the same field, pose and model flags as ``render`` plus a receptor mosaic, a
count model and a noise model; prints a table (or ``--json``) of the metrics of
:func:`renderer.predict.summary.predict_summary` and optionally writes the plots.
Every output states that the numbers are model predictions under the stated
assumptions, not measurements.
"""

from __future__ import annotations

import json
import math
import os
import sys

from ..errors import MagretinaError, check_range
from . import _common


def add_prediction_args(p):
    g = p.add_argument_group("receptor mosaic")
    g.add_argument("--density", type=float, default=0.05,
                   help="receptor density (per deg² of visual field, or per mm² of retina with "
                        "--density-unit mm2); default 0.05 per deg²")
    g.add_argument("--density-unit", default="deg2", help="deg2 | mm2")
    g.add_argument("--mosaic", default="jittered", help="jittered | poisson-disc")
    g.add_argument("--mosaic-seed", type=int, default=0, help="seed of the receptor placement")
    g.add_argument("--eccentricity", default="",
                   help="relative density profile ECC:REL,... (degrees from the optic axis : "
                        "fraction of the peak density), e.g. 0:1,40:0.5,90:0.2")
    g.add_argument("--pool-deg", type=float, default=0.0,
                   help="pool receptors over this angular radius before readout (degrees; 0 = no)")
    g = p.add_argument_group("counts and noise")
    g.add_argument("--flux", type=float, default=1.0e4,
                   help="photon absorptions per second per receptor at linear luminance 1 (s^-1)")
    g.add_argument("--integration-ms", type=float, default=100.0, help="integration time, ms")
    g.add_argument("--luminance", type=float, default=1.0,
                   help="linear scene luminance seen by the receptors (1 = the flux reference)")
    g.add_argument("--noise", default="poisson", help="poisson | gaussian")
    g.add_argument("--noise-floor", type=float, default=1.0,
                   help="gaussian noise: additive floor, counts rms (shot noise added)")
    g.add_argument("--heading-step-deg", type=float, default=2.0, aliases=["--heading-step"],
                   help="heading grid step for the Cramér–Rao curve, degrees")
    g.add_argument("--threshold", type=float, default=0.01,
                   help="contrast threshold (Weber fraction); default 0.01, a rule of thumb for "
                        "large stimuli in humans (common practice, no source)")


def spec_from_args(a):
    # deferred: library modules load when the command runs, so start-up stays light
    from ..mosaic import MosaicSpec

    ecc, rel = [], []
    if a.eccentricity:
        for item in str(a.eccentricity).split(","):
            try:
                e, r = item.split(":")
                ecc.append(float(e))
                rel.append(float(r))
            except ValueError:
                raise MagretinaError(f"--eccentricity {a.eccentricity!r}: expected ECC:REL pairs "
                                     f"separated by commas, e.g. 0:1,40:0.5") from None
    return MosaicSpec(density=a.density, unit=a.density_unit, method=a.mosaic, seed=a.mosaic_seed,
                      eccentricity_deg=tuple(ecc), relative_density=tuple(rel),
                      pool_radius_deg=a.pool_deg)


def counts_from_args(a):
    # deferred: library modules load when the command runs, so start-up stays light
    from ..predict import CountModel, make_noise

    from ..budget import check_finite

    t = check_finite("--integration-ms", a.integration_ms, unit="ms")
    flux = check_finite("--flux", a.flux, unit="s^-1")
    lum = check_finite("--luminance", a.luminance, lo_open=False)
    check_finite("--noise-floor", a.noise_floor, lo_open=False, unit="counts rms")
    check_finite("--gain", a.gain, lo_open=False)
    noise = make_noise(a.noise) if a.noise != "gaussian" else make_noise("gaussian",
                                                                         floor_counts=a.noise_floor)
    return CountModel(flux_per_s=flux, integration_s=t * 1e-3, gain=a.gain, luminance=lum,
                      noise=noise)


def check_predict(a, n_headings):
    """Refuse before allocating: headings x receptors tables and the --noisy panorama."""
    # deferred: library modules load when the command runs, so start-up stays light
    from .. import budget

    est = budget.Estimate("predict")
    if a.density_unit == "deg2":
        # 41253 square degrees on the sphere; the Fisher sums hold a few float64
        # (headings x receptors) arrays at once.
        n_rec = max(1.0, float(a.density) * 41253.0)
        if not math.isfinite(n_rec):
            raise MagretinaError(f"--density = {a.density!r}: gives more receptors than can be "
                                 f"counted; must be a finite density per deg²")
        est.add("heading tables", 4 * 8 * n_rec * n_headings)
    if a.noisy:
        if a.width < 8 or a.width % 2:
            raise MagretinaError(f"--width {a.width}: must be an even number >= 8")
        est.add_image("noisy panorama", a.width // 2, a.width, budget.VIEW_BYTES_PER_PIXEL)
        if a.scene:
            from ..inputs import image_size

            sw, sh = image_size(a.scene, "scene")
        else:
            sw = max(a.width, 1024)
            sh = sw // 2
        est.add_image("scene", sh, sw, budget.SCENE_BYTES_PER_PIXEL)
    return est.check(a.max_memory_gb)


#: Metrics given per eye (``<stem>_<eye>``), printed as one column per eye.
EYE_STEMS = ("crb_mean_deg", "michelson", "rms", "peak_to_peak", "weber_max", "visible")


def _num(v) -> str:
    if isinstance(v, float):
        if v == v and abs(v) < 1e15 and v.is_integer():
            return f"{int(v)}"
        return f"{v:.4g}"
    return str(v)


def kv_text(d) -> str:
    """``{'kind': 'legendre', 'coeffs': [0.7, 0, 0.1]}`` as ``kind legendre, coeffs 0.7/0/0.1``."""
    if not isinstance(d, dict):
        return str(d)
    parts = []
    for k, v in d.items():
        if isinstance(v, (list, tuple)):
            v = "/".join(_num(float(x)) if isinstance(x, (int, float)) else str(x) for x in v) \
                or "none"
        elif isinstance(v, dict):
            v = "(" + kv_text(v) + ")"
        elif isinstance(v, float):
            v = _num(v)
        parts.append(f"{str(k).replace('_', ' ')} {v}")
    return ", ".join(parts)


def mosaic_text(d) -> str:
    unit = {"deg2": "per deg² of visual field", "mm2": "per mm² of retina"}.get(d.get("unit"),
                                                                               d.get("unit"))
    pool = d.get("pool_radius_deg") or 0
    ecc = d.get("eccentricity_deg") or []
    return (f"{_num(float(d.get('density')))} receptors {unit}, {d.get('method')} placement "
            f"(seed {d.get('seed')}), " + ("uniform density" if not ecc else
                                           f"density profile over {len(ecc)} eccentricities")
            + (f", pooled over {_num(float(pool))}°" if pool else ", no pooling"))


def counts_text(d) -> str:
    noise = d.get("noise")
    noise = f"{kv_text(noise) if isinstance(noise, dict) else noise} noise"
    if d.get("floor_counts") is not None:
        noise = (f"{noise} (floor {_num(float(d['floor_counts']))} counts rms"
                 + (", with shot noise)" if d.get("shot") else ")"))
    return (f"{_num(float(d.get('flux_per_s')))} absorptions/s per receptor at luminance 1, "
            f"integration {_num(float(d.get('integration_s')) * 1e3)} ms, gain "
            f"{_num(float(d.get('gain')))}, scene luminance {_num(float(d.get('luminance')))}, "
            f"{noise}")


def format_assumptions(field, pose, layout, response, product, spec, counts) -> str:
    """The configuration a prediction used, one labelled line each (field first)."""
    # deferred: library modules load when the command runs, so start-up stays light
    from ..vocabulary import latlon_text

    d = field.as_dict() if hasattr(field, "as_dict") else {}
    site = d.get("site") or {}
    where = (f"{d.get('model')} at {latlon_text(site['lat_deg'], site['lon_deg'], 2)}, "
             f"{d.get('date')}" if site.get("lat_deg") is not None else f"{d.get('model', 'fixed')}")
    lines = [
        f"  field        {where}: total {d.get('field_total_ut', float('nan')):.3f} µT, "
        f"inclination {d.get('inclination_deg', float('nan')):.2f}°, "
        f"declination {d.get('declination_deg', float('nan')):.2f}°",
        f"  head pose    heading {pose.yaw_deg:g}° (clockwise from north), "
        f"pitch {pose.pitch_deg:g}°, roll {pose.roll_deg:g}°",
        f"  layout       {layout.name} ({len(layout.eyes)} eye(s): "
        f"{', '.join(e.name for e in layout.eyes)}); {product} product drives vision",
        f"  response     {kv_text(response.describe())}",
        f"  mosaic       {mosaic_text(spec.describe())}",
        f"  counts       {counts_text(counts.describe())}",
    ]
    return "assumptions\n" + "\n".join(lines)


def format_metrics(metrics, eye_names) -> str:
    """A two-part table: whole-layout metrics, then one column per eye, with units."""
    # deferred: library modules load when the command runs, so start-up stays light
    from ..vocabulary import split

    eyes = sorted(eye_names, key=len, reverse=True)
    per_eye, whole = {}, {}
    for k, v in metrics.items():
        stem = next((k[:-len(e) - 1] for e in eyes if k.endswith("_" + e)
                     and k[:-len(e) - 1] in EYE_STEMS), None)
        if stem is not None:
            per_eye.setdefault(stem, {})[k[len(stem) + 1:]] = v
        else:
            whole[k] = v
    rows = [(split(k)[0], _num(v), split(k)[1]) for k, v in whole.items()]
    w = max(len(r[0]) for r in rows)
    vw = max(len(r[1]) for r in rows)
    out = ["prediction (whole layout)"]
    out += [f"  {lab:<{w}}  {val:>{vw}} {unit}".rstrip() for lab, val, unit in rows]
    if per_eye:
        names = list(eye_names)
        cw = max(8, *(len(n) for n in names))
        lw = max(len(split(s)[0]) for s in per_eye)
        out.append("")
        out.append("per eye" + " " * (lw - 5) + "".join(f"  {n:>{cw}}" for n in names))
        for stem, vals in per_eye.items():
            lab, unit, _ = split(stem)
            cells = "".join(f"  {_num(vals.get(n, float('nan'))):>{cw}}" for n in names)
            out.append(f"  {lab:<{lw}}{cells} {unit}".rstrip())
    return "\n".join(out)


def register(sub):
    p = sub.add_parser("predict", help="heading information and contrast for one configuration",
                       description="Fisher information about heading, Cramér–Rao bound, "
                                   "inclination-compass signature and contrast. These are model "
                                   "predictions under stated assumptions, not measurements.")
    _common.add_field_args(p)
    _common.add_pose_args(p)
    _common.add_model_args(p)
    add_prediction_args(p)
    g = p.add_argument_group("quantum limit")
    g.add_argument("--quantum-pair", metavar="DEF_OR_PRESET", default=None,
                   help="also report the quantum bound on field-direction precision of this "
                        "radical pair (equal rates) beside the receptor-array bound")
    g.add_argument("--quantum-order", type=int, default=17,
                   help="Lebedev order of the direction grid of the quantum bound")
    g = p.add_argument_group("output")
    g.add_argument("--json", action="store_true", help="print JSON instead of a table")
    g.add_argument("--plots", metavar="DIR", help="also write the plots (PNG) into DIR")
    g.add_argument("--noisy", metavar="PNG",
                   help="also write one noisy receptor-level realisation of the composited "
                        "world panorama (8-bit sRGB) here")
    g.add_argument("--noisy-seed", type=int, default=0, help="seed of the noisy realisation")
    g.add_argument("--width", type=int, default=1024, help="width of the --noisy panorama, pixels")
    g.add_argument("--scene", default=None, help="2:1 scene for --noisy (default: procedural dusk)")
    g.add_argument("--north-col", type=float, default=None, help="column of north in --scene")
    g.add_argument("--force", action="store_true", help="overwrite existing output files")
    _common.add_budget_args(p)
    p.set_defaults(func=run)


def run(a) -> int:
    # deferred: library modules load when the command runs, so start-up stays light
    import numpy as np

    from ..pose import Pose
    from ..predict import CAUTION
    from ..predict.summary import predict_summary

    from .. import budget
    from ..errors import check_range

    step = check_range("--heading-step-deg", a.heading_step_deg, 0.0, 90.0, lo_open=True,
                       unit="degrees")
    n_headings = budget.check_headings("--heading-step-deg", step)
    _common.check_out_dir("--plots", a.plots)
    _common.check_out_file("--noisy", a.noisy)
    counts = counts_from_args(a)
    check_predict(a, n_headings)
    field = _common.field_from_args(a)
    _common.say_date(a)
    pose = Pose(a.yaw_deg, a.pitch_deg, a.roll_deg)
    layout = _common.layout_from_args(a)
    response = _common.response_from_args(a)
    _common.check_response_mean(response, a.product, "the response")
    spec = spec_from_args(a)
    plot_paths = []
    if a.plots:
        names = ["response.png", "pattern.png", "precision.png"]
        plot_paths = [os.path.join(a.plots, n) for n in names]
        _common.refuse_overwrite(plot_paths, a.force)
    if a.noisy:
        _common.refuse_overwrite([a.noisy], a.force)
    metrics, fr = predict_summary(field, pose, layout, response, spec, counts, a.product,
                                  np.arange(0.0, 360.0, step), a.threshold)
    assumptions = {"field": field.as_dict() if hasattr(field, "as_dict") else str(field),
                   "pose": pose.as_dict(), "layout": layout.name,
                   "response": response.describe(), "product": a.product,
                   "mosaic": spec.describe(), "counts": counts.describe(),
                   "normalisation": "m = s/<s> - 1, <s> the mean over all receptors at each heading",
                   "heading_step_deg": step}
    quantum = _quantum_bound(a, field) if a.quantum_pair else None
    if a.plots:
        from .. import plots

        plots.plot_response(response, plot_paths[0], a.product)
        plots.plot_pattern(field, pose, layout, response, plot_paths[1], product=a.product,
                           gain=a.gain)
        plots.plot_precision(fr, plot_paths[2])
    if a.noisy:
        from ..io import write_png8_srgb
        from ..mosaic import build_mosaic
        from ..predict.noisy import render_noisy
        from ..views import WorldPanorama

        view = WorldPanorama(a.width)
        img = render_noisy(field, pose, layout, response, view, build_mosaic(layout, spec), counts,
                           scene=_common.scene_from_args(a, a.width), seed=a.noisy_seed,
                           product=a.product)
        write_png8_srgb(a.noisy, img, noisy_labels(a, field, pose, layout, response, view, spec,
                                                   counts))
        plot_paths.append(a.noisy)
    if a.json:
        json.dump({"caution": CAUTION, "assumptions": assumptions, "metrics": metrics,
                   "crb_deg_vs_yaw": {"yaw_deg": fr.headings_deg.tolist(),
                                      "crb_deg": fr.crb_deg.tolist()},
                   "plots": plot_paths, **({"quantum_bound": quantum} if quantum else {})},
                  sys.stdout, indent=2, default=str, allow_nan=True)
        print()
        return 0
    print(f"CAUTION: {CAUTION}")
    print(format_assumptions(field, pose, layout, response, a.product, spec, counts))
    print()
    print(format_metrics(metrics, [e.name for e in layout.eyes]))
    if quantum:
        from ..vocabulary import split

        print()
        print(f"quantum limit, radical pair {quantum['pair']} at |B| = {quantum['field_uT']:.4g} µT "
              f"(per pair, field direction; not the heading of the array above):")
        rows = [(split(k)[0], _num(float(v)) if isinstance(v, (int, float)) else str(v),
                 split(k)[1]) for k, v in quantum["metrics"].items()]
        w = max(len(r[0]) for r in rows)
        for lab, val, unit in rows:
            print(f"  {lab:<{w}}  {val:>10} {unit}".rstrip())
    for pth in plot_paths:
        print(pth)
    return 0


def noisy_labels(a, field, pose, layout, response, view, spec, counts):
    """PNG text chunks of the ``--noisy`` picture: what it shows, in which units, the
    caution, and the parameters (mosaic, counts and noise, seed) that made it."""
    # deferred: library modules load when the command runs, so start-up stays light
    from ..pngmeta import label_chunks
    from ..predict import CAUTION
    from ..provenance import frame_params

    c = counts.describe()
    what = (f"one noisy realisation (seed {a.noisy_seed}) of the receptor signals: counts drawn "
            f"from the {c.get('noise', a.noise)} noise model for {a.integration_ms:g} ms at "
            f"{a.flux:g} absorptions/s per receptor at linear luminance 1, mean count "
            f"flux·time·L·(1 + gain·(s/<s> - 1)), gain {a.gain:g}; every seen pixel is the "
            f"scene colour times n/mu0 of its nearest receptor (mu0 its unmodulated mean "
            f"count); world panorama (equirectangular, north at the centre column), heading "
            f"{a.yaw_deg:g} deg; pixel values are linear scene luminance encoded as 8-bit "
            f"sRGB (IEC 61966-2-1), rounded, no display model")
    params = frame_params(field, pose, layout, response, view, a.gain, a.product,
                          mosaic=spec.describe(), counts=c, noisy_seed=a.noisy_seed,
                          scene=a.scene or "procedural dusk",
                          encoding="8-bit sRGB of linear luminance, rounded",
                          command="magretina predict --noisy")
    return label_chunks(what, CAUTION, params,
                        warning="one random draw of a noise model under the stated hypothesis; "
                                "not a calibrated stimulus (use render or run with a display "
                                "model for stimuli)")


def _quantum_bound(a, field):
    """Sphere summary of the quantum and yield information of ``--quantum-pair`` at |B|.

    The numbers are per radical pair and about the field direction in the molecular
    frame (θ, φ); N independent pairs scale the information by N.  They stand beside the
    receptor-array bound, which includes the mosaic, counts and noise, and do not replace it.
    """
    # deferred: library modules load when the command runs, so start-up stays light
    import math

    from ..spin.definition import load_pair
    from ..response.information_table import compute_information_table

    pair = load_pair(a.quantum_pair)
    b_T = float(field.total_T)
    if not b_T > 0:
        raise MagretinaError("--quantum-pair: the field is zero; the field direction is undefined")
    s = compute_information_table(pair, b_T, order=a.quantum_order).summary()
    per_axis_q = s["mean_trace_quantum_rad-2"] / 2
    per_axis_c = s["mean_trace_yield_rad-2"] / 2
    one_deg = math.radians(1.0) ** 2
    metrics = {"quantum_info_per_axis_rad-2": per_axis_q,
               "yield_info_per_axis_rad-2": per_axis_c,
               "pairs_for_1deg_quantum": 1.0 / (per_axis_q * one_deg) if per_axis_q > 0 else math.inf,
               "pairs_for_1deg_yield": 1.0 / (per_axis_c * one_deg) if per_axis_c > 0 else math.inf,
               "ratio_along_gradient_min": s["ratio_along_gradient_min"],
               "ratio_along_gradient_median": s["ratio_along_gradient_median"]}
    return {"pair": a.quantum_pair, "field_uT": b_T * 1e6, "metrics": metrics,
            "note": "sphere means over field directions in the molecular frame; model prediction"}

