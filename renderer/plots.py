"""Figures for people: response curves, patterns with θ contours, heading precision, sweeps.

Every function draws one matplotlib figure on the Agg canvas (``matplotlib.figure.
Figure`` with ``FigureCanvasAgg``: no pyplot state, no display needed) and writes it
as a PNG atomically, returning the path.  Titles carry the caution that the curves
are model predictions where a reader could take them for data.  This module does not
compute predictions; it draws what :mod:`renderer.predict` and the pipeline give it.
"""

from __future__ import annotations

import io
import textwrap

import numpy as np

from . import kernels, pipeline
from .errors import MagretinaError
from .frames import angle_between_deg
from .io import atomic_path, atomic_write_bytes
from .pngmeta import creation_time
from .version import __version__
from .views import HeadPanorama, WorldPanorama

CAPTION = "model prediction, not a measurement"


def _figure(figsize, layout="constrained"):
    # deferred: matplotlib (~0.5 s) loads only when a figure is drawn
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=figsize, dpi=100, layout=layout)
    FigureCanvasAgg(fig)
    return fig


def describe_figure(fig) -> str:
    """What a figure shows, from its own text: titles and axis labels (with their units)."""
    parts = []
    sup = getattr(fig, "_suptitle", None)
    if sup is not None and sup.get_text():
        parts.append(sup.get_text())
    for ax in fig.axes:
        bits = [t for t in (ax.get_title(), ax.get_xlabel() and "x: " + ax.get_xlabel(),
                            ax.get_ylabel() and "y: " + ax.get_ylabel()) if t]
        if bits:
            parts.append("; ".join(bits))
    return " | ".join(" ".join(p.split()) for p in parts) or "figure"


def png_metadata(fig) -> dict:
    """PNG text chunks (the PNG specification's keywords) for a matplotlib figure: what
    made it, what it shows, the model-prediction caution, the creation time."""
    return {"Software": f"magretina {__version__} (matplotlib figure)",
            "Description": describe_figure(fig),
            "Source": "computed by magretina (a model, no camera or measurement)",
            "Disclaimer": f"Figure of a {CAPTION}, under the stated hypothesis (receptor "
                          f"response, alignment, gain); not a stimulus.",
            "Creation Time": creation_time()}


def _save(fig, path, dpi=100):
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, metadata=png_metadata(fig))
    return atomic_write_bytes(path, buf.getvalue())


def plot_response(response, path, product="singlet", n=361, title=None):
    """The receptor response against θ, polar and Cartesian side by side.

    Parameters
    ----------
    response : axial response (or full: its axial average)
    path : output PNG
    product : "singlet" or "triplet" (plots the signal s = f or 1 − f)
    """
    theta = np.linspace(0.0, np.pi, n)
    lut = pipeline.response_lut(response, product, 4097)
    s = kernels.lut_lookup_numpy(lut, np.cos(theta))
    fig = _figure((9, 4))
    ax1 = fig.add_subplot(1, 2, 1, projection="polar")
    th_full = np.concatenate([theta, 2 * np.pi - theta[::-1]])
    ax1.plot(th_full, np.concatenate([s, s[::-1]]), color="C0")
    # same convention as every polar plot here (0 at the top, clockwise); the radius
    # spans the signal's range, not 0..max, so the anisotropy is visible
    ax1.set_theta_zero_location("N")
    ax1.set_theta_direction(-1)
    lo, hi = response_radius_limits(s)
    ax1.set_rlim(lo, hi)
    ax1.set_title(f"signal vs θ (polar; 0° = receptor axis, clockwise;\n"
                  f"radius from {lo:.4g} to {hi:.4g})", fontsize=9)
    ax2 = fig.add_subplot(1, 2, 2)
    ax2.plot(np.degrees(theta), s, color="C0")
    ax2.set_xlabel("θ, angle between receptor axis and field (degrees)")
    ax2.set_ylabel(f"{product} signal")
    ax2.set_xlim(0, 180)
    ax2.set_xticks(range(0, 181, 30))
    ax2.grid(alpha=0.3)
    fig.suptitle(title or f"Receptor response ({CAPTION})", fontsize=10)
    return _save(fig, path)


