"""Pattern contrast per eye against a closed form, and noisy receptor-level stimuli."""

import numpy as np
import pytest

from renderer import pipeline
from renderer.errors import MagretinaError
from renderer.eye import load_layout
from renderer.eye.layout import Layout
from renderer.field import fixed
from renderer.mosaic import MosaicSpec, build_mosaic
from renderer.pose import Pose
from renderer.predict import CountModel
from renderer.predict.contrast import eye_contrast
from renderer.predict.noisy import receptor_factors, render_noisy
from renderer.response import Legendre
from renderer.scene import uniform
from renderer.views import WorldPanorama

from .conftest import sphere_eye


def test_contrast_of_a_p2_pattern_on_a_full_field_eye():
    """One eye seeing every direction, receptors along the view directions, response
    f = c₀ + c₂P₂(cos θ).  Over the sphere P₂ averages to 0 and its mean square is 1/5
    (Legendre orthogonality, ∫P_l² dc = 2/(2l+1); Abramowitz & Stegun 1964, 22.2.10), so
    ⟨s⟩ = c₀, m = g c₂P₂/c₀ and I = 1 + m ranges over [1 − gc₂/(2c₀), 1 + gc₂/c₀]:
    Michelson = (3gc₂/2c₀)/(2 + gc₂/2c₀), RMS = gc₂/(c₀√5), peak-to-peak = 3gc₂/(2c₀).
    The 720-wide grid samples θ within 0.25° of the extremes and integrates the
    solid angle to O(Δ²), hence the 1e-3 tolerances."""
    c0, c2, g = 0.6, 0.15, 0.8
    lay = Layout("s", (sphere_eye(),))
    out = eye_contrast(fixed(50, 63, 12), Pose(31.0, 5.0, 0.0), lay, Legendre([c0, 0, c2]), g,
                       width=720)["sphere"]
    k = g * c2 / c0
    assert out["michelson"] == pytest.approx(1.5 * k / (2 + 0.5 * k), rel=1e-3)
    assert out["rms"] == pytest.approx(k / np.sqrt(5), rel=1e-3)
    assert out["peak_to_peak"] == pytest.approx(1.5 * k, rel=1e-3)
    assert out["weber_max"] == pytest.approx(k, rel=1e-3)
    assert out["visible"] == 1.0
    dim = eye_contrast(fixed(50, 63, 12), Pose(31.0), lay, Legendre([c0, 0, c2]), 0.01,
                       threshold=0.01)["sphere"]
    assert dim["weber_max"] == pytest.approx(0.01 * c2 / c0, rel=1e-3) and dim["visible"] == 0.0
    with pytest.raises(MagretinaError, match="threshold"):
        eye_contrast(fixed(50, 63, 12), Pose(), lay, Legendre([c0, 0, c2]), g, threshold=-0.1)


def test_contrast_is_reported_per_eye():
    lay = load_layout("lateral")
    out = eye_contrast(fixed(50, 65, 0), Pose(10.0), lay, Legendre([0.7, 0, 0.1]), 1.0)
    assert set(out) == {"left", "right"}
    for v in out.values():
        assert 0 < v["rms"] < v["michelson"] < 1


def test_noisy_stimulus_statistics_and_seed():
    """Uniform scene, gain 0: every seen pixel is the scene times n/μ₀ of its receptor,
    n ~ Poisson(μ₀), so across receptors the factor has mean 1 and variance 1/μ₀ (the
    Poisson variance equals the mean; common practice); the same seed gives the same
    image, another seed another."""
    lay = load_layout("lateral")
    mo = build_mosaic(lay, MosaicSpec(density=0.2, seed=3))
    scene = uniform(256, 0.5)
    lum = 0.5
    cm = CountModel(flux_per_s=400.0, integration_s=0.1, gain=0.0)
    mu0 = 400.0 * 0.1 * lum
    args = (fixed(50, 65, 0), Pose(20.0), lay, Legendre([0.7, 0, 0.1]), WorldPanorama(256), mo, cm)
    a = render_noisy(*args, scene=scene, seed=1)
    b = render_noisy(*args, scene=scene, seed=1)
    c = render_noisy(*args, scene=scene, seed=2)
    assert a.shape == (128, 256, 3) and a.dtype == np.float32
    assert np.array_equal(a, b) and not np.array_equal(a, c)
    f, _ = receptor_factors(*args[:4], mo, cm, scene, seed=1)
    assert f.shape == (mo.n_receptors,)
    assert np.mean(f) == pytest.approx(1.0, abs=4 / np.sqrt(mu0 * f.size))
    assert np.var(f) == pytest.approx(1 / mu0, rel=0.1)  # SE of a variance: sqrt(2/N) = 1.7 %
    seen = ~np.isnan(pipeline.render_pattern(*args[:5]))
    # every seen pixel shows one receptor's draw: values are lum × n/μ₀ with n an integer
    n = a[..., 1][seen] / lum * mu0
    assert np.allclose(n, np.round(n), atol=1e-3 * mu0)
    assert np.allclose(a[~seen], 0.25 * lum, atol=1e-6)  # outside factor as in render()


@pytest.mark.parametrize("alignment", [None, {"mode": "tilt", "tilt_deg": 40.0},
                                       {"mode": "ratio", "delta_deg": 50.0},
                                       {"mode": "full-frame", "in_plane": "meridian"}])
def test_noisy_stimulus_tends_to_the_rendered_frame_at_high_counts(alignment):
    """With 10¹² photons the noise vanishes and the image is the rendered composite
    sampled at the nearest receptor: it differs from renderer.render only by the pattern's
    change across one receptor spacing (small at 1.5° spacing), in every alignment mode
    (receptor signals come from the kernels' own maths).  The ratio channel's pattern
    spans about five times the relative range of the others (0.80..1.22 here), so it
    is checked at a fifth of the gain to keep the same bound on the sampling error."""
    lay = load_layout("lateral")
    if alignment is not None:
        lay = lay.with_alignment(alignment)
    mo = build_mosaic(lay, MosaicSpec(density=0.5, seed=3))
    scene = uniform(256, 0.5)
    gain = 0.2 if alignment is not None and alignment["mode"] == "ratio" else 1.0
    cm = CountModel(flux_per_s=1e13, integration_s=0.1, gain=gain)
    resp = Legendre([0.7, 0, 0.1]) if alignment is None else Legendre([0.7, 0, 0.1, 0, 0.05])
    args = (fixed(50, 65, 0), Pose(20.0), lay, resp, WorldPanorama(256))
    noisy = render_noisy(*args, mo, cm, scene=scene, seed=0)
    ref = pipeline.render(*args, scene=scene, gain=gain)
    d = np.abs(noisy - ref)
    assert d.mean() < 2e-3 and d.max() < 0.02


def test_noisy_bad_gain():
    lay = load_layout("lateral")
    mo = build_mosaic(lay, MosaicSpec(density=0.05))
    with pytest.raises(MagretinaError, match="gain"):
        render_noisy(fixed(50, 65, 0), Pose(), lay, Legendre([0.1, 0, 0.5]), WorldPanorama(64),
                     mo, CountModel(gain=10.0), scene=uniform(64, 0.5))
