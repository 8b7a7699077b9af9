"""Every column, variable and key an output writes is in docs/data-dictionary.md.

The dictionary is parsed from the document itself (its "Columns and variables" table),
so the document and the outputs cannot drift apart: a new metric or column fails here
until it is written down with its unit.  The outputs are produced by a small study run
(conditions.csv, metrics.csv, metrics.nc with the basic and prediction metrics) and by
``field --json`` and ``predict --json``.  NetCDF units are checked against the unit
column (UDUNITS-2 symbols, CF conventions 1.10 section 3.1).
"""

import csv
import json
import os
import re
import textwrap

import pytest

from renderer.cli import main

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
DOC = os.path.join(ROOT, "docs", "data-dictionary.md")


def dictionary():
    """name pattern -> (unit, outputs) from the doc's table."""
    text = open(DOC, encoding="utf-8").read()
    table = text.split("## Columns and variables", 1)[1]
    out = {}
    for line in table.splitlines():
        m = re.match(r"\|\s*`([^`]+)`\s*\|([^|]*)\|([^|]*)\|([^|]*)\|", line)
        if m:
            out[m.group(1)] = (m.group(2).strip(), m.group(4).strip())
    return out


def _matches(name, pattern, eyes, axes):
    alts = {"<eye>": eyes, "<axis>": axes}
    rx = re.escape(pattern)
    for ph, vals in alts.items():
        rx = rx.replace(re.escape(ph), "(" + "|".join(map(re.escape, vals)) + ")" if vals else "$^")
    return re.fullmatch(rx, name) is not None


def check(names, where, eyes=("left", "right"), axes=()):
    d = dictionary()
    missing = [n for n in names if not any(_matches(n, p, eyes, axes) for p in d)]
    assert not missing, f"{where}: not in docs/data-dictionary.md: {missing}"


STUDY = """
[study]
name = "dictionary-check"
[site]
lat_deg = 40.0
lon_deg = 5.0
[field]
date = "2026-05-20"
[views.world]
kind = "world-panorama"
width = 32
[sequence]
kind = "heading-sweep"
start_deg = 0.0
stop_deg = 360.0
step_deg = 180.0
[output]
png8 = true
metrics = true
netcdf = true
[metrics]
providers = ["basic", "prediction"]
grid_width = 36
[metrics.options.prediction]
density = 0.005
heading_step_deg = 90.0
[[sweep.axis]]
key = "site.lat_deg"
values = [10.0, 50.0]
"""


@pytest.fixture(scope="module")
def study_out(tmp_path_factory):
    base = tmp_path_factory.mktemp("dict")
    (base / "s.toml").write_text(textwrap.dedent(STUDY), "utf-8")
    assert main(["run", str(base / "s.toml"), "--out", str(base / "out"), "--quiet"]) == 0
    return base / "out"


def test_the_doc_parses():
    d = dictionary()
    assert len(d) > 40 and d["field_total_ut"][0] == "µT" and d["yaw_deg"][0] == "degree"


def test_study_tables_are_in_the_dictionary(study_out):
    for name in ("conditions.csv", "metrics.csv"):
        with open(study_out / name, newline="", encoding="utf-8") as fh:
            header = next(csv.reader(fh))
        check(header, name, axes=["site_lat_deg"])
    assert "field_north_ut" in header and "yaw_deg" in header
    timing = sorted((study_out / "timing").glob("*.csv"))
    assert timing
    with open(timing[0], newline="", encoding="utf-8") as fh:
        check(next(csv.reader(fh)), "timing table")


def test_netcdf_variables_and_units(study_out):
    import xarray as xr

    d = dictionary()
    with xr.open_dataset(study_out / "metrics.nc", engine="h5netcdf") as ds:
        names = list(ds.data_vars) + list(ds.coords)
        check(names, "metrics.nc", axes=["site_lat_deg"])
        udunits = {"µT": "uT", "degree": "degree", "s": "s", "km": "km", "rad⁻²": "rad-2"}
        for v in ds.data_vars:
            unit = next(u for p, (u, _) in d.items()
                        if _matches(v, p, ("left", "right"), ["site_lat_deg"]))
            if unit in udunits:
                assert ds[v].attrs.get("units") == udunits[unit], v


def test_field_json_keys_are_in_the_dictionary(capsys):
    assert main(["field", "--lat-deg", "-12.05", "--lon-deg", "-75.3", "--date", "2026-06-01",
                 "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    check(list(d) + list(d["site"]), "field --json")


def test_predict_json_keys_are_in_the_dictionary(capsys):
    assert main(["predict", "--field-ut", "50", "--inclination-deg", "65", "--density", "0.005",
                 "--heading-step-deg", "90", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    check(list(d), "predict --json (top level)")
    check(list(d["metrics"]), "predict --json metrics")
    check(list(d["crb_deg_vs_yaw"]), "predict --json crb_deg_vs_yaw")