def response_radius_limits(signal, margin=0.1):
    """Radial limits of a polar response plot: the signal's range with a margin.

    A polar radius from 0 hides a modulation of a few per cent (the curve looks like
    a circle); the limits span [min − margin·range, max + margin·range] instead.
    A flat signal gets ±1 % of its value (or ±1 if it is 0) so the circle still shows.
    """
    s = np.asarray(signal, float)
    lo, hi = float(np.nanmin(s)), float(np.nanmax(s))
    span = hi - lo
    if span <= 0:
        pad = abs(hi) * 0.01 or 1.0
        return lo - pad, hi + pad
    return lo - margin * span, hi + margin * span


def combined_label(n_eyes) -> str:
    """Legend entry of the curve that combines every eye: "both eyes", "all 3 eyes"."""
    return {1: "the eye", 2: "both eyes"}.get(int(n_eyes), f"all {int(n_eyes)} eyes")


def plot_pattern(field, pose, layout, response, path, width=720, frame="head", product="singlet",
                 gain=1.0, contour_step_deg=15.0, title=None):
    """The modulation pattern on a panorama with iso-contours of θ.

    θ is the angle between each pixel's view direction and the field axis, which
    is the receptor–field angle for receptors normal to a retina centred on the nodal
    point (the layout presets); for other eyes it is a guide to the field geometry.

    Parameters
    ----------
    frame : "head" or "world" panorama
    gain : modulation gain, m = gain·(s/⟨s⟩ − 1)
    """
    if frame not in ("head", "world"):
        raise MagretinaError(f"plot frame = {frame!r}: allowed head, world")
    view = HeadPanorama(width) if frame == "head" else WorldPanorama(width)
    s, mean = pipeline.render_signal(field, pose, layout, response, view, product)
    m = gain * (s / mean - 1.0)
    d = view.directions()
    b = np.asarray(field.ned_T, float)
    tot = np.linalg.norm(b)
    fig = _figure((10, 5.4))
    ax = fig.add_subplot(1, 1, 1)
    lim = float(np.nanmax(np.abs(m))) if np.isfinite(m).any() else 1.0
    lim = lim if lim > 0 else 1.0
    im = ax.imshow(m, extent=(-180, 180, -90, 90), origin="upper", cmap="RdBu_r", vmin=-lim,
                   vmax=lim, interpolation="nearest")
    fig.colorbar(im, ax=ax, shrink=0.8, label="modulation m")
    if tot > 0:
        b_frame = b / tot if frame == "world" else pose.R_head_world @ (b / tot)
        theta = angle_between_deg(d, b_frame)
        az, el = view.pixel_azel()
        levels = np.arange(contour_step_deg, 180.0, contour_step_deg)
        cs = ax.contour(az, el, theta, levels=levels, colors="k", linewidths=0.6, alpha=0.7)
        ax.clabel(cs, fmt="%g°", fontsize=7)
    ax.set_xlabel("azimuth (degrees, " + ("from the head's forward axis" if frame == "head"
                                          else "from geographic north") + ")")
    ax.set_ylabel("elevation (degrees)")
    ax.set_xticks(range(-180, 181, 45))
    ax.set_yticks(range(-90, 91, 30))
    ax.set_title(title or f"Modulation pattern, θ contours every {contour_step_deg:g}° "
                 f"({CAPTION})", fontsize=10)
    return _save(fig, path)


