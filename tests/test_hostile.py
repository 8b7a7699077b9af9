"""Hostile inputs: each is refused with exit status 2 and one line naming the file or option.

Regression tests of failures measured from outside the project: unreadable files
(deep nesting, bad encodings, empty or non-zip tables, decompression bombs), sizes
without an upper bound, output paths, failures that used to surface after rendering
had started, non-finite numbers, overwriting without --force, slow validation of
large sweeps, and folder durability.  The limits themselves are the project's own
(see renderer/budget.py and renderer/inputs.py); what is checked is that the refusal
happens, names the figure, and allocates nothing large first (common practice for
input validation: check sizes before decoding).
"""

import os
import struct
import tracemalloc
import zlib

import pytest

from renderer.cli import main

HERE = os.path.dirname(os.path.abspath(__file__))
EXAMPLE = os.path.join(os.path.dirname(HERE), "renderer", "study", "examples", "example_study.toml")

SMALL = """
[study]
name = "{name}"
seed = 1

[field]
model = "fixed"
total_uT = 50.0
inclination_deg = 60.0

[response]
kind = "legendre"
coeffs = {coeffs}

[views.world]
kind = "world-panorama"
width = {width}

[sequence]
kind = "still"
frames = {frames}

[output]
png8 = true
netcdf = {netcdf}
"""


def small(tmp_path, name="small", coeffs="[0.7, 0.0, 0.1]", width=32, frames=2, netcdf="false",
          extra=""):
    p = tmp_path / "study.toml"
    p.write_text(SMALL.format(name=name, coeffs=coeffs, width=width, frames=frames,
                              netcdf=netcdf) + extra, encoding="utf-8")
    return str(p)


def run(argv, capsys):
    rc = main(argv)
    out = capsys.readouterr()
    return rc, out.out, out.err


def refused(argv, capsys, *needles):
    rc, out, err = run(argv, capsys)
    assert rc == 2, (rc, out, err)
    assert "Traceback" not in err and err.count("\n") >= 1
    for n in needles:
        assert n in err, (n, err)
    return err


def png_header_only(path, width, height):
    """A valid PNG signature and IHDR declaring width x height, with one tiny IDAT."""
    def chunk(kind, data):
        return (struct.pack(">I", len(data)) + kind + data
                + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF))
    ihdr = struct.pack(">IIBBBBB", width, height, 8, 2, 0, 0, 0)
    path.write_bytes(b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr)
                     + chunk(b"IDAT", zlib.compress(b"\x00" * 16)) + chunk(b"IEND", b""))
    return str(path)


# ------------------------------------------------------------------ unreadable files
def test_deeply_nested_study_is_refused_before_tomllib_recurses(tmp_path, capsys):
    p = tmp_path / "deep.toml"
    p.write_text("x = " + "[" * 100000 + "]" * 100000 + "\n")
    refused(["run", str(p), "--dry-run"], capsys, "deep.toml", "nested")


def test_non_utf8_files_name_the_first_bad_byte(tmp_path, capsys):
    bad = b'name = "caf\xe9"\n'
    for name in ("layout.toml", "config.toml", "pair.toml", "study.toml"):
        (tmp_path / name).write_bytes(bad)
    base = ["--lat", "10", "--lon", "10"]
    refused(["render", *base, "--layout", str(tmp_path / "layout.toml"), "--out",
             str(tmp_path / "o.png")], capsys, "layout.toml", "not UTF-8", "byte 11")
    refused(["render", "--config", str(tmp_path / "config.toml")], capsys, "config.toml",
            "not UTF-8")
    refused(["response", "compute", str(tmp_path / "pair.toml"), "--field-uT", "50", "--out",
             str(tmp_path / "t.npz")], capsys, "pair.toml", "not UTF-8")
    refused(["run", str(tmp_path / "study.toml"), "--dry-run"], capsys, "study.toml", "not UTF-8")


def test_non_utf8_route_and_response_csv(tmp_path, capsys):
    (tmp_path / "route.csv").write_bytes(b"time_s,lat_deg,lon_deg\n0,1\xff,2\n")
    (tmp_path / "resp.csv").write_bytes(b"theta_deg,value\n0,1\n\xfe90,2\n180,1\n")
    s = small(tmp_path)
    text = open(s).read().replace('kind = "still"\nframes = 2',
                                  'kind = "route"\ncsv = "route.csv"')
    open(s, "w").write(text.replace('model = "fixed"\ntotal_uT = 50.0\ninclination_deg = 60.0',
                                    'model = "dipole"\ndate = "2026-01-01"\n\n[site]\n'
                                    'lat_deg = 1.0\nlon_deg = 2.0'))
    refused(["run", s, "--dry-run"], capsys, "route.csv", "not UTF-8")
    refused(["render", "--lat", "10", "--lon", "10", "--response-csv", str(tmp_path / "resp.csv"),
             "--out", str(tmp_path / "o.png")], capsys, "resp.csv", "not UTF-8")


