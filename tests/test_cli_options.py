"""Option names, help and suggestions of the ``magretina`` command line.

One style of long options (lower case, hyphens, the unit as the last word), old
spellings kept as hidden aliases, case-insensitive matching, every default shown in
``--help``, every option with a help text, and "did you mean" suggestions for
misspelt options, subcommands and study keys.  The suggestions are those of the
standard library's :func:`difflib.get_close_matches` (Python documentation, difflib),
which the tests use as the reference.
"""

import argparse
import datetime as dt
import difflib
import json

import pytest

from renderer.cli import build_parser, main
from renderer.commands._common import OPTION_STYLE, HelpFormatter


def run(argv, capsys):
    rc = main(argv)
    out = capsys.readouterr()
    return rc, out.out, out.err


def _all_parsers():
    """(prog, parser) of the top parser and every (sub)subcommand."""
    out = []
    todo = [build_parser()]
    while todo:
        p = todo.pop()
        out.append((p.prog, p))
        for act in p._actions:
            if isinstance(act, argparse._SubParsersAction):
                todo.extend(act.choices.values())
    return out


def test_every_option_follows_the_style_and_has_help():
    """Each long option is lower case with hyphens and has a help text (no silent options)."""
    seen = 0
    for prog, p in _all_parsers():
        for act in p._actions:
            if isinstance(act, argparse._SubParsersAction):
                continue
            for s in act.option_strings:
                if s.startswith("--"):
                    assert OPTION_STYLE.match(s), f"{prog}: {s}"
                    seen += 1
            assert act.help, f"{prog}: {act.option_strings or act.dest} has no help text"
    assert seen > 80


def test_help_shows_every_default():
    """A non-empty default appears in the help line of its option."""
    for prog, p in _all_parsers():
        fmt = HelpFormatter(prog)
        for act in p._actions:
            if not act.option_strings or act.default in (None, False, argparse.SUPPRESS) \
                    or act.nargs == 0:
                continue
            text = fmt._expand_help(act)
            assert "default" in text.lower(), f"{prog} {act.option_strings}: {text}"


def test_field_help_lists_defaults(capsys):
    with pytest.raises(SystemExit):
        main(["field", "--help"])
    out = capsys.readouterr().out
    assert "(default: igrf)" in out and "(default: 0.0)" in out and "today" in out


def test_style_is_enforced_for_new_options():
    """A later option spelt with capitals is refused when the parser is built."""
    p = build_parser()
    with pytest.raises(ValueError, match="option style"):
        p.add_argument("--rf-MHz", type=float, help="x")


def test_old_spellings_are_hidden_aliases(capsys):
    """--lat/--lon/--yaw and --field-uT still parse; help shows only the new names."""
    rc, out, err = run(["field", "--lat", "52", "--lon", "9.5", "--date", "2026-06-01", "--json"],
                       capsys)
    assert rc == 0, err
    ref = json.loads(out)
    rc, out, err = run(["field", "--lat-deg", "52", "--lon-deg", "9.5", "--date", "2026-06-01",
                        "--json"], capsys)
    assert rc == 0 and json.loads(out) == ref
    with pytest.raises(SystemExit):
        main(["render", "--help"])
    helptext = capsys.readouterr().out
    assert "--yaw-deg" in helptext and "--field-ut" in helptext
    assert "--yaw " not in helptext and "--field-uT" not in helptext and "--lat " not in helptext
    ns = build_parser().parse_args(["render", "--field-uT", "48", "--inclination", "60",
                                    "--yaw", "10"])
    assert ns.field_ut == 48 and ns.inclination_deg == 60 and ns.yaw_deg == 10


@pytest.mark.parametrize("spelling", ["--field-ut", "--field-uT", "--FIELD-UT", "--Field-Ut=48"])
def test_option_names_are_case_insensitive(spelling):
    argv = ["render", spelling] + ([] if "=" in spelling else ["48"])
    assert build_parser().parse_args(argv).field_ut == 48.0


def test_rf_options_lowercase_with_old_spelling():
    p = build_parser()
    a = p.parse_args(["rf-table", "x", "--field-ut", "50", "--rf-nT", "10", "--rf-MHz", "1.3",
                      "--out", "t.npz"])
    b = p.parse_args(["rf-table", "x", "--field-ut", "50", "--rf-nt", "10", "--rf-mhz", "1.3",
                      "--out", "t.npz"])
    assert (a.rf_nt, a.rf_mhz) == (b.rf_nt, b.rf_mhz) == (10.0, 1.3)
    s = p.parse_args(["rf-spectrum", "x", "--field-uT", "50", "--rf-nT", "5", "--f-min-MHz", "1",
                      "--out", "s.json"])
    assert s.f_min_mhz == 1.0 and s.f_max_mhz == 5.0


