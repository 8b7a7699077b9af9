"""Polar plots use the compass convention; response plots show the variation; categories
are drawn as points; titles are wrapped; the combined curve is labelled by its eyes.

The figures are captured before they are written (``plots._save`` replaced) and their
matplotlib axes inspected: theta zero location and direction (matplotlib PolarAxes API),
radial limits, line styles.  Compass convention: 0° at the top, clockwise (common
practice of navigation and of orientation studies' circular plots).
"""

import numpy as np
import pytest

from renderer import plots


@pytest.fixture
def captured(monkeypatch):
    figs = []

    def keep(fig, path, dpi=100):
        figs.append(fig)
        return path

    monkeypatch.setattr(plots, "_save", keep)
    return figs


def test_response_polar_is_clockwise_from_top_and_shows_the_variation(captured, tmp_path):
    from renderer.response import Legendre

    # a response that varies by ±2 % around 0.7
    plots.plot_response(Legendre([0.7, 0.0, 0.014]), tmp_path / "r.png")
    polar = captured[0].axes[0]
    assert polar.get_theta_offset() == pytest.approx(np.pi / 2)  # 0 at the top ("N")
    assert polar.get_theta_direction() == -1                      # clockwise
    lo, hi = polar.get_ylim()
    assert lo > 0.6 and hi < 0.8  # radius spans the curve's range, not 0..max
    s = polar.lines[0].get_ydata()
    assert lo < s.min() and hi > s.max()


def test_precision_polar_is_compass_and_legend_says_both_eyes(captured, tmp_path):
    from renderer.eye import load_layout
    from renderer.field import fixed
    from renderer.mosaic import MosaicSpec, build_mosaic
    from renderer.predict import CountModel, fisher_information
    from renderer.response import Legendre

    lay = load_layout("lateral")
    fr = fisher_information(fixed(50, 65, 0), lay, Legendre([0.7, 0, 0.1]),
                            build_mosaic(lay, MosaicSpec(density=0.005)), CountModel(),
                            np.arange(0, 360, 30.0))
    plots.plot_precision(fr, tmp_path / "p.png")
    ax = captured[0].axes[0]
    assert ax.get_theta_offset() == pytest.approx(np.pi / 2) and ax.get_theta_direction() == -1
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert labels[0] == "both eyes" and "layout" not in labels


def test_combined_label():
    assert [plots.combined_label(n) for n in (1, 2, 3)] == ["the eye", "both eyes", "all 3 eyes"]


def test_categorical_sweep_is_points_and_titles_wrap(captured, tmp_path):
    plots.plot_metric_sweep(["p2_plus", "p2_minus"], {"m": [1.0, 2.0]}, tmp_path / "c.png",
                            xlabel="response shape", ylabel="a rather long metric label (°)")
    ax = captured[0].axes[0]
    assert ax.lines[0].get_linestyle() == "None" and ax.lines[0].get_marker() == "o"
    assert all(len(line) <= 60 for line in ax.get_title().splitlines())
    plots.plot_metric_sweep([0.0, 30.0, 60.0], {"m": [1.0, 2.0, 3.0]}, tmp_path / "n.png")
    assert captured[1].axes[0].lines[0].get_linestyle() == "-"


def test_radius_limits_of_a_flat_response():
    lo, hi = plots.response_radius_limits(np.full(10, 0.5))
    assert lo < 0.5 < hi
