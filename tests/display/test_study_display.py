"""The display model, dithering, labels and timing in a study folder.

References: W3C PNG specification 3rd edition (sBIT, gAMA, text keywords); Allard &
Faubert 2008 (noisy-bit dithering: independent noise per frame when it is temporal);
conditions files for experiment software: one row per image with a relative path and
an onset (common practice).  Lossless video: FFV1 and libx264rgb at crf 0 must return
every pixel of a dithered (high-entropy) frame (checked by decoding with imageio's
ffmpeg, a different code path from the encoder settings).
"""

import csv
import json
import os
import textwrap

import numpy as np
import pytest

from renderer.errors import ConfigError
from renderer.study.runner import run_study

from test_files import raw_chunks, texts

STUDY = """
[study]
name = "display-test"
seed = 9

[site]
name = "Test Shoal (invented)"
lat_deg = 40.0
lon_deg = 5.0

[field]
model = "igrf"
date = "2026-05-20"

[views.world]
kind = "world-panorama"
width = 64

[render]
gain = 2.0

[sequence]
kind = "still"
frames = 3
fps = 4.0

[display]
{display}

[output]
png8 = true
png16 = true
"""


def _study(tmp_path, display, name="s.toml"):
    p = tmp_path / name
    p.write_text(textwrap.dedent(STUDY).replace("{display}", textwrap.dedent(display)))
    return str(p)


def _read16(path):
    import png

    w, h, rows, info = png.Reader(filename=str(path)).read()
    return np.vstack([np.asarray(r, np.uint16) for r in rows])