@pytest.mark.parametrize("content, needle", [(b"", "empty"), (b"not a zip at all", "not a zip"),
                                             (b"PK\x03\x04broken", "npz")])
def test_bad_response_tables(tmp_path, capsys, content, needle):
    t = tmp_path / "t.npz"
    t.write_bytes(content)
    refused(["render", "--lat", "10", "--lon", "10", "--response-table", str(t), "--out",
             str(tmp_path / "o.png")], capsys, "t.npz", needle)


def test_decompression_bomb_scene_is_refused_from_its_header(tmp_path, capsys):
    bomb = png_header_only(tmp_path / "bomb.png", 200000, 100000)
    tracemalloc.start()
    try:
        refused(["render", "--lat", "10", "--lon", "10", "--width", "32", "--scene", bomb,
                 "--out", str(tmp_path / "o.png")], capsys, "bomb.png", "pixels")
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    # 2e10 pixels would be 60 GB decoded; the refusal reads a header of a few bytes.
    assert peak < 64 * 2**20
    assert not (tmp_path / "o.png").exists()


# ------------------------------------------------------------------ sizes and budgets
@pytest.mark.parametrize("argv, needle", [
    (["render", "--lat", "1", "--lon", "1", "--width", "1000000000"], "pixels"),
    (["render", "--lat", "1", "--lon", "1", "--view", "eye-disc", "--width", "1000000"], "pixels"),
    (["render", "--lat", "1", "--lon", "1", "--view", "retina", "--width", "100000"], "pixels"),
    (["render", "--lat", "1", "--lon", "1", "--width", "16384", "--max-memory-gb", "0.5"],
     "limit is 500 MB"),
    (["predict", "--lat", "1", "--lon", "1", "--noisy", "n.png", "--width", "1000000000"],
     "pixels"),
    (["predict", "--lat", "1", "--lon", "1", "--heading-step", "1e-9"], "headings"),
    (["predict", "--lat", "1", "--lon", "1", "--heading-step", "0.001"], "headings"),
    (["predict", "--lat", "1", "--lon", "1", "--flux", "inf"], "--flux"),
    (["predict", "--lat", "1", "--lon", "1", "--integration-ms", "inf"], "--integration-ms"),
    (["predict", "--lat", "1", "--lon", "1", "--luminance", "inf"], "--luminance"),
])
def test_sizes_and_numbers_are_bounded(tmp_path, capsys, argv, needle):
    argv = [a if a != "n.png" else str(tmp_path / "n.png") for a in argv]
    tracemalloc.start()
    try:
        refused(argv + ["--out", str(tmp_path / "o.png")] if argv[0] == "render" else argv,
                capsys, needle)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 64 * 2**20
    assert not os.listdir(tmp_path)


def test_render_config_values_must_have_their_flag_types(tmp_path, capsys):
    for body, needle in (('width = 1e9\nout = "o.png"\n', "whole number"),
                         ('scene = 5\nout = "o.png"\n', "scene = 5"),
                         ('width = 1000000000\nlat = 1.0\nlon = 1.0\nout = "o.png"\n', "pixels")):
        (tmp_path / "c.toml").write_text(body)
        refused(["render", "--config", str(tmp_path / "c.toml")], capsys, needle)
    assert not (tmp_path / "o.png").exists()


def test_study_sizes_frames_and_jobs(tmp_path, capsys):
    refused(["run", small(tmp_path, width=1000000000), "--dry-run"], capsys, "pixels")
    refused(["run", small(tmp_path, frames=1000000), "--dry-run"], capsys, "1000000 frames",
            "MAGRETINA_MAX_FRAMES")
    refused(["run", small(tmp_path), "--jobs", str(10**6), "--dry-run"], capsys, "CPU",
            "--force-jobs")
    refused(["run", small(tmp_path), "--jobs", "0"], capsys, ">= 1")


def test_study_dry_run_reports_the_resource_estimate(tmp_path, capsys):
    rc, out, err = run(["run", small(tmp_path), "--dry-run", "--out", str(tmp_path / "o")], capsys)
    assert rc == 0 and "estimated resources: about" in out and "2 frames" in out
    assert not (tmp_path / "o").exists()


