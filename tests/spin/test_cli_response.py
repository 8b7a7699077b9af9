"""The ``magretina response`` subcommand: compute, show, presets, errors → exit status 2."""

import os

import numpy as np

from renderer.cli import main
from renderer.response.spin_table import SpinTable


def run(argv):
    """The real command line, in process (its parser class, aliases and error handling)."""
    return main(argv)


def test_compute_and_show(tmp_path, monkeypatch, capsys):
    monkeypatch.setenv("MAGRETINA_CACHE", str(tmp_path / "cache"))
    out = tmp_path / "toy.npz"
    assert run(["response", "compute", "toy-axial-n", "--field-uT", "50", "--k-s", "1e6",
                "--lmax", "8", "--out", str(out)]) == 0
    tab = SpinTable.load(out)
    assert tab.lmax == 8 and abs(tab.field_T - 50e-6) < 1e-15
    assert tab.meta["pair_name"] == "toy-axial-n"
    # an axially symmetric tensor along z gives a response that depends on θ only
    lut = tab.sphere_lut(19, 37)
    assert np.max(np.ptp(lut, axis=1)) < 1e-9
    assert run(["response", "show", str(out)]) == 0
    text = capsys.readouterr().out
    assert "anisotropy" in text and "fit residual" in text and "not a measurement" in text
    assert (tmp_path / "toy.png").stat().st_size > 1000
    # the second compute is served from the cache
    assert run(["response", "compute", "toy-axial-n", "--field-uT", "50", "--k-s", "1e6",
                "--lmax", "8", "--out", str(tmp_path / "again.npz")]) == 0
    assert SpinTable.load(tmp_path / "again.npz").meta.get("from_cache") is True
    assert run(["response", "clear-cache"]) == 0
    assert "removed 1" in capsys.readouterr().out


def test_cli_errors_exit_2(tmp_path, capsys):
    from renderer.cli import main

    assert main(["response", "compute", "nope", "--field-uT", "50", "--out", str(tmp_path / "x.npz")]) == 2
    assert "unknown radical-pair preset" in capsys.readouterr().err
    assert main(["response", "compute", "toy-axial-n", "--field-uT", "-1",
                 "--out", str(tmp_path / "x.npz")]) == 2
    assert main(["response", "show", str(tmp_path / "missing.npz")]) == 2
    bad = tmp_path / "bad.npz"
    bad.write_bytes(b"not a table")
    assert main(["response", "show", str(bad)]) == 2
    assert not os.path.exists(tmp_path / "x.npz")


def test_spin_plan_table_lists_accepted_methods_aligned(capsys):
    """spin-plan's table offers only methods --method accepts, in aligned columns.

    At 7 nuclei (dimension 1728) the exact eigenbasis solve is ranked faster than Monte
    Carlo with 256 samples, as measured by bench/spin_plan.py (one propagator step on
    all samples times the step count of renderer.spin.montecarlo.n_time_steps).
    """
    from renderer.commands.spin_rf import PLAN_METHODS

    assert main(["spin-plan", "fad-trp-7n", "--field-ut", "50"]) == 0
    out = capsys.readouterr().out
    lines = out.splitlines()
    i = lines.index("alternatives:")
    table = [ln for ln in lines[i + 1:] if ln.startswith("  ")]
    listed = [ln.split()[0] for ln in table[1:]]
    assert listed and set(listed) <= set(PLAN_METHODS) and "floquet" not in out
    ends = {ln.index("/direction") for ln in table[1:]}
    assert len(ends) == 1
    secs = {}
    from renderer.spin.definition import load_pair
    from renderer.spin.planner import estimate

    for e in estimate(load_pair("fad-trp-7n"), 50e-6, n_samples=256):
        secs[e.method] = e.seconds_per_direction
    assert secs["montecarlo"] > secs["eigenbasis"]
    assert "Monte Carlo costs" in out
