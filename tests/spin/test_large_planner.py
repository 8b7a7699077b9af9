"""Planning large runs, resumable per-direction caching, and tables from any yield function.

References: the spine's table builder :func:`renderer.response.spin_table.compute_spin_table`
(independent code) for the table fit; Hilbert-space dimensions by counting (common
practice: dimension = Π(2I+1) × 4); dense memory = 16 bytes per complex entry.
"""

import numpy as np
import pytest

from renderer.errors import MagretinaError
from renderer.spin import load_pair, singlet_yield
from renderer.response.spin_table import compute_spin_table, compute_table
from renderer.spin.planner import estimate, plan, run_directions, run_key

from conftest import random_pair


def test_plan_for_the_7plus7_preset():
    """Dimension 221184 = 4 · (3·3·2·2³·2) · (3·2⁶); dense eigen needs 6 N² complex numbers
    (terabytes), so the plan picks the bounded-error spectral method and says so."""
    pair = load_pair("fad-trp-7plus7")
    assert pair.dim == 4 * (3 * 3 * 2 * 8 * 2) * (3 * 2**6) == 221184
    p = plan(pair, 151)
    assert p.method == "spectral"
    est = {e.method: e for e in p.estimates}
    assert est["eigenbasis"].memory_bytes == 16 * 6 * pair.dim**2
    assert est["eigenbasis"].memory_bytes > 2**40
    assert "spectral" in p.summary() and "per direction" in p.summary()


def test_plan_small_pair_picks_exact_and_refuses_bad(rng):
    pair = load_pair("fad-trp-n5-n1")
    assert plan(pair, 10).method == "separable"
    unequal = random_pair(rng, k_s=1e6, k_t=2e6)
    assert plan(unequal, 10).method in ("liouville", "montecarlo")
    with pytest.raises(MagretinaError, match="no method fits"):
        plan(unequal, 10, method="spectral")
    with pytest.raises(MagretinaError, match="unknown"):
        plan(pair, 10, method="magic")
    with pytest.raises(MagretinaError, match="no method fits"):
        plan(load_pair("fad-trp-7plus7"), 1, method="eigenbasis")
    assert plan(pair, 10, rf=True).method == "floquet"
    assert all(e.seconds_per_direction > 0 for e in estimate(pair))


def test_run_directions_resumes(tmp_path):
    """An interrupted run keeps finished directions; the rerun computes only the rest."""
    fields = np.arange(15, dtype=float).reshape(5, 3)
    calls = []

    def flaky(b):
        calls.append(b[0])
        if len(calls) == 3:
            raise KeyboardInterrupt
        return float(b.sum())

    with pytest.raises(KeyboardInterrupt):
        run_directions(flaky, fields, "k1", run_dir=tmp_path)
    calls.clear()
    done = []

    def good(b):
        calls.append(b[0])
        return float(b.sum())

    out = run_directions(good, fields, "k1", run_dir=tmp_path, progress=done.append)
    assert np.allclose(out, fields.sum(axis=1))
    assert len(calls) == 3 and sum(done) == 5
    assert run_key({"a": 1}) != run_key({"a": 2})


def test_compute_table_matches_spine_builder(tmp_path):
    """The resumable table builder with the exact solver gives the spine's coefficients."""
    pair = load_pair("fad-trp-n5-n1")
    ref = compute_spin_table(pair, 50e-6, lmax=6, use_cache=False)
    tab = compute_table(lambda b: singlet_yield(pair, b), 50e-6, {"pair": pair.describe()},
                        lmax=6, run_dir=tmp_path)
    assert np.max(np.abs(tab.coeffs - ref.coeffs)) < 1e-12
    assert tab.evaluate_dirs(np.array([[0.0, 0.0, 1.0]]))[0] == pytest.approx(
        singlet_yield(pair, [0, 0, 50e-6]), abs=2 * tab.meta["residual_max"] + 1e-12)
