"""Circular plots of orientation experiments: observed headings beside predicted ones.

One polar panel per condition (north up, clockwise, as a compass): observed headings
as stacked dots at the rim (or a rose diagram), their mean vector (length r, in units
of the unit circle) with the confidence arc of the mean direction, the critical
radius of the Rayleigh test (dashed circle: a mean vector reaching beyond it is
significant at α), and for each hypothesis the predicted distribution (a curve
whose radial extent is proportional to the density) and the predicted mean
direction (a spoke).  Power curves are drawn against the number of animals.
Figures use matplotlib's object-oriented API on the Agg canvas (no pyplot), via
:func:`renderer.plots._figure` and written atomically with :func:`renderer.plots._save`.
Predicted curves are labelled as model predictions.  Nothing here computes a model.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import MagretinaError
from ..plots import CAPTION, _figure, _save
from . import statistics as st

__all__ = ["plot_conditions", "plot_power"]


def _compass_axes(ax):
    ax.set_theta_zero_location("N")
    ax.set_theta_direction(-1)
    ax.set_ylim(0, 1.35)
    ax.set_yticks([0.5, 1.0])
    ax.set_yticklabels(["0.5", "1"], fontsize=6)
    ax.tick_params(axis="x", labelsize=7)


def plot_conditions(path, conditions, predictions=None, observed=None, axial=None, alpha=0.05,
                    rose=False, title=None, bins=24):
    """One compass panel per condition.

    Parameters
    ----------
    path : output PNG
    conditions : list of condition names (panel order)
    predictions : dict hypothesis -> dict condition -> Prediction (or None)
    observed : dict condition -> headings (degrees) (or None)
    axial : dict condition -> bool (observed axial data: doubled statistics, arcs
        drawn on both ends of the axis)
    alpha : level of the Rayleigh critical radius and of the confidence arc
    rose : draw a rose diagram (histogram of ``bins`` sectors) instead of dots
    """
    if not conditions:
        raise MagretinaError("plot_conditions: no conditions to draw")
    if not 0.0 < alpha < 1.0:
        raise MagretinaError(f"alpha = {alpha!r}: allowed (0, 1)")
    predictions = predictions or {}
    observed = observed or {}
    axial = axial or {}
    n = len(conditions)
    cols = min(3, n)
    rows = math.ceil(n / cols)
    fig = _figure((3.6 * cols, 3.6 * rows + 0.5))
    colours = {h: f"C{i + 1}" for i, h in enumerate(predictions)}
    for k, c in enumerate(conditions):
        ax = fig.add_subplot(rows, cols, k + 1, projection="polar")
        _compass_axes(ax)
        ax.set_title(c, fontsize=9)
        for h, preds in predictions.items():
            p = preds.get(c)
            if p is None:
                continue
            th = np.radians(np.append(p.grid_deg, p.grid_deg[0]))
            dens = np.append(p.prob, p.prob[0])
            scale = 0.9 / max(float(dens.max()), 1e-300)
            ax.plot(th, dens * scale, color=colours[h], lw=1.2,
                    label=f"{h} (predicted)")
            m = p.stats["mean_deg"]
            if not math.isnan(m):
                ax.plot([math.radians(m)] * 2, [0, p.stats["r"]], color=colours[h], lw=2,
                        ls="--")
        a = observed.get(c)
        if a is not None and len(a):
            ax_c = bool(axial.get(c, False))
            a = st.check_angles(a, name=f"observed headings of {c!r}")
            if rose:
                edges = np.linspace(0, 2 * np.pi, bins + 1)
                cnt, _ = np.histogram(np.radians(a) % (2 * np.pi), edges)
                ax.bar(edges[:-1], cnt / max(cnt.max(), 1), width=edges[1] - edges[0],
                       align="edge", color="0.6", edgecolor="k", lw=0.4, alpha=0.6)
            else:
                # stacked dots at the rim, 5° bins
                b = np.round(a / 5.0).astype(int) % 72
                level = {}
                lv = np.empty(b.size)
                for j, bi in enumerate(b):
                    lv[j] = level.get(bi, 0)
                    level[bi] = lv[j] + 1
                ax.scatter(np.radians(b * 5.0), 1.05 + 0.06 * lv, s=6, color="k", zorder=3)
            d = st.describe(a, ax_c)
            if a.size >= 2:
                rc = st.rayleigh_critical_r(a.size, alpha)
                if math.isfinite(rc):
                    t = np.linspace(0, 2 * np.pi, 181)
                    ax.plot(t, np.full_like(t, rc), color="0.4", ls=":", lw=1,
                            label=f"Rayleigh critical r (α = {alpha:g})")
            ends = [d["mean_deg"], d["mean_deg"] + 180.0] if ax_c else [d["mean_deg"]]
            ci = st.mean_ci(a, alpha, ax_c) if a.size >= 2 else None
            for e in ends:
                if math.isnan(e):
                    continue
                ax.annotate("", xy=(math.radians(e), d["r"]), xytext=(0, 0),
                            arrowprops=dict(arrowstyle="->", color="k", lw=1.6))
                if ci is not None:
                    lo = ci[0] + (e - d["mean_deg"])
                    hi = ci[1] + (e - d["mean_deg"])
                    span = (hi - lo) % 360.0
                    t = np.radians(lo + np.linspace(0, span, 50))
                    ax.plot(t, np.full_like(t, max(d["r"], 0.05)), color="k", lw=3,
                            solid_capstyle="butt")
            ax.text(0.5, -0.12, f"n = {d['n']}, r = {d['r']:.2f}, mean = {d['mean_deg']:.0f}°",
                    transform=ax.transAxes, ha="center", fontsize=7)
    handles, labels = [], []
    for ax in fig.axes:
        for hd, lb in zip(*ax.get_legend_handles_labels()):
            if lb not in labels:
                handles.append(hd)
                labels.append(lb)
    if handles:
        fig.legend(handles, labels, loc="outside lower center", fontsize=7,
                   ncol=min(3, len(labels)))
    fig.suptitle(title or f"Headings per condition: observed (black) and predicted "
                          f"({CAPTION} for the curves)", fontsize=9)
    return _save(fig, path)


def plot_power(path, curves, target=None, alpha=0.05, title=None):
    """Power against number of animals.

    Parameters
    ----------
    path : output PNG
    curves : dict label -> list of {"n", "power", "se"} (from power_curve /
        animals_needed)
    target : horizontal line at the target power (or None)
    """
    if not curves:
        raise MagretinaError("plot_power: no curves")
    fig = _figure((6, 4))
    ax = fig.add_subplot(1, 1, 1)
    for i, (lab, rows) in enumerate(curves.items()):
        rows = sorted(rows, key=lambda r: r["n"])
        n = np.array([r["n"] for r in rows], float)
        p = np.array([r["power"] for r in rows])
        se = np.array([r["se"] for r in rows])
        ax.errorbar(n, p, yerr=se, marker="o", ms=3, capsize=2, label=lab, color=f"C{i}")
    if target is not None:
        ax.axhline(target, color="0.5", ls="--", lw=1)
    ax.axhline(alpha, color="0.7", ls=":", lw=1)
    ax.set_ylim(0, 1.02)
    ax.set_xlabel("animals per condition")
    ax.set_ylabel(f"power (share of simulated experiments with p < {alpha:g})")
    ax.legend(fontsize=7)
    ax.set_title(title or f"Power by simulation of the test ({CAPTION})", fontsize=9)
    return _save(fig, path)