def test_study_dithered_gamma_10bit(tmp_path):
    """10-bit gamma display with temporal noise: frames of a still sequence (same
    continuous image) differ; sBIT 10 and gAMA declared; every frame labelled with the
    study's configuration hash and no Creation Time (reruns give the same bytes);
    conditions and timing tables give onsets frame/fps."""
    out = tmp_path / "out"
    run_study(_study(tmp_path, 'kind = "gamma"\ngamma = 2.2\nbits = 10\ndither = "noise"\n'),
              str(out), progress=False)
    f = [out / f"frames/shot000/world_{k:04d}.png" for k in range(3)]
    a = [_read16(p) for p in f]
    assert not np.array_equal(a[0], a[1]) and not np.array_equal(a[1], a[2])
    side = json.loads((out / "study.json").read_text())
    for p in f:
        ch = raw_chunks(p)
        t = texts(ch)
        assert dict(ch)["sBIT"] == bytes([10, 10, 10])
        assert "Creation Time" not in t
        params = json.loads(t["magretina parameters"])
        assert params["config_sha256"] == side["config_sha256"]
        assert params["dither"]["method"] == "noise" and params["display"]["bits"] == 10
    lin = dict(raw_chunks(out / "frames/shot000/world_0000_lin16.png"))
    assert lin["cICP"] == bytes([1, 8, 0, 1])
    with open(out / "conditions.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    for r in rows:
        assert float(r["fps"]) == 4.0 and float(r["onset_s"]) == int(r["frame"]) / 4.0
    with open(out / "timing/shot000_world.csv", newline="") as fh:
        trows = list(csv.DictReader(fh))
    assert [int(r["frame"]) for r in trows] == [0, 1, 2]
    assert [float(r["onset_s"]) for r in trows] == [0.0, 0.25, 0.5]
    assert all(float(r["duration_s"]) == 0.25 for r in trows)
    for r in trows:
        assert os.path.isfile(os.path.join(out / "timing", r["file"]))
    # Metrics: displayed beside intended, per view, for the frame and the pattern.
    with open(out / "metrics.csv", newline="") as fh:
        m = list(csv.DictReader(fh))
    for key in ("world_frame_mean_cd_m2_intended", "world_frame_mean_cd_m2_displayed",
                "world_pattern_michelson_intended", "world_pattern_michelson_displayed",
                "world_pattern_rms_contrast_displayed"):
        assert key in m[0], key
    # The displayed numbers describe the files as written: decode each frame's codes and
    # put them through the same power law (colour-science's gamma_function, IEC-free).
    colour = pytest.importorskip("colour")
    for k, p in enumerate(f):
        codes = _read16(p).reshape(32, 64, 3) >> 6
        rel = colour.gamma_function(codes / 1023.0, 2.2) @ np.array([0.2126, 0.7152, 0.0722])
        assert float(m[k]["world_frame_mean_cd_m2_displayed"]) == pytest.approx(
            80.0 * rel.mean(), rel=1e-12)
    # A rerun writes nothing new: same bytes.
    before = {p: p.read_bytes() for p in f}
    run_study(_study(tmp_path, 'kind = "gamma"\ngamma = 2.2\nbits = 10\ndither = "noise"\n'),
              str(out), progress=False)
    assert all(p.read_bytes() == b for p, b in before.items())


def test_fixed_noise_repeats_across_frames(tmp_path):
    out = tmp_path / "out"
    run_study(_study(tmp_path, 'dither = "ordered"\ntemporal = false\n'), str(out),
              progress=False)
    import imageio.v3 as iio

    a = [iio.imread(out / f"frames/shot000/world_{k:04d}.png") for k in range(3)]
    assert np.array_equal(a[0], a[1]) and np.array_equal(a[1], a[2])
    assert dict(raw_chunks(out / "frames/shot000/world_0000.png"))["sRGB"] == b"\0"


@pytest.mark.parametrize("display, needle", [
    ("bits = 12\n", "display.bits"),
    ('kind = "gamma"\n', "display.gamma: missing"),
    ('dither = "blue"\n', "display.dither"),
    ('pattern_grey = "500 cd/m2"\n', "display.pattern_grey"),
    ('kind = "table"\ntable = "lab.csv"\n', "line 4"),
    ('kind = "table"\ntable = "nope.csv"\n', "display.table = 'nope.csv': no such file"),
])
def test_bad_display_tables_reported_with_key(tmp_path, display, needle):
    (tmp_path / "lab.csv").write_text("code,cd_m2\n0,0.5\n100,20\n90,25\n255,80\n")
    with pytest.raises(ConfigError) as exc:
        run_study(_study(tmp_path, display), str(tmp_path / "out"), progress=False)
    assert needle in str(exc.value)


def test_video_needs_8bit_display(tmp_path):
    text = _study(tmp_path, "bits = 16\n")
    with open(text, "a") as fh:
        fh.write('video = "lossless"\n')
    with pytest.raises(ConfigError, match="output.video = 'lossless': needs display.bits = 8"):
        run_study(text, str(tmp_path / "out"), progress=False)


@pytest.mark.parametrize("codec", ["ffv1", "libx264rgb"])
def test_lossless_video_keeps_dithered_pixels(tmp_path, codec):
    from renderer.display import make_display
    from renderer.dither import frame_seed, quantise
    from renderer.study.exports import read_video, write_video

    d = make_display()
    rng = np.random.default_rng(2)
    base = 0.2 + 0.002 * rng.standard_normal((48, 64, 3))
    frames = [quantise(d, base, "noise", frame_seed(1, k)) for k in range(3)]
    path = str(tmp_path / ("v.mkv" if codec == "ffv1" else "v.mp4"))
    write_video(path, frames, 10.0, "lossless", codec)
    back = read_video(path)
    assert back.shape == (3, 48, 64, 3)
    np.testing.assert_array_equal(back, np.stack(frames))


def test_study_figures_are_separate_from_stimuli(tmp_path):
    """output.figures writes annotated figures under figures/, each with a Warning chunk;
    the stimulus frames are the same bytes as without figures, and neither conditions.csv
    nor the timing tables list a figure."""
    import imageio.v3 as iio

    plain = tmp_path / "plain"
    run_study(_study(tmp_path, 'dither = "noise"\n'), str(plain), progress=False)
    text = _study(tmp_path, 'dither = "noise"\n', name="f.toml")
    with open(text, "a") as fh:
        fh.write("figures = true\n")
    out = tmp_path / "out"
    run_study(text, str(out), progress=False)
    figs = sorted(os.listdir(out / "figures/shot000"))
    assert figs == [f"world_{k:04d}.png" for k in range(3)]
    for name in figs:
        assert "not a stimulus" in texts(raw_chunks(out / "figures/shot000" / name))["Warning"]
        f = iio.imread(out / "figures/shot000" / name)
        a = iio.imread(out / "frames/shot000" / name)
        assert f.shape[0] > a.shape[0]
        assert np.array_equal(a, iio.imread(plain / "frames/shot000" / name))
    listed = (out / "conditions.csv").read_text() + (out / "timing/shot000_world.csv").read_text()
    assert "figures/" not in listed


def test_run_display_flags_replace_the_files_display(tmp_path, capsys):
    """``magretina run --display gamma --gamma 2.2 --bits 10 --dither noise`` gives the
    same frames, bit for bit, as a study file with those keys in [display] (the flags
    replace the file's keys; the files' parameters, hence labels, are the same), and
    study.json says which keys came from the command line.  The decoded 10-bit codes go
    through the 2.2 power law (colour-science's gamma_function) to the displayed mean the
    metrics report, as in the file-only test above."""
    from renderer.cli import main

    given = 'kind = "gamma"\ngamma = 2.2\nbits = 10\ndither = "noise"\n'
    ref = tmp_path / "ref"
    run_study(_study(tmp_path, given, "ref.toml"), str(ref), progress=False)
    # The file says sRGB 8-bit with a white level; --display gamma keeps the white level
    # (a gamma display has one) and the flags set the rest.
    plain = _study(tmp_path, "white_cd_m2 = 80.0\n", "plain.toml")
    out = tmp_path / "cli"
    assert main(["run", plain, "--out", str(out), "--quiet", "--display", "gamma",
                 "--gamma", "2.2", "--bits", "10", "--dither", "noise"]) == 0
    for k in range(3):
        pa = json.loads(texts(raw_chunks(ref / f"frames/shot000/world_{k:04d}.png"))
                        ["magretina parameters"])
        pb = json.loads(texts(raw_chunks(out / f"frames/shot000/world_{k:04d}.png"))
                        ["magretina parameters"])
        assert pb["display"] == pa["display"] and pb["dither"] == pa["dither"]
        assert _read16(out / f"frames/shot000/world_{k:04d}.png").tobytes() == \
            _read16(ref / f"frames/shot000/world_{k:04d}.png").tobytes()
        assert dict(raw_chunks(out / f"frames/shot000/world_{k:04d}.png"))["sBIT"] == \
            bytes([10, 10, 10])
    side = json.loads((out / "study.json").read_text())
    assert side["command_line"] == {"display": {"kind": "gamma", "gamma": 2.2, "bits": 10,
                                                "dither": "noise"}}
    assert side["resolved_config"]["display"]["kind"] == "gamma"
    colour = pytest.importorskip("colour")
    with open(out / "metrics.csv", newline="") as fh:
        m = list(csv.DictReader(fh))
    codes = _read16(out / "frames/shot000/world_0000.png").reshape(32, 64, 3) >> 6
    rel = colour.gamma_function(codes / 1023.0, 2.2) @ np.array([0.2126, 0.7152, 0.0722])
    assert float(m[0]["world_frame_mean_cd_m2_displayed"]) == pytest.approx(80.0 * rel.mean(),
                                                                           rel=1e-12)
    # Another display is another study: resuming the folder with the file's own display
    # is refused, not mixed.
    capsys.readouterr()
    assert main(["run", plain, "--out", str(out), "--quiet"]) == 2
    assert "another study" in capsys.readouterr().err


def test_run_display_flag_errors_say_command_line(tmp_path, capsys):
    """A bad value given as a flag is refused before anything renders, naming the key and
    saying it came from the command line; a new kind drops the file's curve keys (a file
    with a gamma exponent runs with --display srgb)."""
    from renderer.cli import main

    st = _study(tmp_path, 'kind = "gamma"\ngamma = 2.2\n')
    out = tmp_path / "o"
    assert main(["run", st, "--out", str(out), "--quiet", "--gamma", "20"]) == 2
    err = capsys.readouterr().err
    assert "display.gamma" in err and "(given on the command line)" in err
    assert not out.exists()
    assert main(["run", st, "--out", str(out), "--quiet", "--display", "srgb",
                 "--dither-temporal", "off", "--dither", "ordered"]) == 0
    side = json.loads((out / "study.json").read_text())
    d = side["resolved_config"]["display"]
    assert d["kind"] == "srgb" and d.get("gamma") is None and d["temporal"] is False
