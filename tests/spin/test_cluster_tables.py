"""Spin tables on a Dask cluster (renderer.response.cluster.compute_spin_tables): a sweep's
tables solved on a 2-process LocalCluster, and through a scheduler address, equal the
local builder's tables bitwise, are cached atomically one file per table, and the plan
is printed before any solve.

External anchor: with one isotropic nucleus (I = 1/2) on radical A, every direction of
the table equals the in-field closed form of the singlet yield derived with sympy from
the eigenbasis formula of Timmel, Till, Brocklehurst, McLauchlan & Hore 1998 (Mol. Phys.
95:71; see test_closed_forms.py), to 1e-11 (the same round-off margin as there).
"""

import os

import numpy as np
import pytest

from renderer.response import cache
from renderer.response.spin_table import CACHE_KIND, compute_spin_table
from renderer.spin import GAMMA_E, RAD_S_PER_MT, Nucleus, Radical, RadicalPair
from conftest import random_pair

pytest.importorskip("dask.distributed")


@pytest.fixture
def own_cache(tmp_path, monkeypatch):
    monkeypatch.setenv("MAGRETINA_CACHE", str(tmp_path / "cache"))
    return tmp_path / "cache"


def _same(a, b):
    for name in ("coeffs", "nodes", "values"):
        assert np.array_equal(getattr(a, name), getattr(b, name)), name
    skip = {"created_utc", "from_cache"}
    assert {k: v for k, v in a.meta.items() if k not in skip} == \
        {k: v for k, v in b.meta.items() if k not in skip}


def test_sweep_on_localcluster_equals_local_tables(own_cache, rng, capsys):
    """Three tables (two pairs, two field strengths) on LocalCluster(2 processes): arrays
    and metadata (but the creation time) bitwise those of compute_spin_table; the plan
    (directions, memory per worker, time) comes before the tables; each table is one
    cache file; a second call is served from the cache without a cluster."""
    from renderer.response.cluster import compute_spin_tables

    iso = RadicalPair(Radical([Nucleus.isotropic(0.5, 0.8)]), Radical(), k_s=1e6, k_t=1e6)
    aniso = random_pair(rng, spins_a=(0.5,), spins_b=(0.5,))
    specs = [{"pair": iso, "field_T": 50e-6, "lmax": 4},
             {"pair": aniso, "field_T": 50e-6, "lmax": 4, "meta": {"label": "a"}},
             {"pair": aniso, "field_T": 120e-6, "lmax": 4}]
    done = []
    got = compute_spin_tables(specs, jobs=2, progress=done.append, tasks_per_worker=3)
    out = capsys.readouterr().out
    assert "3 (0 in the cache), on 2 Dask worker(s)" in out
    assert out.count("directions, ~") == 3 and "per worker" in out and "total:" in out
    for sp, t in zip(specs, got):
        ref = compute_spin_table(sp["pair"], sp["field_T"], lmax=4, use_cache=False,
                                 meta=sp.get("meta"))
        _same(t, ref)
    assert sum(done) == sum(len(t.nodes) for t in got)
    files = sorted(os.listdir(own_cache / CACHE_KIND))
    assert files == sorted(f"{t.meta['cache_key']}.npz" for t in got)
    assert not [f for f in files if f.endswith(".tmp")]
    # the closed form (module docstring): a one-nucleus isotropic pair, |B| = 50 uT
    from test_closed_forms import sympy_in_field_formula

    f = sympy_in_field_formula()
    expected = float(f(0.8 * RAD_S_PER_MT, GAMMA_E * 50e-6, 1e6))
    assert np.max(np.abs(got[0].values - expected)) < 1e-11
    again = compute_spin_tables(specs, jobs=2)
    assert "3 (3 in the cache)" in capsys.readouterr().out
    for a, b in zip(again, got):
        _same(a, b)
        assert a.meta["from_cache"]


def test_scheduler_address_works_the_same(own_cache, rng, capsys):
    """An existing scheduler (a LocalCluster started here, reached by its address) gives
    the same table as the local builder."""
    from dask.distributed import LocalCluster

    from renderer.response.cluster import compute_spin_tables

    pair = random_pair(rng, spins_a=(0.5,), spins_b=())
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                      dashboard_address=None) as lc:
        (t,) = compute_spin_tables([{"pair": pair, "field_T": 50e-6, "lmax": 2}],
                                   scheduler=lc.scheduler_address, use_cache=False)
    assert "on 2 Dask worker(s)" in capsys.readouterr().out
    _same(t, compute_spin_table(pair, 50e-6, lmax=2, use_cache=False))
    assert not (own_cache / CACHE_KIND).exists()


def test_bad_spec_is_refused_before_any_cluster(own_cache):
    from renderer.errors import MagretinaError
    from renderer.response.cluster import compute_spin_tables

    pair = RadicalPair(Radical([Nucleus.isotropic(0.5, 0.8)]), Radical(), k_s=1e6, k_t=1e6)
    with pytest.raises(MagretinaError, match="l_max = 3"):
        compute_spin_tables([{"pair": pair, "field_T": 50e-6, "lmax": 3}])
    with pytest.raises(MagretinaError, match="needs 'pair' and 'field_T'"):
        compute_spin_tables([{"pair": pair}])


def test_cli_dask_executor_same_table(own_cache, tmp_path, capsys):
    """``magretina response compute --executor dask --jobs 2`` writes the table the local
    run writes (arrays bitwise; the plan is printed)."""
    from renderer.cli import main
    from renderer.response.spin_table import SpinTable

    args = ["response", "compute", "toy-axial-n", "--field-uT", "50", "--k-s", "1e6",
            "--lmax", "4", "--no-cache"]
    assert main(args + ["--out", str(tmp_path / "local.npz")]) == 0
    assert main(args + ["--out", str(tmp_path / "dask.npz"), "--executor", "dask",
                        "--jobs", "2"]) == 0
    assert "Dask worker(s)" in capsys.readouterr().out
    a, b = SpinTable.load(tmp_path / "local.npz"), SpinTable.load(tmp_path / "dask.npz")
    _same(a, b)
    assert main(args + ["--out", str(tmp_path / "x.npz"), "--scheduler", "tcp://h:1"]) == 2