def test_huge_linspace_is_refused_by_the_frame_budget_before_expansion(tmp_path, capsys):
    s = small(tmp_path, frames=12, extra='\n[[sweep.axis]]\nkey = "render.gain"\n'
                                          'linspace = [0.0, 5.0, 100000]\n')
    refused(["run", s, "--dry-run"], capsys, "1200000 frames")


def test_long_sweep_over_a_broken_study_is_checked_per_table(tmp_path, capsys, monkeypatch):
    """Found by the fuzz campaign: a study with a problem elsewhere and a linspace of
    100,000 values validated the whole study once per value while reporting (minutes).
    The report re-checks only the swept table: 100,000 [render] checks, nothing else."""
    from renderer.study import config as cfgmod

    s = small(tmp_path, name="", frames=1, extra='\n[[sweep.axis]]\nkey = "render.gain"\n'
                                                  'linspace = [0.0, 5.0, 100000]\n')
    calls = {}
    real = cfgmod.check_response

    def counting(*a, **k):
        calls["response"] = calls.get("response", 0) + 1
        return real(*a, **k)

    monkeypatch.setattr(cfgmod, "check_response", counting)
    refused(["run", s, "--dry-run"], capsys, "study.name")
    assert calls == {"response": 1}


# ------------------------------------------------------------------ output paths, names
def test_output_paths(tmp_path, capsys):
    s = small(tmp_path)
    refused(["run", s, "--out", ""], capsys, "--out")
    (tmp_path / "afile").write_text("keep")
    refused(["run", s, "--out", str(tmp_path / "afile")], capsys, "not a folder")
    assert (tmp_path / "afile").read_text() == "keep"
    refused(["predict", "--lat", "1", "--lon", "1", "--plots", str(tmp_path / "afile")], capsys,
            "not a folder")
    refused(["run", small(tmp_path, name="x" * 300), "--dry-run"], capsys, "300 characters")
    refused(["run", small(tmp_path, name="bad\\u0000name"), "--dry-run"], capsys,
            "control character")


def test_zero_mean_response_is_refused_before_any_frame(tmp_path, capsys):
    out = tmp_path / "o"
    refused(["run", small(tmp_path, coeffs="[0.0]"), "--out", str(out), "--quiet"], capsys,
            "signal is 0")
    assert not (out / "frames").exists()
    refused(["render", "--lat", "1", "--lon", "1", "--legendre", "0", "--width", "32", "--out",
             str(tmp_path / "o.png")], capsys, "signal is 0")


def test_dry_run_refuses_what_the_run_refuses(tmp_path, capsys):
    """A dry run makes the run's own pre-frame checks (responses and their mean signal,
    the scene file, the output folder), so it refuses the same studies with the same
    message, and writes nothing."""
    s = small(tmp_path, coeffs="[0.0]")
    out = tmp_path / "o"
    dry = refused(["run", s, "--out", str(out), "--dry-run"], capsys, "signal is 0")
    real = refused(["run", s, "--out", str(out), "--quiet"], capsys, "signal is 0")
    assert dry == real
    assert not out.exists() or not (out / "frames").exists()
    # A scene whose header is fine but whose 2:1 check fails, and a folder of another kind.
    png_header_only(tmp_path / "scene.png", 64, 64)
    s2 = small(tmp_path, extra='\n[scene]\nkind = "file"\npath = "scene.png"\n')
    refused(["run", s2, "--out", str(tmp_path / "o2"), "--dry-run"], capsys, "2:1")
    busy = tmp_path / "busy"
    busy.mkdir()
    (busy / "notes.txt").write_text("keep")
    refused(["run", small(tmp_path), "--out", str(busy), "--dry-run"], capsys, "holds no study")
    assert os.listdir(busy) == ["notes.txt"]
    assert not (tmp_path / "o2").exists()


@pytest.mark.parametrize("argv", [
    ["rf-spectrum", "toy-axial-n", "--field-ut", "50", "--rf-nt", "100", "--out", "s.json"],
    ["rf-table", "toy-axial-n", "--field-ut", "50", "--rf-nt", "100", "--rf-mhz", "1.4",
     "--out", "t.npz"],
    ["spin-plan", "toy-axial-n", "--field-ut", "50", "--out", "p.npz"],
])
def test_spin_commands_refuse_beyond_the_memory_limit(tmp_path, capsys, argv):
    """The spin commands check the solver's memory estimate against the shared limit
    (renderer.budget) before solving: with a limit of 10 kB even the 12-dimensional toy
    pair is refused, naming the limit and how to raise it, and nothing is written."""
    argv = [str(tmp_path / a) if a.endswith((".json", ".npz")) else a for a in argv]
    # Modules imported first (their import is not an allocation of the refusal).
    import renderer.spin.definition  # noqa: F401
    import renderer.spin.planner  # noqa: F401
    import renderer.spin.rf  # noqa: F401
    from renderer.spin.definition import load_pair

    load_pair("toy-axial-n")
    tracemalloc.start()
    try:
        refused(argv + ["--max-memory-gb", "0.00001"], capsys, "10 kB", "--max-memory-gb")
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 64 * 2**20
    assert not os.listdir(tmp_path)


