"""Spin response tables: symmetry halving, residual, saving, disk cache."""

import threading

import numpy as np
import pytest

from renderer.errors import MagretinaError
from renderer.response import REGISTRY, cache
from renderer.response.harmonic import lebedev_grid
from renderer.response.spin_table import SpinTable, antipodal_pairs, compute_spin_table
from renderer.spin import Nucleus, Radical, RadicalPair, load_pair, singlet_yield


@pytest.fixture
def pair():
    return RadicalPair(Radical([Nucleus.from_principal(1, [-0.1, -0.09, 1.75])]),
                       Radical([Nucleus(0.5, [[0.2, 0.05, 0], [0.05, -0.1, 0.1], [0, 0.1, 0.3]])]),
                       k_s=1e6, k_t=1e6)


def test_table_matches_direct_yields(pair, tmp_path):
    """The table at its nodes reproduces singlet_yield (only half the nodes are solved; the
    others come from Φ(B) = Φ(−B)); at random directions the expansion is within the
    reported residual scale."""
    tab = compute_spin_table(pair, 50e-6, lmax=12, use_cache=False)
    assert tab.meta["n_solved"] * 2 == tab.meta["n_directions"]
    np.testing.assert_allclose(tab.values, singlet_yield(pair, 50e-6 * tab.nodes), atol=1e-12)
    d = np.random.default_rng(0).normal(size=(20, 3))
    d /= np.linalg.norm(d, axis=1, keepdims=True)
    err = np.max(np.abs(tab.evaluate_dirs(d) - singlet_yield(pair, 50e-6 * d)))
    assert err < 10 * tab.meta["residual_max"] + 1e-12
    assert tab.is_even
    s = tab.summary()
    assert s["min"] <= s["samples_min"] + 1e-12 and s["max"] >= s["samples_max"] - 1e-12
    p = tab.save(tmp_path / "t.npz")
    back = SpinTable(path=p)
    np.testing.assert_array_equal(back.coeffs, tab.coeffs)
    assert back.meta["residual_max"] == tab.meta["residual_max"]
    assert REGISTRY["spin-table"] is SpinTable


def test_residual_shrinks_with_degree(pair):
    r = [compute_spin_table(pair, 50e-6, lmax=l, use_cache=False).meta["residual_max"] for l in (2, 6, 12)]
    assert r[0] > r[1] > r[2]


def test_antipodal_pairs_cover_grid():
    nodes, _ = lebedev_grid(35)
    keep, partner = antipodal_pairs(nodes)
    assert len(keep) * 2 == len(nodes)
    np.testing.assert_allclose(nodes[keep], -nodes[partner], atol=1e-14)
    assert len(set(keep) | set(partner)) == len(nodes)


def test_cache_hit_clear_and_concurrent_writers(pair, tmp_path, monkeypatch):
    """The cache key covers every parameter; entries appear atomically, so concurrent writers
    of one key leave one complete file and no temporary files."""
    monkeypatch.setenv("MAGRETINA_CACHE", str(tmp_path / "c"))
    a = compute_spin_table(pair, 50e-6, lmax=4)
    b = compute_spin_table(pair, 50e-6, lmax=4)
    assert b.meta.get("from_cache") and not a.meta.get("from_cache")
    np.testing.assert_array_equal(a.coeffs, b.coeffs)
    c = compute_spin_table(pair.with_rates(2e6), 50e-6, lmax=4)
    d = compute_spin_table(pair, 51e-6, lmax=4)
    assert len({a.meta["cache_key"], c.meta["cache_key"], d.meta["cache_key"]}) == 3
    folder = tmp_path / "c" / "spin-tables"
    assert len(list(folder.glob("*.npz"))) == 3
    assert cache.clear_cache() == 3
    errors = []

    def work():
        try:
            compute_spin_table(pair, 50e-6, lmax=4)
        except Exception as exc:  # pragma: no cover - reported below
            errors.append(exc)

    threads = [threading.Thread(target=work) for _ in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert not errors
    assert [p.suffix for p in folder.iterdir()] == [".npz"]
    assert compute_spin_table(pair, 50e-6, lmax=4).meta.get("from_cache")


def test_bad_table_parameters(pair):
    with pytest.raises(MagretinaError, match="even"):
        compute_spin_table(pair, 50e-6, lmax=5, use_cache=False)
    with pytest.raises(MagretinaError, match="out of range"):
        compute_spin_table(pair, -1.0, use_cache=False)
    with pytest.raises(MagretinaError, match="Lebedev order"):
        compute_spin_table(pair, 50e-6, lmax=10, order=13, use_cache=False)


def test_preset_table_axial_average_is_legendre():
    """A preset table plugs into the axial interface: its free-rotation average about z is a
    Legendre series with even terms only, whose mean equals the table's mean."""
    tab = compute_spin_table(load_pair("fad-trp-n5-n1"), 50e-6, lmax=8, use_cache=False)
    ax = tab.axial_average()
    assert ax.is_even and abs(ax.coeffs[0] - tab.mean()) < 1e-14
    assert ax.lut(101).shape == (101,)
    assert np.all(np.isfinite(tab.vmf_average(5.0).sphere_lut(10, 20)))
