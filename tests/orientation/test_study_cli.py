"""The [orientation] study table, the worked example, the `magretina orient` command,
the headings CSV reader and the report section.

The worked example (renderer/study/examples/orientation_study.toml, an invented
scenario) is run at tiny size.  Its outcomes are checked against the facts the
model tests establish with their sources: rotation equivariance (common practice),
reversal of an axial compass but not a polarity compass under an inverted vertical
component (Wiltschko & Wiltschko 1972, Science 176:62), no orientation in a
compensated field, and spread shrinking with counts as the Fisher information
grows (J ∝ photon count for Poisson noise, common practice).
"""

import io
import json
import re
from pathlib import Path

import numpy as np
import pytest

from renderer.cli import main
from renderer.errors import ConfigError, MagretinaError
from renderer.study import load_study

EXAMPLE = Path(__file__).resolve().parents[2] / "renderer" / "study" / "examples" / \
    "orientation_study.toml"


def tiny(text, extra=""):
    """The example at tiny size: 72-heading grid, few receptors, few simulations."""
    t = text.replace("headings = 180", "headings = 72")
    t = t.replace("density = 0.005", "density = 0.003")
    t = t.replace("monte_carlo = 200", "monte_carlo = 40")
    t = t.replace("n_max = 64", "n_max = 16").replace("n_sim = 100", "n_sim = 40")
    return t + extra


def trimmed(text, drop_conditions=(), drop_hypotheses=()):
    """The study text without some conditions or hypotheses (smaller, faster tests)."""
    for c in drop_conditions:
        text = re.sub(r'\[\[orientation\.condition\]\]\nname = "' + re.escape(c)
                      + r'"\nsteps = \[.*\]\n', "", text)
    for h in drop_hypotheses:
        text = re.sub(r'\[\[orientation\.hypothesis\]\]\nname = "' + re.escape(h)
                      + r'"\n(?:(?!\[).*\n)*', "", text)
    return text


@pytest.fixture(scope="module")
def study_file(tmp_path_factory):
    d = tmp_path_factory.mktemp("orient")
    p = d / "study.toml"
    p.write_text(tiny(EXAMPLE.read_text()))
    return p


@pytest.fixture(scope="module")
def predicted(study_file):
    from renderer.study.orientation import predict_plan

    return predict_plan(load_study(study_file))


def _row(doc, h, c, shot=0):
    return next(r for r in doc["shots"][shot]["rows"] if r["hypothesis"] == h and r["condition"] == c)


def _d(a, b):
    return abs((a - b + 180.0) % 360.0 - 180.0)


def test_example_has_six_conditions_three_hypotheses_and_expected_outcomes(predicted):
    """6 × 3 predictions; rotated +90 → preferred + 90; inverted: inclination compass
    reverses, polarity compass does not; compensated: uniform (r < 1e-9).  The rotated
    condition matches to 1e-4° (the rotated IGRF vector equals the shifted heading
    grid only to rounding, and exp(−D) with D ~ 1e4 nats amplifies rounding in D)."""
    per, doc = predicted
    s = doc["shots"][0]
    assert len(s["conditions"]) == 6 and len(s["hypotheses"]) == 3 and len(s["rows"]) == 18
    assert "not measurements" in s["caution"]
    assert _d(_row(doc, "inclination compass", "north rotated +90")["mean_deg"], 290.0) < 1e-4
    assert _d(_row(doc, "inclination compass", "vertical inverted")["mean_deg"], 20.0) < 1e-3
    assert _d(_row(doc, "polarity compass", "vertical inverted")["mean_deg"], 200.0) < 5.0
    for h in ("inclination compass", "polarity compass", "disordered receptors"):
        assert _row(doc, h, "compensated")["r"] < 1e-9
        assert "mc_mean_deg" in _row(doc, h, "natural")
    kinds = {p["test"] for p in s["power"]}
    assert kinds == {"v", "model comparison"}


