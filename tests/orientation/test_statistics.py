"""Circular statistics of headings against reference libraries, worked examples and simulation.

Reference libraries: scipy.stats (circmean, circstd, directional_stats, vonmises) and
astropy.stats.circstats (circmean, circvar, rayleightest, vtest).  Worked examples:
Zar (2010, Biostatistical Analysis, 5th ed.) Examples 27.1, 27.2 and the two-sample
Watson-Williams example, with the numbers as quoted in the public test suite of the
pycircstat2 package (circstat/pycircstat2, tests/test_hypothesis.py) -- not checked
against the printed book; the homing-pigeon bearings of Mardia & Jupp (2000, p. 93)
as listed in public documentation.
"""

import math

import numpy as np
import pytest
from astropy.stats import circstats
from scipy import stats

from renderer.errors import MagretinaError
from renderer.orientation import describe, rayleigh_test, v_test
from renderer.orientation import statistics as st

PIGEONS = [55, 60, 65, 95, 100, 110, 260, 275, 285, 295]
ZAR_TREES = [45, 55, 81, 96, 110, 117, 132, 154]          # Zar Example 26.2 data
ZAR_V = [66, 75, 86, 88, 88, 93, 97, 101, 118, 130]       # Zar Example 27.2 data
ZAR_WW1 = [94, 65, 45, 52, 38, 47, 73, 82, 90, 40, 87]
ZAR_WW2 = [77, 70, 61, 45, 50, 35, 48, 65, 36]


def _samples():
    rng = np.random.default_rng(5)
    out = [PIGEONS, ZAR_TREES, ZAR_V]
    for k, n in ((0.5, 7), (2.0, 30), (8.0, 49), (1.0, 120)):
        out.append(list(np.degrees(stats.vonmises.rvs(k, loc=1.0, size=n, random_state=rng))
                        % 360.0))
    return out


@pytest.mark.parametrize("a", _samples())
def test_describe_matches_scipy_and_astropy(a):
    """mean direction, r and circular SD against scipy.stats.circmean/circstd/
    directional_stats and astropy circmean/circvar (r = 1 − circvar); agreement to
    1e-9 (floating-point rounding of the same sums)."""
    d = describe(a)
    rad = np.radians(a)
    assert d["n"] == len(a)
    ref_mean = math.degrees(stats.circmean(rad)) % 360.0
    assert abs((d["mean_deg"] - ref_mean + 180) % 360 - 180) < 1e-9
    ast_mean = math.degrees(float(circstats.circmean(rad))) % 360.0
    assert abs((d["mean_deg"] - ast_mean + 180) % 360 - 180) < 1e-9
    assert d["r"] == pytest.approx(1.0 - float(circstats.circvar(rad)), abs=1e-12)
    xy = np.stack([np.cos(rad), np.sin(rad)], axis=1)
    assert d["r"] == pytest.approx(stats.directional_stats(xy).mean_resultant_length, abs=1e-12)
    assert d["circular_sd_deg"] == pytest.approx(math.degrees(stats.circstd(rad)), rel=1e-9)


@pytest.mark.parametrize("a", _samples())
def test_rayleigh_and_v_match_astropy(a):
    """Rayleigh p against astropy.stats.rayleightest (same Fisher 1993 / Wilkie 1983 series)
    and V-test p against astropy.stats.vtest (Durand & Greenwood expansion) to 1e-12,
    wherever the expansions are usable (above half their leading term; beyond, both
    modules' series break down and ours switches to Zar's eq. 27.4); u against
    sqrt(2n)·mean cos(θ − μ0)."""
    rad = np.radians(a)
    z, p = rayleigh_test(a)
    assert z == pytest.approx(len(a) * describe(a)["r"] ** 2, rel=1e-12)
    ref = float(circstats.rayleightest(rad))
    if ref > 0.5 * math.exp(-z):
        assert p == pytest.approx(ref, abs=1e-12)
    else:
        R = len(a) * describe(a)["r"]
        n = len(a)
        assert p == pytest.approx(math.exp(math.sqrt(1 + 4 * n + 4 * (n * n - R * R))
                                           - (1 + 2 * n)), rel=1e-12)
    for mu in (0.0, 57.3, 200.0):
        u, pv = v_test(a, mu)
        assert u == pytest.approx(math.sqrt(2 * len(a)) * np.mean(np.cos(rad - math.radians(mu))),
                                  rel=1e-12, abs=1e-12)
        ref = float(circstats.vtest(rad, math.radians(mu)))
        if ref > 0.5 * stats.norm.sf(u):
            assert pv == pytest.approx(ref, abs=1e-12)


def test_zar_rayleigh_worked_example():
    """Zar (2010) Example 27.1 (data of Example 26.2): z = 5.448, 0.001 < p < 0.002
    (values as quoted by the pycircstat2 tests; table bracket from the book's table)."""
    z, p = rayleigh_test(ZAR_TREES)
    assert z == pytest.approx(5.448, abs=5e-4)
    assert 0.001 < p < 0.002