def plot_precision(fisher_result, path, title=None):
    """Cramér–Rao bound on heading error against heading, polar (layout and each eye)."""
    fr = fisher_result
    psi = np.radians(np.append(fr.headings_deg, fr.headings_deg[:1]))
    fig = _figure((6, 6))
    ax = fig.add_subplot(1, 1, 1, projection="polar")
    ax.set_theta_zero_location("N")
    ax.set_theta_direction(-1)  # clockwise, like compass headings
    crb = fr.crb_deg
    finite = np.isfinite(crb)
    if not finite.any():
        ax.text(0.5, 0.5, "no heading information (J = 0)", transform=ax.transAxes, ha="center")
    else:
        ax.plot(psi, np.append(crb, crb[:1]), color="k", label=combined_label(len(fr.eye_names)))
        for k, name in enumerate(fr.eye_names):
            ce = fr.crb_eye_deg[:, k]
            if np.isfinite(ce).any():
                ax.plot(psi, np.append(ce, ce[:1]), label=name, alpha=0.8)
        ax.legend(loc="lower left", bbox_to_anchor=(-0.1, -0.12), fontsize=8)
    ax.set_title(title or f"Cramér–Rao bound on heading error (degrees)\nvs heading ({CAPTION})",
                 fontsize=10)
    return _save(fig, path)


def plot_metric_sweep(x, series, path, xlabel="sweep value", ylabel="metric", title=None):
    """One or more metrics against a sweep axis.

    Parameters
    ----------
    x : (n,) numbers, or strings (drawn as categories)
    series : dict label -> (n,) values
    """
    if not series:
        raise MagretinaError("plot_metric_sweep: no metric series given")
    xs = list(x)
    numeric = all(isinstance(v, (int, float, np.integer, np.floating)) for v in xs)
    fig = _figure((7, 4))
    ax = fig.add_subplot(1, 1, 1)
    pos = np.asarray(xs, float) if numeric else np.arange(len(xs))
    order = np.argsort(pos, kind="stable")
    for label, y in series.items():
        y = np.asarray(y, float)
        if y.shape[0] != len(xs):
            raise MagretinaError(f"plot_metric_sweep: series {label!r} has {y.shape[0]} values "
                                 f"for {len(xs)} x values")
        # categories have no order between them: points, not a line through them
        ax.plot(pos[order], y[order], marker="o", linestyle="-" if numeric else "none",
                label=str(label))
    if not numeric:
        ax.set_xlim(-0.5, len(xs) - 0.5)
        ax.set_xticks(pos)
        ax.set_xticklabels([str(v) for v in xs], rotation=30, ha="right")
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    ax.grid(alpha=0.3)
    if len(series) > 1:
        ax.legend(fontsize=8)
    ax.set_title(wrap_title(f"{title or f'{ylabel} vs {xlabel}'} ({CAPTION})"), fontsize=10)
    return _save(fig, path)


def wrap_title(text, width=60) -> str:
    """A title broken into lines of at most ``width`` characters, so none is clipped."""
    return "\n".join(textwrap.wrap(str(text), width)) or str(text)


def plot_information(table, path, title=None):
    """Quantum and yield Fisher information about the field direction over the sphere.

    Parameters
    ----------
    table : renderer.response.information_table.InformationTable
        Lebedev nodes in the molecular frame with 2×2 informations in the tangent frame.
    path : output PNG

    Three panels against the field direction (θ from molecular z, φ from x towards y):
    Tr F_Q, Tr F_C (rad⁻², one pair) and their ratio along the yield gradient.
    """
    theta = np.degrees(np.arccos(np.clip(table.nodes[:, 2], -1, 1)))
    phi = np.degrees(np.arctan2(table.nodes[:, 1], table.nodes[:, 0]))
    fig = _figure((13, 4))
    panels = [(table.trace_quantum, "quantum: Tr F_Q (rad⁻²)", "viridis"),
              (table.trace_yield, "yield readout: Tr F_C (rad⁻²)", "viridis"),
              (table.ratio(), "F_Q / F_C along the yield gradient", "magma")]
    for k, (vals, label, cmap) in enumerate(panels):
        ax = fig.add_subplot(1, 3, k + 1)
        ok = np.isfinite(vals)
        if ok.sum() >= 3:
            c = ax.tricontourf(phi[ok], theta[ok], vals[ok], levels=20, cmap=cmap)
            fig.colorbar(c, ax=ax)
        ax.scatter(phi, theta, s=2, c="k", alpha=0.3)
        ax.set_xlim(-180, 180)
        ax.set_ylim(180, 0)
        ax.set_xlabel("field azimuth φ (deg, molecular frame)")
        ax.set_ylabel("field polar angle θ (deg)")
        ax.set_title(label, fontsize=9)
    b = table.meta.get("field_T", float("nan")) * 1e6
    fig.suptitle(title or f"Fisher information about the field direction, one radical pair, "
                          f"|B| = {b:g} µT ({CAPTION})", fontsize=10)
    return _save(fig, path)