def test_sweep_over_receptor_counts(tmp_path):
    """A sweep axis over orientation.receptors.flux_per_s gives one prediction per shot, and
    the sensory spread shrinks with counts: at 10× the photons the circular SD falls by
    ≈ sqrt(10) (J ∝ counts; within 30 % since the lower count is not yet in the Gaussian
    limit and the grid is 1°)."""
    from renderer.study.orientation import predict_plan

    p = tmp_path / "sweep.toml"
    text = trimmed(tiny(EXAMPLE.read_text()), ("north rotated +90", "vertical inverted",
                                               "horizontal reversed", "compensated",
                                               "field doubled"),
                   ("polarity compass", "disordered receptors"))
    assert text.count("[[orientation.condition]]") == 1
    assert text.count("[[orientation.hypothesis]]") == 1
    p.write_text(text.replace("headings = 72", "headings = 360")
                 + '\n[[sweep.axis]]\nkey = "orientation.receptors.flux_per_s"\n'
                   'values = [1.0e5, 1.0e6]\n')
    _, doc = predict_plan(load_study(p), monte_carlo=0, power=False)
    assert len(doc["shots"]) == 2
    sd = [_row(doc, "inclination compass", "natural", k)["sensory_circular_sd_deg"]
          for k in (0, 1)]
    assert sd[0] / sd[1] == pytest.approx(10.0 ** 0.5, rel=0.3)


def test_config_errors_are_listed(tmp_path):
    """Unknown keys, unknown actions and unknown responses are reported with key paths."""
    text = tiny(EXAMPLE.read_text())
    text = text.replace("monte_carlo = 40", "monte_carlo = 40\nwobble = 1")
    text = text.replace('{ action = "invert" }', '{ action = "flip" }')
    text = text.replace('response = "signed"', 'response = "nosuch"')
    p = tmp_path / "bad.toml"
    p.write_text(text)
    with pytest.raises(ConfigError) as e:
        load_study(p)
    msg = str(e.value)
    assert "orientation.wobble: unknown key" in msg
    assert "orientation.condition[2].steps[0].action = 'flip'" in msg
    assert "orientation.hypothesis[1].response = 'nosuch'" in msg


def _write_headings(path, doc, hypothesis, n=20, seed=1):
    """Headings drawn from one hypothesis' predicted distributions (grid cells of the JSON
    rows are not stored there, so draw from a von Mises about each predicted mean)."""
    rng = np.random.default_rng(seed)
    lines = ["animal,condition,trial,heading_deg"]
    for c in doc["shots"][0]["conditions"]:
        r = _row(doc, hypothesis, c["name"])
        for a in range(n):
            m = r["mean_deg"]
            h = rng.uniform(0, 360) if m is None or m != m else \
                (m + np.degrees(rng.vonmises(0.0, 2.0))) % 360
            lines.append(f"b{a},{c['name']},1,{h:.2f}")
    path.write_text("\n".join(lines) + "\n")