def test_zar_v_test_worked_example():
    """Zar (2010) Example 27.2: expected 90°, V = 9.498, u = 4.248, p < 0.0005 (values
    as quoted by the pycircstat2 tests); V = R cos(mean − 90°) = u·sqrt(n/2).  The book
    carries r and the mean to 4 figures by hand, so agreement is to 1e-3 relative."""
    u, p = v_test(ZAR_V, 90.0)
    assert u == pytest.approx(4.248, rel=1e-3)
    assert u * math.sqrt(len(ZAR_V) / 2) == pytest.approx(9.498, rel=1e-3)
    assert p < 0.0005


def test_zar_watson_williams_worked_example():
    """Zar (2010) two-sample Watson-Williams example: F = 1.61, p = 0.22 (values as
    quoted by the pycircstat2 tests, 3 and 2 significant figures)."""
    r = st.watson_williams(ZAR_WW1, ZAR_WW2)
    assert r["F"] == pytest.approx(1.61, abs=0.005)
    assert r["p"] == pytest.approx(0.22, abs=0.005)
    assert (r["df1"], r["df2"]) == (1, 18)


def test_homing_pigeons():
    """Mardia & Jupp (2000, p. 93) pigeon bearings: r ≈ 0.22 and the Rayleigh test does not
    reject uniformity (from memory); exact figures checked against scipy and astropy."""
    d = describe(PIGEONS)
    assert d["r"] == pytest.approx(0.2229, abs=5e-4)
    z, p = rayleigh_test(PIGEONS)
    assert p > 0.5
    assert p == pytest.approx(float(circstats.rayleightest(np.radians(PIGEONS))), abs=1e-12)


def test_axial_doubling():
    """Axial data: angles doubled, mean halved (Batschelet 1981, 1.3): a sample split
    between 10° and 190° has r = 1 as an axis and mean 10°, but r = 0 as directions."""
    a = [10.0, 190.0, 10.0, 190.0]
    d = describe(a, axial=True)
    assert d["r"] == pytest.approx(1.0) and d["mean_deg"] == pytest.approx(10.0)
    assert 0 <= d["mean_deg"] < 180
    assert describe(a)["r"] == pytest.approx(0.0, abs=1e-12)
    assert rayleigh_test(a, axial=True)[0] == pytest.approx(4.0)
    u, _ = v_test(a, 190.0, axial=True)  # 190° is the same axis as 10°
    assert u == pytest.approx(math.sqrt(8.0))
    b = describe([100.0, 120.0, 280.0], axial=True)
    ref = math.degrees(stats.circmean(np.radians([200.0, 240.0, 560.0]))) / 2 % 180
    assert b["mean_deg"] == pytest.approx(ref, abs=1e-9)


@pytest.mark.parametrize("bad", [[], [1.0, float("nan")], [float("inf")], ["x", 3], [[1, 2]]])
def test_bad_input_raises_project_error(bad):
    """NaN, infinite, empty or non-numeric input raises MagretinaError naming the problem."""
    for fn in (describe, rayleigh_test, lambda a: v_test(a, 0.0)):
        with pytest.raises(MagretinaError):
            fn(bad)


def test_mean_ci_coverage_by_simulation():
    """Zar's interval (eqs. 26.24-26.25) covers the true mean in ≈95% of von Mises samples
    (κ = 2, n = 20, 400 samples, seeded): within 3 binomial SE (0.033) of 0.95."""
    rng = np.random.default_rng(1)
    hit = 0
    for _ in range(400):
        a = np.degrees(rng.vonmises(0.0, 2.0, 20)) % 360
        lo, hi = st.mean_ci(a)
        hit += ((0.0 - lo) % 360.0) <= ((hi - lo) % 360.0)
    assert abs(hit / 400 - 0.95) < 3 * math.sqrt(0.95 * 0.05 / 400)


def _size(fn, reps=400, seed=2):
    rng = np.random.default_rng(seed)
    return sum(fn(rng) < 0.05 for _ in range(reps)) / reps


@pytest.mark.parametrize("name,fn", [
    ("rayleigh", lambda rng: rayleigh_test(rng.uniform(0, 360, 15))[1]),
    ("v", lambda rng: v_test(rng.uniform(0, 360, 15), 40.0)[1]),
    ("watson-williams", lambda rng: st.watson_williams(
        np.degrees(rng.vonmises(1.0, 3.0, 15)), np.degrees(rng.vonmises(1.0, 3.0, 15)))["p"]),
    ("u2", lambda rng: st.watson_u2(np.degrees(rng.vonmises(1.0, 1.0, 15)),
                                    np.degrees(rng.vonmises(1.0, 1.0, 15)))["p"]),
    ("moore", lambda rng: st.moore_paired(rng.uniform(0, 360, 15), rng.uniform(0, 360, 15))["p"]),
    ("hotelling", lambda rng: st.hotelling_second_order(
        *(lambda t, r: (r * np.cos(t), r * np.sin(t)))(rng.uniform(0, 2 * np.pi, 15),
                                                       rng.uniform(0.3, 1, 15)))["p"]),
])
def test_sizes_under_the_null(name, fn):
    """False-positive rate at α = 0.05 under each test's null hypothesis (uniform angles;
    equal von Mises samples for the two-sample tests), 400 seeded simulations of n = 15:
    within 3 binomial SE (0.033) of 0.05 (simulated data with known parameters)."""
    rate = _size(fn)
    assert abs(rate - 0.05) < 3 * math.sqrt(0.05 * 0.95 / 400), (name, rate)