def test_response_compute_refuses_to_overwrite(tmp_path, capsys):
    t = tmp_path / "t.npz"
    t.write_bytes(b"precious")
    refused(["response", "compute", "toy-axial-n", "--field-uT", "50", "--out", str(t)], capsys,
            "already exists", "--force")
    assert t.read_bytes() == b"precious"


# ------------------------------------------------------------------ folders
def test_folder_with_only_own_temporary_files_is_a_fresh_start(tmp_path, capsys):
    out = tmp_path / "o"
    out.mkdir()
    (out / ".study.json.k2j3.tmp").write_bytes(b"{half")
    (out / ".magretina-work").mkdir()
    (out / ".magretina-work" / "magretina-resources-x.pkl").write_bytes(b"stale")
    rc, _, err = run(["run", small(tmp_path), "--out", str(out), "--quiet"], capsys)
    assert rc == 0, err
    assert sorted(os.listdir(out)) == ["conditions.csv", "frames", "manifest.jsonl",
                                       "metrics.csv", "study.json", "timing"]


def test_atomic_writes_sync_the_folder(tmp_path, monkeypatch):
    """After os.replace the folder is fsynced (common practice in databases and package
    managers: a rename is durable only once its directory is)."""
    import renderer.io as rio

    synced = []
    real = os.fsync

    def spy(fd):
        import stat
        if stat.S_ISDIR(os.fstat(fd).st_mode):
            synced.append(os.path.realpath(f"/proc/self/fd/{fd}") if os.path.exists("/proc/self/fd")
                          else "dir")
        return real(fd)

    monkeypatch.setattr(rio.os, "fsync", spy)
    rio.atomic_write_bytes(tmp_path / "sub" / "a.bin", b"x")
    assert synced and synced[-1] in (os.path.realpath(tmp_path / "sub"), "dir")


def test_spin_command_outputs_are_checked_before_any_work(tmp_path, capsys):
    """Found by the fuzz campaign (tests/test_fuzz.py): spin-plan and rf-table wrote over an
    input file named as --out, crashed on a folder or a NUL character as --out, and
    rf-spectrum overflowed on --max-memory-gb 1e308.  Each is now one refusal line, the
    existing file untouched."""
    keep = tmp_path / "study.toml"
    keep.write_text("x = 1\n")
    folder = tmp_path / "out"
    folder.mkdir()
    base = ["toy-axial-n", "--field-ut", "50"]
    rf = ["--rf-nt", "100", "--rf-mhz", "1.4", "--lmax", "0"]
    for argv, needle in (
            (["spin-plan", *base, "--out", str(keep)], "--force"),
            (["spin-plan", *base, "--out", str(folder)], "is a folder"),
            (["spin-plan", *base, "--out", str(tmp_path / "t.npz"), "--run-dir", str(keep)],
             "--run-dir"),
            (["rf-table", *base, *rf, "--out", str(tmp_path / "a\x00b")], "NUL"),
            (["rf-table", *base, *rf, "--out", str(keep)], "--force"),
            (["rf-spectrum", *base, "--rf-nt", "100", "--points", "2", "--out",
              str(tmp_path / "s.json"), "--max-memory-gb", "1e308"], "--max-memory-gb")):
        refused(argv, capsys, needle)
    assert keep.read_text() == "x = 1\n"
    assert sorted(os.listdir(tmp_path)) == ["out", "study.toml"]


def test_second_campaign_findings(tmp_path, capsys):
    """Found by the fuzz campaign (tests/test_fuzz.py, second round): an infinite fixed
    field declination and a density of 1e308 per deg² crashed predict; rf-table with the
    same path as --out and --run-dir crashed after computing the table."""
    refused(["predict", "--field-ut", "50", "--inclination-deg", "60", "--declination-deg",
             "inf"], capsys, "--declination-deg")
    refused(["predict", "--lat-deg", "10", "--lon-deg", "20", "--density", "1e308"], capsys,
            "--density")
    same = str(tmp_path / "x")
    refused(["rf-table", "toy-axial-n", "--field-ut", "50", "--rf-nt", "100", "--rf-mhz", "1.4",
             "--lmax", "0", "--out", same, "--run-dir", same], capsys, "--run-dir")
    assert not os.listdir(tmp_path)