def test_cli_predict_and_analyse(study_file, predicted, tmp_path, capsys):
    """`orient predict --json` and `orient analyse --json`; with headings that follow the
    inclination compass, the polarity compass is rejected (ΔAIC > 2) and the output says
    which hypotheses the data cannot tell apart."""
    assert main(["orient", "predict", str(study_file), "--json", "--no-power",
                 "--monte-carlo", "0"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert len(doc["shots"][0]["rows"]) == 18
    csvp = tmp_path / "headings.csv"
    _write_headings(csvp, predicted[1], "inclination compass")
    out = tmp_path / "out"
    assert main(["orient", "analyse", str(study_file), str(csvp), "--json", "--bootstrap", "50",
                 "--out", str(out)]) == 0
    res = json.loads(capsys.readouterr().out)
    rows = {r["hypothesis"]: r for r in res["comparison"]["rows"]}
    assert rows["polarity compass"]["delta_aic"] > 2.0
    assert res["comparison"]["best"] in ("inclination compass", "disordered receptors")
    assert (out / "orientation-analysis.json").is_file()
    assert (out / "orientation-observed.png").is_file()
    assert main(["orient", "analyse", str(study_file), str(csvp), "--bootstrap", "0",
                 "--no-fit"]) == 0
    text = capsys.readouterr().out
    assert "Rayleigh" in text and "Model comparison" in text and "AIC" in text


@pytest.mark.parametrize("content,needle", [
    ("animal,heading_deg\nb1,10\n", "missing column(s) condition"),
    ("condition,heading_deg\nnatural,north\n", "line 2: heading_deg = 'north' is not a number"),
    ("condition,heading_deg\nnatural,361\n", "out of range"),
    ("condition,heading_deg\n,10\n", "line 2: empty condition"),
    ("condition,heading_deg\nnatural,\n", "empty heading_deg"),
    ("condition,heading_deg\nnowhere,10\n", "not in the study"),
    ("condition,heading_deg\n", "no rows"),
])
def test_bad_headings_files_exit_2(study_file, tmp_path, capsys, content, needle):
    """Bad headings files: exit status 2, one line naming the file, line and value."""
    p = tmp_path / "h.csv"
    p.write_text(content)
    assert main(["orient", "analyse", str(study_file), str(p)]) == 2
    err = capsys.readouterr().err
    assert needle in err and "Traceback" not in err


def test_headings_reader_refuses_binary_and_axial_mix(tmp_path):
    from renderer.orientation.headings import read_headings

    p = tmp_path / "b.csv"
    p.write_bytes(b"condition,heading_deg\n\xff\xfe,1\n")
    with pytest.raises(MagretinaError, match="not UTF-8"):
        read_headings(p)
    p.write_text("condition,heading_deg,axial\na,10,yes\na,20,no\n")
    with pytest.raises(MagretinaError, match="mixes axial"):
        read_headings(p)
    p.write_text("# comment\ncondition,heading_deg,axial\na,10,yes\na,200,yes\n")
    h = read_headings(p)
    assert h.axial == {"a": True} and h.angles("a") == [10.0, 200.0]


def test_plots_decode(predicted, tmp_path):
    """Compass and power figures are written and contain drawing (imageio decode)."""
    import imageio.v3 as iio

    from renderer.orientation.plots import plot_conditions, plot_power

    per, doc = predicted
    shot, preds = per[0]
    conds = [c["name"] for c in doc["shots"][0]["conditions"]]
    obs = {"natural": [190.0, 200.0, 215.0, 185.0, 205.0]}
    p1 = plot_conditions(tmp_path / "c.png", conds, preds, obs, rose=True)
    curves = {"x": doc["shots"][0]["power"][0]["curve"]}
    p2 = plot_power(tmp_path / "p.png", curves, target=0.8)
    for p in (p1, p2):
        img = iio.imread(p)
        assert img.ndim == 3 and img.std() > 5
    with pytest.raises(MagretinaError):
        plot_conditions(tmp_path / "x.png", [])


def test_study_run_writes_orientation_outputs_and_report(study_file, tmp_path):
    """`magretina run` of the example writes orientation.json/.csv and figures; the HTML
    report shows the orientation section with decodable images."""
    from renderer.report import build_report
    from renderer.study.runner import run_study

    text = study_file.read_text().replace("[render]", "[views.world]\nkind = \"world-panorama\"\n"
                                          "width = 32\n\n[render]")
    # two conditions and two hypotheses are enough to exercise the outputs
    text = trimmed(text, ("vertical inverted", "horizontal reversed", "compensated",
                          "field doubled"), ("disordered receptors",))
    assert text.count("[[orientation.condition]]") == 2
    assert text.count("[[orientation.hypothesis]]") == 2
    p = tmp_path / "s.toml"
    p.write_text(text)
    out = tmp_path / "run"
    run_study(str(p), str(out), jobs=1, progress=False, stream=io.StringIO())
    for name in ("orientation.json", "orientation.csv", "orientation-shot000.png"):
        assert (out / name).is_file(), name
    first = (out / "orientation.json").read_bytes()
    run_study(str(p), str(out), jobs=1, progress=False, stream=io.StringIO())
    assert (out / "orientation.json").read_bytes() == first  # reruns are byte-stable
    html = Path(build_report(out)).read_text()
    assert "Orientation experiment" in html
    assert len(re.findall(r"data:image/png;base64", html)) >= 2


def test_study_without_orientation_table_is_refused(tmp_path, capsys):
    """`orient predict` on a study with no [orientation] table: exit 2 and a message."""
    p = tmp_path / "plain.toml"
    p.write_text('[study]\nname = "plain"\n[field]\nmodel = "fixed"\ntotal_uT = 50.0\n'
                 'inclination_deg = 60.0\n')
    assert main(["orient", "predict", str(p)]) == 2
    assert "no [orientation] table" in capsys.readouterr().err
