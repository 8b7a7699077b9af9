"""Exports and frame content of studies: videos, previews, 16-bit frames, coil
inversion mirror, metrics (renderer.study.exports / metrics / worker)."""

import csv
import json
import os

import imageio.v3 as iio
import numpy as np
import pytest
from PIL import Image

from renderer.study import metrics as metrics_mod
from renderer.study import run_study
from renderer.study.exports import read_video
from studyhelp import read_png16, write

FIXED = """
[study]
name = "{name}"

[field]
model = "fixed"
total_uT = 50.0
inclination_deg = 60.0
declination_deg = 0.0

[layout]
preset = "{layout}"

[response]
kind = "legendre"
coeffs = [0.7, 0.0, 0.2]

[scene]
kind = "uniform"
luminance = 0.5

[render]
gain = 1.0
"""


def test_coil_inversion_mirrors_world_panorama_north_south(tmp_path):
    """Inverting Z of a field with declination 0 mirrors the world panorama N-S at the
    step time.  Why: for an all-round eye with receptor axis = view direction d, the
    signal is f(d·b) with f even (Legendre series with even terms, f(c) = f(-c)).
    b' = (X, 0, -Z) and the N-S mirror d* = (-dx, dy, dz) give d*·b = -(d·b'), so
    s'(d) = s(d*).  Column j (azimuth -180 + (j+1/2)·360/W) mirrors to W/2 - 1 - j
    (mod W).  Tolerance: 1 code value of the 16-bit linear frames (float rounding of
    the dot products)."""
    text = FIXED.format(name="coil", layout="all-around") + """
[views.world]
kind = "world-panorama"
width = 64

[sequence]
kind = "still"
frames = 4
fps = 1.0

[timeline]
steps = [{ t_s = 2.0, action = "invert" }]

[output]
png8 = false
png16 = true
"""
    out = str(tmp_path / "out")
    run_study(write(tmp_path, text), out, progress=False)
    fr = [read_png16(os.path.join(out, f"frames/shot000/world_{k:04d}_lin16.png")).astype(int)
          for k in range(4)]
    W = 64
    mirror = (W // 2 - 1 - np.arange(W)) % W
    np.testing.assert_array_equal(fr[0], fr[1])          # before the step: ambient
    np.testing.assert_array_equal(fr[2], fr[3])
    assert np.abs(fr[2] - fr[1]).max() > 500              # the step changes the picture
    assert np.abs(fr[1][:, mirror] - fr[1]).max() > 500   # not trivially N-S symmetric
    assert np.abs(fr[2] - fr[1][:, mirror]).max() <= 1
    with open(os.path.join(out, "conditions.csv"), newline="") as fh:
        coil = [r["coil"] for r in csv.DictReader(fh)]
    assert coil == ["ambient", "ambient", "invert", "invert"]


def test_video_keeps_size_and_lossless_is_pixel_exact(tmp_path):
    """MP4 at 72 x 36 (not a multiple of 16): decoded frames keep the size (no
    silent resizing); libx264rgb crf 0 and FFV1 decode to exactly the 8-bit frames;
    yuv420p H.264 is close but lossy.  Decoding with the same ffmpeg via imageio."""
    text = """
[study]
name = "video"

[field]
model = "fixed"
total_uT = 48.0
inclination_deg = 65.0

[views.world]
kind = "world-panorama"
width = 72

[render]
gain = 2.0

[sequence]
kind = "heading-sweep"
step_deg = 90.0
fps = 4.0

[output]
video = "lossless"
preview = "gif"
preview_width = 36

[[sweep.axis]]
key = "output.lossless_codec"
values = ["libx264rgb", "ffv1"]
name = "codec"
"""
    out = str(tmp_path / "out")
    run_study(write(tmp_path, text), out, progress=False)
    for shot, ext in (("shot000", "mp4"), ("shot001", "mkv")):
        frames = np.stack([iio.imread(os.path.join(out, f"frames/{shot}/world_{k:04d}.png"))
                           for k in range(4)])
        vid = read_video(os.path.join(out, f"video/{shot}_world.{ext}"))
        assert vid.shape == (4, 36, 72, 3)
        np.testing.assert_array_equal(vid, frames)
        gif = Image.open(os.path.join(out, f"previews/{shot}_world.gif"))
        assert gif.n_frames == 4 and gif.size == (36, 18)
        # Each file says what made it: a GIF comment (read by Pillow) and container tags
        # (read by ffmpeg's own ffmetadata output, not by the writer's code).
        side = json.load(open(os.path.join(out, "study.json")))
        assert side["config_sha256"] in gif.info["comment"].decode()
        assert b"not measurements" in gif.info["comment"]
        tags = _ffmetadata(os.path.join(out, f"video/{shot}_world.{ext}"))
        assert f"video of study video, shot {shot}, view world" in tags.get("title", "")
        assert side["config_sha256"] in tags.get("comment", "")
    lossy = text.replace('video = "lossless"', 'video = "mp4"').split("[[sweep.axis]]")[0]
    out2 = str(tmp_path / "lossy")
    run_study(write(tmp_path, lossy, "lossy.toml"), out2, progress=False)
    vid = read_video(os.path.join(out2, "video/shot000_world.mp4"))
    assert vid.shape == (4, 36, 72, 3)
    frames = np.stack([iio.imread(os.path.join(out2, f"frames/shot000/world_{k:04d}.png"))
                       for k in range(4)])
    err = np.abs(vid.astype(int) - frames)
    assert 0 < err.max() and err.mean() < 6


def test_png16_is_linear_and_png8_is_srgb(tmp_path):
    """The 16-bit frame is linear light, the 8-bit frame its sRGB encoding: decoding
    the 8-bit values with the IEC 61966-2-1 formula matches the 16-bit values to
    within half an 8-bit step of the transfer curve."""
    text = FIXED.format(name="enc", layout="lateral") + """
[views.world]
kind = "world-panorama"
width = 32

[output]
png16 = true
"""
    out = str(tmp_path / "out")
    run_study(write(tmp_path, text), out, progress=False)
    v8 = iio.imread(os.path.join(out, "frames/shot000/world_0000.png")) / 255.0
    lin16 = read_png16(os.path.join(out, "frames/shot000/world_0000_lin16.png")) / 65535.0
    dec = np.where(v8 <= 0.04045, v8 / 12.92, ((v8 + 0.055) / 1.055) ** 2.4)
    # |dL/dV| <= 2.4/1.055 * ((1+0.055)/1.055)^1.4 ~ 2.3; half a step of 1/255 in V.
    assert np.abs(dec - lin16).max() <= 2.3 * 0.5 / 255 + 1 / 65535


def test_modulation_depth_matches_legendre_closed_form(tmp_path):
    """All-round eye, f = c0 + c2 P2(cos θ): P2 = (3x^2 - 1)/2 spans [-1/2, 1]
    (Abramowitz & Stegun 1964, 22.3.8 / Table 22.9), so the Michelson modulation depth
    over the sphere is (f_max - f_min)/(f_max + f_min) = 1.5 c2 / (2 c0 + 0.5 c2).
    The 1-degree metric grid misses the extreme directions by < 0.71 degrees, so cos θ
    is off by < 1e-4 and the depth by < 1e-3 relative.  Field vector metrics equal the
    fixed input (50 uT, I = 60 deg)."""
    text = FIXED.format(name="depth", layout="all-around") + """
[views.world]
kind = "world-panorama"
width = 16

[metrics]
grid_width = 360
"""
    out = str(tmp_path / "out")
    run_study(write(tmp_path, text), out, progress=False)
    with open(os.path.join(out, "metrics.csv"), newline="") as fh:
        row = next(csv.DictReader(fh))
    c0, c2 = 0.7, 0.2
    assert float(row["modulation_depth_sphere"]) == pytest.approx(1.5 * c2 / (2 * c0 + 0.5 * c2),
                                                                  rel=1e-3)
    assert float(row["field_total_ut"]) == pytest.approx(50.0, rel=1e-12)
    assert float(row["inclination_deg"]) == pytest.approx(60.0, abs=1e-9)


def test_registered_metric_provider_reaches_tables(tmp_path):
    """A provider registered with one line in PROVIDERS is run per frame and its
    values land in metrics.csv and metrics.nc (the extension point for issue 6)."""
    import xarray as xr

    def heading_cos(ctx):
        return {"heading_cos": float(np.cos(np.radians(ctx.pose.yaw_deg))),
                "seed_low_bits": float(ctx.seed % 1000)}

    metrics_mod.PROVIDERS["heading_cos"] = heading_cos
    try:
        text = FIXED.format(name="prov", layout="lateral") + """
[views.world]
kind = "world-panorama"
width = 16

[sequence]
kind = "heading-sweep"
step_deg = 90.0

[metrics]
providers = ["basic", "heading_cos"]
"""
        out = str(tmp_path / "out")
        run_study(write(tmp_path, text), out, progress=False)
    finally:
        del metrics_mod.PROVIDERS["heading_cos"]
    with open(os.path.join(out, "metrics.csv"), newline="") as fh:
        rows = list(csv.DictReader(fh))
    np.testing.assert_allclose([float(r["heading_cos"]) for r in rows], [1, 0, -1, 0], atol=1e-12)
    seed = json.load(open(os.path.join(out, "study.json")))["seeds"]["shot000"]
    assert float(rows[0]["seed_low_bits"]) == seed % 1000
    with xr.open_dataset(os.path.join(out, "metrics.nc"), engine="h5netcdf") as ds:
        np.testing.assert_allclose(ds["heading_cos"].values, [1, 0, -1, 0], atol=1e-12)


def test_rf_step_selects_response_table(tmp_path):
    """Timeline rf-on selects the named response table for the frames while the RF
    field is on, rf-off returns to the default.  With a flat table (c0 only, no
    angular dependence) the RF frame is the uniform scene (0.5 linear = sRGB code
    188, IEC 61966-2-1), and frames before and after are identical."""
    text = FIXED.format(name="rf", layout="lateral").replace(
        "gain = 1.0", "gain = 1.0\noutside = 1.0") + """
[responses.rf_flat]
kind = "legendre"
coeffs = [0.7]

[views.world]
kind = "world-panorama"
width = 32

[sequence]
kind = "still"
frames = 3
fps = 1.0

[timeline]
steps = [
  { t_s = 1.0, action = "rf-on", select = "rf_flat", amplitude_nT = 150.0, frequency_MHz = 1.4 },
  { t_s = 2.0, action = "rf-off" },
]
"""
    out = str(tmp_path / "out")
    run_study(write(tmp_path, text), out, progress=False)
    fr = [iio.imread(os.path.join(out, f"frames/shot000/world_{k:04d}.png")) for k in range(3)]
    np.testing.assert_array_equal(fr[0], fr[2])
    assert np.all(fr[1] == 188) and fr[0].min() != fr[0].max()
    with open(os.path.join(out, "conditions.csv"), newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert [r["response"] for r in rows] == ["default", "rf_flat", "default"]
    assert rows[1]["coil"] == "rf:rf_flat"
    side = json.load(open(os.path.join(out, "study.json")))
    rf = side["resolved_config"]["timeline"]["steps"][0]["rf"]
    assert rf["frequency_Hz"] == pytest.approx(1.4e6) and rf["amplitude_T"] == pytest.approx(150e-9)


def _ffmetadata(path) -> dict:
    """Container tags of a media file, as ffmpeg's ffmetadata muxer prints them."""
    import subprocess

    import imageio_ffmpeg

    r = subprocess.run([imageio_ffmpeg.get_ffmpeg_exe(), "-v", "error", "-i", path, "-f",
                        "ffmetadata", "-"], capture_output=True, text=True, check=True)
    tags = {}
    for line in r.stdout.splitlines():
        if "=" in line and not line.startswith(";"):
            k, v = line.split("=", 1)
            tags[k.lower()] = v
    return tags


def test_apng_preview_carries_text_chunks():
    """An APNG preview's Title and Description (PNG text keywords, W3C PNG 3rd edition
    §11.3.4.2) read back by Pillow."""
    import io

    from renderer.study.exports import preview_bytes

    frames = [np.full((8, 16, 3), k * 40, np.uint8) for k in range(3)]
    data = preview_bytes(frames, 5.0, "apng", 16, {"title": "preview of study s",
                                                   "comment": "config_sha256 abc"})
    with Image.open(io.BytesIO(data)) as im:
        assert im.n_frames == 3
        assert im.text["Title"] == "preview of study s"
        assert im.text["Description"] == "config_sha256 abc"