def test_moore_monte_carlo_p_matches_chi_square_form():
    """Moore's p by Monte Carlo of the exact null and by its χ²₂ form agree within 3 MC SE
    at n = 30 (both estimate the same tail probability)."""
    rng = np.random.default_rng(4)
    a, b = rng.uniform(0, 360, 30), (rng.uniform(0, 360, 30))
    r = st.moore_paired(a, b + 0.0)
    p_chi = r["p"]
    p_mc = st.moore_p(r["R_prime"], 30, n_sim=20000, seed=1)
    assert abs(p_mc - p_chi) < 3 * math.sqrt(p_chi * (1 - p_chi) / 20000) + 0.01


def test_power_matches_an_independent_simulation():
    """Power of the V test for von Mises(κ = 0.8) headings toward the true mean, n = 12:
    our machinery against an independent loop with scipy.stats.vonmises draws and
    astropy.stats.vtest, 600 experiments each; the two estimates differ by less than
    3·sqrt(2)·SE (simulated data with known parameters)."""
    from renderer.orientation.power import simulate_power

    def sampler(n, rng):
        return np.degrees(rng.vonmises(math.radians(30.0), 0.8, n))

    ours = simulate_power(sampler, 12, test="v", expected_deg=30.0, n_sim=600, seed=3)
    rs = np.random.RandomState(9)
    hits = 0
    for _ in range(600):
        x = stats.vonmises.rvs(0.8, loc=math.radians(30.0), size=12, random_state=rs)
        hits += float(circstats.vtest(x, math.radians(30.0))) < 0.05
    ref = hits / 600
    se = math.sqrt(ref * (1 - ref) / 600)
    assert abs(ours["power"] - ref) < 3 * math.sqrt(2) * se + 1e-9


def test_animals_needed_is_consistent_with_its_curve():
    """animals_needed returns the smallest evaluated n whose power reaches the target
    (and the one below it does not)."""
    from renderer.orientation.power import animals_needed

    res = animals_needed(lambda n, rng: np.degrees(rng.vonmises(0.0, 1.0, n)), 0.8, 64,
                         test="rayleigh", n_sim=150, seed=1)
    curve = {r["n"]: r["power"] for r in res["curve"]}
    assert curve[res["n"]] >= 0.8
    assert res["n"] - 1 in curve and curve[res["n"] - 1] < 0.8 or res["n"] == 4


def test_bootstrap_interval_contains_sample_mean():
    """Percentile bootstrap interval (Fisher 1993, 8.3) brackets the sample mean, is
    reproducible with a seed, and the r interval brackets r."""
    a = np.degrees(np.random.default_rng(2).vonmises(0.3, 2.0, 25))
    b1, b2 = st.bootstrap_ci(a, seed=4), st.bootstrap_ci(a, seed=4)
    assert b1 == b2
    d = describe(a)
    lo, hi = b1["mean_deg"]
    assert ((d["mean_deg"] - lo) % 360) <= ((hi - lo) % 360)
    assert b1["r"][0] <= d["r"] <= b1["r"][1] + 1e-12


@pytest.mark.parametrize("kappa", [0.3, 1.0, 4.0, 20.0])
def test_von_mises_helpers_match_scipy(kappa):
    """A1(κ) equals E[cos θ] under scipy.stats.vonmises (numerical expectation, 1e-9), and
    kappa_from_r(r̄) equals scipy.stats.vonmises.fit's maximum-likelihood κ for the same
    sample (loc free, scale fixed at 1; both solve A1(κ) = r̄; 1e-4 relative, the
    optimiser's tolerance)."""
    ref = stats.vonmises.expect(np.cos, args=(kappa,))
    assert float(st.a1(kappa)) == pytest.approx(ref, abs=1e-9)
    x = stats.vonmises.rvs(kappa, size=200, random_state=np.random.RandomState(int(kappa * 10)))
    k_fit, _, _ = stats.vonmises.fit(x, fscale=1)
    r = describe(np.degrees(x))["r"]
    assert st.kappa_from_r(r) == pytest.approx(k_fit, rel=1e-4)


def test_von_mises_smoothing_matches_scipy_density():
    """The behavioural spread applied to a point mass on the grid is the von Mises density
    (scipy.stats.vonmises.pdf) at the grid offsets, normalised on the grid (1e-12)."""
    from renderer.orientation.model import von_mises_smooth

    G = 360
    p = np.zeros(G)
    p[0] = 1.0
    out = von_mises_smooth(p, 3.0)
    ref = stats.vonmises.pdf(2 * np.pi * np.arange(G) / G, 3.0)
    assert np.allclose(out, ref / ref.sum(), atol=1e-12)
