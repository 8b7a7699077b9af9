"""The ``rf-spectrum``, ``rf-table`` and ``spin-plan`` commands (exit codes, outputs, messages).

Reference for the resonance position: the free-electron Larmor frequency γ_e B₀/2π
with CODATA γ_e (scipy.constants), 1.401 MHz at 50 µT.
"""

import json

from renderer.cli import main


def test_spin_plan_prints_method_and_estimate(capsys):
    assert main(["spin-plan", "fad-trp-7plus7", "--field-uT", "50", "--lmax", "16"]) == 0
    out = capsys.readouterr().out
    assert "Hilbert dimension 221184" in out and "method: spectral" in out
    assert "per direction" in out and "TiB" in out


def test_rf_spectrum_writes_json_and_plot(tmp_path, capsys):
    out = tmp_path / "spec.json"
    rc = main(["rf-spectrum", "fad-trp-n5-n1", "--field-uT", "50", "--rf-nT", "300",
               "--f-min-MHz", "1.2", "--f-max-MHz", "1.6", "--points", "5", "--out", str(out)])
    assert rc == 0
    data = json.loads(out.read_text())
    assert len(data["delta_phi_s"]) == 5 and abs(data["larmor_Hz"] - 1.401e6) < 2e3
    assert (tmp_path / "spec.png").stat().st_size > 1000
    assert "not a measurement" in capsys.readouterr().out


def test_bad_input_exit_status_2(tmp_path, capsys):
    base = ["rf-spectrum", "fad-trp-n5-n1", "--field-uT", "50", "--out", str(tmp_path / "x.json")]
    assert main(base + ["--rf-nT", "60000"]) == 2
    assert "weak-perturbation" in capsys.readouterr().err
    assert main(base + ["--rf-nT", "100", "--f-min-MHz", "-1"]) == 2
    assert "--f-min-mhz" in capsys.readouterr().err
    assert main(["rf-table", "fad-trp-n5-n1", "--field-uT", "50", "--rf-nT", "100", "--rf-MHz", "0",
                 "--out", str(tmp_path / "t.npz")]) == 2
    assert "--rf-mhz" in capsys.readouterr().err
    assert main(["spin-plan", "no-such-preset", "--field-uT", "50"]) == 2


def test_rf_lab_table_shows_cost_and_refuses_over_limit(tmp_path, capsys):
    """rf-lab-table prints its plan (solves, memory) first and exits 2 over the memory limit,
    writing nothing (renderer.budget contract, common practice for CLI limits)."""
    out = tmp_path / "lab.npz"
    assert main(["rf-lab-table", "toy-axial-n", "--field-ut", "50", "--rf-nt", "500", "--rf-mhz", "1.4",
                 "--lmax", "4", "--lmax-rf", "2", "--max-memory-gb", "0.000001", "--out", str(out)]) == 2
    cap = capsys.readouterr()
    assert "Floquet solves" in cap.out and "the limit is" in cap.err
    assert not out.exists()
    assert main(["rf-lab-table", "toy-axial-n", "--field-ut", "50", "--rf-nt", "500", "--rf-mhz", "1.4",
                 "--lmax-rf", "3", "--out", str(out)]) == 2
    assert "--lmax-rf = 3" in capsys.readouterr().err
