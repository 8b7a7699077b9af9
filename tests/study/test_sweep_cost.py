"""The cost of checking a sweep scales with its distinct values per table, not shots x study.

A sweep value only changes the top-level table it is substituted into, so only the
validation steps reading that table are re-run, and each distinct table value is
checked once (common practice: memoise a pure check on its inputs).  The checks
count calls of the table checker instead of timing anything (project rule: no
timing assertions).  The frame limit (renderer.budget) must refuse a sweep that is
too large before a single value is checked.
"""

import pytest

from renderer.errors import ConfigError
from renderer.study import config as cfgmod
from renderer.study import expand
from renderer.study import load_study

BASE = """
[study]
name = "cost"
seed = 1

[field]
model = "fixed"
total_uT = 50.0
inclination_deg = 60.0

[views.world]
kind = "world-panorama"
width = 16

[sequence]
kind = "still"
frames = {frames}

[[sweep.axis]]
key = "render.gain"
linspace = [0.5, 1.5, {n_gain}]
{more}
"""

POSE_AXIS = """
[[sweep.axis]]
key = "pose.yaw_deg"
linspace = [0.0, 90.0, {n_yaw}]
"""


def _counting(monkeypatch):
    """Count calls of the per-table checks, by table, while the sweep is planned."""
    calls = {}
    real_table, real_resp, real_layout = (cfgmod.check_table, cfgmod.check_response,
                                          cfgmod._check_layout)

    def table(path, *a, **k):
        calls[path] = calls.get(path, 0) + 1
        return real_table(path, *a, **k)

    def resp(path, *a, **k):
        calls["response:" + path] = calls.get("response:" + path, 0) + 1
        return real_resp(path, *a, **k)

    def layout(*a, **k):
        calls["layout"] = calls.get("layout", 0) + 1
        return real_layout(*a, **k)

    monkeypatch.setattr(cfgmod, "check_table", table)
    monkeypatch.setattr(cfgmod, "check_response", resp)
    monkeypatch.setattr(cfgmod, "_check_layout", layout)
    return calls


def test_grid_checks_each_distinct_table_value_once(tmp_path, monkeypatch):
    """A 20 x 10 grid (200 shots) checks [render] 20 times and [pose] 10 times, and never
    re-checks the tables no axis touches (response, layout, output...)."""
    p = tmp_path / "s.toml"
    p.write_text(BASE.format(frames=1, n_gain=20, more=POSE_AXIS.format(n_yaw=10)))
    study = load_study(p)
    calls = _counting(monkeypatch)
    pl = expand.plan(study)
    assert len(pl.shots) == 200
    assert calls.get("render") == 20
    assert calls.get("pose") == 10
    for untouched in ("output", "study", "scene", "display", "layout", "response:response"):
        assert untouched not in calls, (untouched, calls)
    # Every shot still carries its own value, resolved as a full validation would.
    full = []
    cfg = cfgmod.validate(expand.set_key_path(expand.set_key_path(
        study.raw, "render.gain", pl.shots[57].params["render_gain"]), "pose.yaw_deg",
        pl.shots[57].params["pose_yaw_deg"]), study.base_dir, full)
    assert not full
    assert cfgmod.canonical_json(cfg) == cfgmod.canonical_json(pl.shots[57].config)


def test_bad_values_still_reported_with_axis_and_position(tmp_path):
    """The cheap check still finds a bad value and names its axis and position."""
    p = tmp_path / "s.toml"
    p.write_text(BASE.format(frames=1, n_gain=3, more="").replace(
        "linspace = [0.5, 1.5, 3]", "values = [1.0, -2.0, 3.0]"))
    with pytest.raises(ConfigError) as e:
        expand.plan(load_study(p))
    msg = str(e.value)
    assert "sweep.axis[0]" in msg and "value 1 = -2" in msg and "render.gain" in msg


def test_100000_values_refused_by_frame_limit_before_any_check(tmp_path, monkeypatch):
    """100,000 values x 2 frames exceed the default frame limit (100,000): refused with
    the figure and the limit before a single value is substituted and checked."""
    p = tmp_path / "s.toml"
    p.write_text(BASE.format(frames=2, n_gain=100000, more=""))
    study = load_study(p)
    calls = _counting(monkeypatch)
    with pytest.raises(Exception) as e:
        expand.plan(study)
    assert "200000 frames" in str(e.value) and "100000" in str(e.value)
    assert calls == {}


def test_100000_values_checked_once_each(tmp_path, monkeypatch):
    """100,000 values of one frame each (at the frame limit) are checked with 100,000
    [render] checks in all -- not 2 x 100,000 whole-study validations."""
    p = tmp_path / "s.toml"
    p.write_text(BASE.format(frames=1, n_gain=100000, more=""))
    study = load_study(p)
    calls = _counting(monkeypatch)
    monkeypatch.setattr(expand.sequences, "check_sequence",
                        lambda *a, **k: pytest.fail("sequence re-checked"))
    ax = expand.collect_axes(study.resolved["sweep"], [])
    cache, problems = {}, []
    expand.check_axis_values(study.raw, study.base_dir, ax, problems, base=study.resolved,
                             cache=cache)
    assert not problems
    assert calls == {"render": 100000}


@pytest.mark.parametrize("master", [0, 1, 42, 2**32 + 5, 2**63 - 1])
def test_shot_seeds_equal_numpy_seedsequence(master):
    """The all-children-at-once seeds are NumPy's SeedSequence(master).spawn(n)[i]
    .generate_state(1, uint64)[0] bit for bit (NumPy's own implementation is the
    reference; the derivation is the one study.json documents)."""
    import numpy as np

    n = 1500
    ref = [int(c.generate_state(1, np.uint64)[0])
           for c in np.random.SeedSequence(master).spawn(n)]
    assert expand.shot_seeds(master, n) == ref
    assert expand.shot_seeds(master, 0) == []


def test_broken_study_with_a_huge_sweep_reports_the_frame_limit_unchecked(tmp_path, monkeypatch):
    """A study with an error elsewhere and a sweep over the frame limit (100,000 values x 2
    frames) lists both problems without checking a single value (this took minutes when
    every value was checked first)."""
    p = tmp_path / "s.toml"
    p.write_text(BASE.format(frames=2, n_gain=100000, more="").replace(
        'name = "cost"', "name = 5"))
    calls = _counting(monkeypatch)
    with pytest.raises(ConfigError) as e:
        load_study(p)
    msg = str(e.value)
    assert "study.name" in msg and "200000 frames" in msg
    assert calls.get("render") == 1  # the study's own [render], no sweep value