def plot_resonance_spectrum(spec, path):
    """ΔΦ_S (RF on − off) against RF frequency, with the free-electron Larmor line.

    Parameters
    ----------
    spec : renderer.spin.rf.ResonanceSpectrum
        ``frequency_Hz`` (F,) in Hz, ``delta`` (F,) dimensionless, ``larmor_Hz``, and
        ``meta["amplitude_T"]`` (peak B₁, tesla) for the title.
    path : output PNG (written atomically)

    Returns
    -------
    str : the path written
    """
    fig = _figure((6.4, 4.0))
    ax = fig.add_subplot(1, 1, 1)
    ax.plot(spec.frequency_Hz / 1e6, spec.delta, "o-", ms=3)
    ax.axvline(spec.larmor_Hz / 1e6, color="0.5", ls="--", lw=1,
               label=f"free-electron Larmor {spec.larmor_Hz / 1e6:.3f} MHz")
    ax.axhline(0.0, color="0.8", lw=0.8)
    ax.set_xlabel("RF frequency (MHz)")
    ax.set_ylabel("ΔΦ_S (RF on − off)")
    ax.set_title(f"RF resonance spectrum, B1 = {spec.meta['amplitude_T'] * 1e9:.0f} nT "
                 f"({CAPTION})", fontsize=9)
    ax.legend(fontsize=8)
    return _save(fig, path, dpi=120)


def plot_spin_table(table, path, note=CAPTION):
    """A full-sphere singlet-yield table and its axial average, side by side.

    Parameters
    ----------
    table : renderer.response.spin_table.SpinTable
        Φ_S over field directions in the molecular frame at |B| = ``table.field_T``.
    path : output file; the format follows its suffix (PNG if none)
    note : str
        Caution printed under the panels.

    Returns
    -------
    str
        The path written (atomically).
    """
    path = str(path)
    lut = table.sphere_lut(181, 361)
    axial = table.axial_average()
    fig = _figure((11, 4.2), layout=None)
    ax1, ax2 = fig.subplots(1, 2, gridspec_kw={"width_ratios": [2, 1]})
    im = ax1.imshow(lut, extent=[-180, 180, 180, 0], aspect="auto", cmap="viridis")
    ax1.set_xlabel("field azimuth phi in molecular frame (deg, from x towards y)")
    ax1.set_ylabel("field polar angle theta from molecular z (deg)")
    ax1.set_title(f"singlet yield at |B| = {table.field_T * 1e6:g} µT")
    fig.colorbar(im, ax=ax1, label="Phi_S")
    th = np.linspace(0, 180, 361)
    ax2.plot(th, axial(np.cos(np.radians(th))))
    ax2.set_xlabel("theta (deg)")
    ax2.set_ylabel("Phi_S averaged over rotation about z")
    ax2.set_title("axial average")
    fig.text(0.5, 0.005, note, ha="center", va="bottom", fontsize=7)
    fig.tight_layout(rect=(0, 0.03, 1, 1))
    fmt = path.rsplit(".", 1)[-1] if "." in path.rsplit("/", 1)[-1] else "png"
    with atomic_path(path) as tmp:
        fig.savefig(tmp, dpi=110, format=fmt,
                    **({"metadata": png_metadata(fig)} if fmt == "png" else {}))
    return path


__all__ = ["plot_response", "plot_pattern", "plot_precision", "plot_metric_sweep",
           "plot_spin_table", "plot_information", "plot_resonance_spectrum", "wrap_title",
           "CAPTION"]