@pytest.mark.parametrize("argv, wrong, right", [
    (["field", "--lat-dg", "1", "--lon", "2"], "--lat-dg", "--lat-deg"),
    (["render", "--feild-ut", "48"], "--feild-ut", "--field-ut"),
    (["predict", "--heding-step-deg", "5"], "--heding-step-deg", "--heading-step-deg"),
])
def test_misspelt_option_suggests_nearest(argv, wrong, right, capsys):
    """The suggestion is difflib's closest match; one line, exit status 2."""
    with pytest.raises(SystemExit) as e:
        main(argv)
    err = capsys.readouterr().err
    assert e.value.code == 2 and err.count("\n") == 1
    assert f"did you mean '{right}'" in err and wrong in err
    sub = dict(_all_parsers())[f"magretina {argv[0]}"]
    names = sorted(s for s in sub._option_string_actions if s.startswith("--"))
    assert difflib.get_close_matches(wrong, names, n=1) == [right]


def test_misspelt_subcommand_suggests(capsys):
    with pytest.raises(SystemExit) as e:
        main(["rendr"])
    err = capsys.readouterr().err
    assert e.value.code == 2 and "did you mean 'render'?" in err and err.count("\n") == 1


def test_misspelt_study_key_suggests(tmp_path):
    """An unknown study key names the closest allowed key."""
    from renderer.errors import ConfigError
    from renderer.study import load_study

    text = (tmp_path / "s.toml")
    from renderer.commands.new_study import example_text

    text.write_text(example_text().replace("[site]\n", "[site]\nlat_dge = 1.0\n", 1), "utf-8")
    with pytest.raises(ConfigError) as e:
        load_study(str(text))
    assert "site.lat_dge: unknown key; did you mean 'lat_deg'?" in str(e.value)
    text.write_text(example_text() + "\n[sweeps]\n", "utf-8")
    with pytest.raises(ConfigError) as e:
        load_study(str(text))
    assert "did you mean 'sweep'?" in str(e.value)


def test_render_config_accepts_old_and_new_keys(tmp_path, capsys):
    """A render TOML with the older key names (lat, yaw) gives the same frame as the new ones."""
    old = tmp_path / "old.toml"
    new = tmp_path / "new.toml"
    old.write_text('lat = 52.0\nlon = 9.5\ndate = "2026-06-01"\nyaw = 30\nwidth = 64\n'
                   'out = "old.png"\n', "utf-8")
    new.write_text('lat_deg = 52.0\nlon_deg = 9.5\ndate = "2026-06-01"\nyaw_deg = 30\n'
                   'width = 64\nout = "new.png"\n', "utf-8")
    assert run(["render", "--config", str(old)], capsys)[0] == 0
    assert run(["render", "--config", str(new)], capsys)[0] == 0
    from renderer.io import read_image_linear

    assert (read_image_linear(tmp_path / "old.png") == read_image_linear(tmp_path / "new.png")).all()
    bad = tmp_path / "bad.toml"
    bad.write_text("yaw_dge = 3\n", "utf-8")
    rc, _, err = run(["render", "--config", str(bad), "--out", str(tmp_path / "b.png")], capsys)
    assert rc == 2 and "did you mean 'yaw_deg'?" in err


def test_field_date_defaults_to_today_and_says_so(capsys):
    rc, out, err = run(["field", "--lat-deg", "10", "--lon-deg", "20", "--model", "dipole"], capsys)
    today = dt.datetime.now(dt.timezone.utc).date().isoformat()
    assert rc == 0, err
    assert today in out.splitlines()[0] and "today" in out.splitlines()[0]
    rc, out, _ = run(["field", "--lat-deg", "10", "--lon-deg", "20", "--json"], capsys)
    assert json.loads(out)["date"] == today


@pytest.mark.parametrize("lat, lon, text", [
    (-12.05, -75.3, "12.0500° S, 75.3000° W"),
    (52.0, 9.5, "52.0000° N, 9.5000° E"),
    (0.0, 190.0, "0.0000° N, 170.0000° W"),
])
def test_field_prints_hemispheres(lat, lon, text, capsys):
    """Hemisphere letters instead of signs (common practice of geographic notation)."""
    rc, out, err = run(["field", "--lat-deg", str(lat), "--lon-deg", str(lon), "--date",
                        "2026-06-01"], capsys)
    assert rc == 0, err
    assert text in out.splitlines()[0]


def test_one_default_gain_for_render_demo_and_study():
    from renderer import demo
    from renderer.defaults import DEFAULT_GAIN
    from renderer.study.config import RENDER

    p = build_parser()
    assert p.parse_args(["render"]).gain == DEFAULT_GAIN
    assert p.parse_args(["predict"]).gain == DEFAULT_GAIN
    assert demo.GAIN == DEFAULT_GAIN and RENDER["gain"].default == DEFAULT_GAIN


def test_render_says_the_date_is_today(tmp_path, capsys):
    today = dt.datetime.now(dt.timezone.utc).date().isoformat()
    rc, out, err = run(["render", "--lat-deg", "52", "--lon-deg", "9.5", "--width", "32",
                        "--out", str(tmp_path / "f.png")], capsys)
    assert rc == 0, err
    assert f"field for {today} (today" in err
    rc, out, err = run(["render", "--lat-deg", "52", "--lon-deg", "9.5", "--width", "32",
                        "--date", "2026-06-01", "--out", str(tmp_path / "g.png")], capsys)
    assert rc == 0 and "today" not in err
