"""The orientation model: symmetries of the field manipulations and the Cramér-Rao limit.

Checks: a rotated horizontal component rotates the predicted mean by the same angle
(the template-matching rule is equivariant under rotations of the field about the
vertical, common practice); an inverted vertical component reverses an axial
(inclination) compass but not a signed (polarity) one, as Wiltschko & Wiltschko
(1972, Science 176:62) used to tell the two apart; zero field or a response without
anisotropy predicts a uniform distribution; at high counts the predicted circular
spread approaches the Cramér-Rao bound sqrt(⟨1/J⟩) of
:func:`renderer.predict.fisher_information` (ML decoding is asymptotically
efficient; Cramér 1946), and Monte-Carlo decoding agrees with the grid prediction.
"""

import math

import numpy as np
import pytest

from renderer.eye import load_layout
from renderer.field import fixed
from renderer.mosaic import MosaicSpec, build_mosaic
from renderer.orientation.model import Behaviour, Condition, Hypothesis, Predictor
from renderer.predict import CountModel, fisher_information
from renderer.response import Legendre
from renderer.study.sequences import CoilState

AXIAL = Legendre([0.7, 0.0, 0.1])
SIGNED = Legendre([0.7, 0.2])


@pytest.fixture(scope="module")
def setup():
    layout = load_layout("lateral")
    return layout, build_mosaic(layout, MosaicSpec(density=0.005)), fixed(50.0, 66.0, 0.0)


def _pred(setup, resp, state, flux=1e5, G=360, pref=30.0, **beh):
    layout, mosaic, amb = setup
    P = Predictor(Hypothesis("h", layout, resp), amb, mosaic, CountModel(flux_per_s=flux),
                  Behaviour(pref, **beh), G)
    return P, P.predict(Condition("c", state.apply(amb.ned_T)))


def _d(a, b):
    return abs((a - b + 180.0) % 360.0 - 180.0)


@pytest.mark.parametrize("angle", [90.0, 37.0, -120.0])
def test_rotated_horizontal_component_rotates_the_prediction(setup, angle):
    """Rotation by a whole number of grid steps shifts the grid distribution exactly
    (to rounding, 1e-9°); the mean moves by the angle (CoilState: north toward east)."""
    _, p0 = _pred(setup, AXIAL, CoilState())
    _, p1 = _pred(setup, AXIAL, CoilState(rotate_deg=angle))
    assert _d(p1.stats["mean_deg"], p0.stats["mean_deg"] + angle) < 1e-9
    assert p1.stats["r"] == pytest.approx(p0.stats["r"], abs=1e-12)
    assert np.allclose(np.roll(p0.prob, int(round(angle))), p1.prob, atol=1e-12)


def test_inversion_reverses_axial_but_not_polarity_compass(setup):
    """Inverted vertical component: the axial compass heads 180° away from its preferred
    direction (the response being even in cos θ; to 1e-4°, since the signal at −cos θ is
    read from other nodes of the Hermite table of renderer.predict.fisher), the signed
    one keeps it (within 2°, the grid step and mosaic asymmetry)."""
    _, pa = _pred(setup, AXIAL, CoilState(vertical_sign=-1.0))
    _, ps = _pred(setup, SIGNED, CoilState(vertical_sign=-1.0))
    assert _d(pa.stats["mean_deg"], 210.0) < 1e-4
    assert _d(ps.stats["mean_deg"], 30.0) < 2.0
    assert ps.stats["r"] > 0.9


@pytest.mark.parametrize("case", ["zero field", "no anisotropy"])
def test_uniform_without_a_cue(setup, case):
    """Zero field, or a constant response (no yield anisotropy): every template heading
    matches equally, the prediction is uniform to rounding (1e-12) and r = 0."""
    if case == "zero field":
        _, p = _pred(setup, AXIAL, CoilState(zero=True), kappa=2.0)
    else:
        _, p = _pred(setup, Legendre([1.0]), CoilState())
    assert np.allclose(p.prob, 1.0 / p.prob.size, atol=1e-12)
    assert p.stats["r"] < 1e-9


def test_spread_approaches_the_cramer_rao_bound(setup):
    """Predicted circular SD / sqrt(⟨1/J(ψ)⟩) → 1 as counts grow: within 10 % at 1e5,
    within 1 % at 1e7 photons/s (the Gaussian limit; the heading grid is 0.25°)."""
    layout, mosaic, amb = setup
    ratios = []
    for flux in (1e5, 1e7):
        cm = CountModel(flux_per_s=flux)
        _, p = _pred(setup, AXIAL, CoilState(), flux=flux, G=1440)
        J = fisher_information(amb, layout, AXIAL, mosaic, cm, np.arange(0.0, 360.0, 1.0)).J
        ratios.append(p.stats["circular_sd_deg"] / math.degrees(math.sqrt(np.mean(1.0 / J))))
    assert abs(ratios[0] - 1) < 0.10
    assert abs(ratios[1] - 1) < 0.01
    assert abs(ratios[1] - 1) < abs(ratios[0] - 1)


def test_monte_carlo_agrees_with_the_grid_at_high_counts(setup):
    """600 simulated ML decoders vs the grid: mean within 4 standard errors
    (SE = sd/sqrt(n)) and circular SD within 10 % (sampling error of an SD at n = 600
    is ≈ 3 %)."""
    P, p = _pred(setup, AXIAL, CoilState(rotate_deg=90.0), flux=1e6)
    from renderer.orientation import describe

    amb = setup[2]
    mc = P.monte_carlo(Condition("c", CoilState(rotate_deg=90.0).apply(amb.ned_T)), 600,
                       np.random.default_rng(3))
    d = describe(mc)
    sd = p.stats["circular_sd_deg"]
    assert _d(d["mean_deg"], p.stats["mean_deg"]) < 4 * sd / math.sqrt(600)
    assert d["circular_sd_deg"] == pytest.approx(sd, rel=0.10)


def test_behaviour_spread_and_non_orienting_share(setup):
    """The behavioural von Mises convolution multiplies r by A1(κ) (Mardia & Jupp 2000,
    eq. 3.5.41: mean resultant lengths multiply under convolution); a share q of
    non-orienting animals multiplies it by 1 − q."""
    from renderer.orientation.statistics import a1

    _, p0 = _pred(setup, AXIAL, CoilState())
    _, p1 = _pred(setup, AXIAL, CoilState(), kappa=2.0, non_orienting=0.25)
    assert p1.stats["r"] == pytest.approx(p0.stats["r"] * float(a1(2.0)) * 0.75, rel=1e-6)
    assert _d(p1.stats["mean_deg"], 30.0) < 1e-6
