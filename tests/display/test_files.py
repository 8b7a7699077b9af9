"""Labelled, correctly encoded PNG files from ``render``, read back by other readers.

References: W3C PNG specification, 3rd edition (2025): chunk layout and CRC-32 (§5.3),
predefined text keywords (§11.3.4.2), sRGB/gAMA/cHRM/cICP/sBIT (§11.3.2-3; gAMA stores
gamma × 100000, cICP carries ITU-T H.273 code points, transfer 8 = linear).  The chunks
are read with pypng's ``Reader.chunks()`` and Pillow, and with the small raw parser
below (which also checks every CRC with ``zlib.crc32``), never with the writer's code.
"""

import json
import os
import struct
import zlib

import numpy as np
import pytest

from renderer.cli import main

SITE = ["--lat", "40.0", "--lon", "5.0", "--date", "2026-05-20"]  # invented site at sea


def raw_chunks(path):
    """[(type, data)] of a PNG file, checking the signature and each CRC."""
    with open(path, "rb") as fh:
        b = fh.read()
    assert b[:8] == b"\x89PNG\r\n\x1a\n"
    out, i = [], 8
    while i < len(b):
        n = struct.unpack(">I", b[i:i + 4])[0]
        kind, data = b[i + 4:i + 8], b[i + 8:i + 8 + n]
        crc = struct.unpack(">I", b[i + 8 + n:i + 12 + n])[0]
        assert crc == zlib.crc32(kind + data) & 0xFFFFFFFF, kind
        out.append((kind.decode("ascii"), data))
        i += 12 + n
    assert out[0][0] == "IHDR" and out[-1][0] == "IEND"
    return out


def texts(chunks):
    out = {}
    for kind, data in chunks:
        if kind == "tEXt":
            k, _, v = data.partition(b"\0")
            out[k.decode("latin-1")] = v.decode("latin-1")
        elif kind == "iTXt":
            k, _, rest = data.partition(b"\0")
            assert rest[:2] == b"\0\0"  # uncompressed
            _lang, _, rest = rest[2:].partition(b"\0")
            _tk, _, v = rest.partition(b"\0")
            out[k.decode("latin-1")] = v.decode("utf-8")
    return out


def run(args, capsys):
    rc = main(args)
    cap = capsys.readouterr()
    return rc, cap.out, cap.err


def _before_idat(chunks, kind):
    names = [c[0] for c in chunks]
    return names.index(kind) < names.index("IDAT")


def test_render_writes_labelled_srgb_and_linear_files(tmp_path, capsys):
    out, p16 = tmp_path / "f.png", tmp_path / "f16.png"
    rc, _, err = run(["render", *SITE, "--width", "64", "--yaw", "30", "--out", str(out),
                      "--png16", str(p16)], capsys)
    assert rc == 0, err
    ch = raw_chunks(out)
    t = texts(ch)
    for k in ("Software", "Description", "Source", "Disclaimer", "Creation Time",
              "magretina parameters"):
        assert k in t, k
    assert "not a measurement" in t["Disclaimer"]
    params = json.loads(t["magretina parameters"])
    assert params["pose_deg"]["yaw"] == 30.0 and params["display"]["kind"] == "srgb"
    assert params["site"]["lat_deg"] == 40.0 and len(params["config_sha256"]) == 64
    assert all(isinstance(v, float) for v in params["field_ned_ut"])  # µT, docs/data-dictionary.md
    for k in ("field_model", "field_ned_ut", "layout", "alignment", "response", "view", "gain",
              "dither", "date"):
        assert k in params
    kinds = dict(ch)
    assert kinds["sRGB"] == b"\0" and _before_idat(ch, "sRGB")
    assert struct.unpack(">I", kinds["gAMA"])[0] == 45455
    # Linear 16-bit: gAMA 1.0 and cICP (BT.709 primaries, linear transfer, RGB, full range).
    ch16 = dict(raw_chunks(p16))
    assert struct.unpack(">I", ch16["gAMA"])[0] == 100000
    assert ch16["cICP"] == bytes([1, 8, 0, 1]) and "sRGB" not in ch16
    # Second library: pypng lists the same chunks; Pillow reads text and the sRGB intent.
    import png
    from PIL import Image

    types = [c[0] for c in png.Reader(filename=str(p16)).chunks()]
    assert b"cICP" in types and b"gAMA" in types and types.index(b"gAMA") < types.index(b"IDAT")
    with Image.open(out) as im:
        assert im.info.get("srgb") == 0
        assert abs(im.info.get("gamma") - 0.45455) < 1e-6
        assert json.loads(im.text["magretina parameters"])["config_sha256"] == params["config_sha256"]
    # The sidecar lists the files with their checksums and the displayed statistics.
    side = json.loads((tmp_path / "f.json").read_text())
    assert side["parameters"]["config_sha256"] == params["config_sha256"]
    assert {f["path"] for f in side["files"]} == {"f.png", "f16.png"}
    assert "mean_cd_m2_displayed" in side["displayed"]["frame"]


def test_default_pixels_are_plain_srgb_rounding(tmp_path, capsys):
    """The default stimulus (sRGB display, no dither) decodes to exactly
    composite.to_uint8_srgb of the rendered frame (IEC 61966-2-1, rounding)."""
    import imageio.v3 as iio

    import renderer
    from renderer.composite import to_uint8_srgb
    from renderer.eye import load_layout
    from renderer.field import igrf
    from renderer.pose import Pose
    from renderer.response import Legendre
    from renderer.scene import dusk
    from renderer.views import WorldPanorama

    out = tmp_path / "f.png"
    assert run(["render", *SITE, "--width", "64", "--gain", "1", "--out", str(out),
                "--no-sidecar"], capsys)[0] == 0
    assert not (tmp_path / "f.json").exists()
    img = renderer.render(igrf(40.0, 5.0, 0.0, "2026-05-20"), Pose(0.0), load_layout("lateral"),
                          Legendre([0.7, 0.0, 0.1]), WorldPanorama(64), scene=dusk(1024),
                          gain=1.0, outside=0.25)
    np.testing.assert_array_equal(iio.imread(out), to_uint8_srgb(img))


def test_ten_bit_gamma_display_with_dither(tmp_path, capsys):
    """10-bit codes stored in 16-bit samples by bit replication, sBIT = 10, gAMA =
    100000/2.2; the codes come back by shifting right 6 bits (PNG spec §12.4)."""
    out = tmp_path / "g.png"
    rc, _, err = run(["render", *SITE, "--width", "64", "--out", str(out), "--display", "gamma",
                      "--gamma", "2.2", "--bits", "10", "--dither", "noise", "--dither-seed", "4"],
                     capsys)
    assert rc == 0, err
    ch = dict(raw_chunks(out))
    assert ch["sBIT"] == bytes([10, 10, 10])
    assert struct.unpack(">I", ch["gAMA"])[0] == round(100000 / 2.2)
    import png

    w, h, rows, info = png.Reader(filename=str(out)).read()
    a = np.vstack([np.asarray(r, np.uint16) for r in rows])
    assert info["bitdepth"] == 16
    codes = a >> 6
    np.testing.assert_array_equal((codes << 6) | (codes >> 4), a)
    side = json.loads((tmp_path / "g.json").read_text())
    assert side["parameters"]["dither"] == {"method": "noise", "seed": 4, "temporal": None}


def test_measured_table_display(tmp_path, capsys):
    """A grey photometer table: the file carries no sRGB chunk (its codes belong to that
    display) and says so in a Warning; the pattern's displayed mean is within half a code
    step of the requested 30 cd/m² background."""
    table = tmp_path / "lab.csv"
    rows = "".join(f"{k},{0.4 + 120.0 * (k / 255) ** 2.3}\n" for k in range(0, 256, 15))
    table.write_text("code,cd_m2\n" + rows)  # codes 0, 15, ..., 255
    out, pat = tmp_path / "t.png", tmp_path / "tp.png"
    rc, _, err = run(["render", *SITE, "--width", "64", "--out", str(out), "--pattern", str(pat),
                      "--display", "table", "--display-table", str(table), "--grey", "30 cd/m2",
                      "--gain", "0"], capsys)
    assert rc == 0, err
    ch = dict(raw_chunks(out))
    assert "sRGB" not in ch and "gAMA" not in ch
    assert "not sRGB" in texts(raw_chunks(pat))["Warning"]
    side = json.loads((tmp_path / "t.json").read_text())
    p = side["displayed"]["pattern"]
    assert p["mean_cd_m2_intended"] == pytest.approx(30.0, rel=1e-6)  # float32 image
    # Near 30 cd/m² one code step of this table is about 1 cd/m².
    assert abs(p["mean_cd_m2_displayed"] - 30.0) < 0.6


@pytest.mark.parametrize("flag", ["--out", "--png16", "--pattern", "--figure"])
def test_render_refuses_suffixes_it_does_not_write(tmp_path, capsys, flag):
    args = ["render", *SITE, "--width", "64", "--out", str(tmp_path / "a.png")]
    if flag == "--out":
        args[-1] = str(tmp_path / "a.jpg")
    else:
        args += [flag, str(tmp_path / "b.jpg")]
    rc, _, err = run(args, capsys)
    assert rc == 2 and ".jpg is not written" in err and "Traceback" not in err
    assert not os.listdir(tmp_path)


def test_bad_display_table_row_named_on_cli(tmp_path, capsys):
    table = tmp_path / "bad.csv"
    table.write_text("code,cd_m2\n0,0.5\n128,30\n200,29\n255,90\n")
    rc, _, err = run(["render", *SITE, "--width", "64", "--out", str(tmp_path / "a.png"),
                      "--display", "table", "--display-table", str(table)], capsys)
    assert rc == 2 and "line 4" in err and "non-monotone" in err


def test_figure_is_annotated_and_marked_not_a_stimulus(tmp_path, capsys):
    import imageio.v3 as iio

    out, fig = tmp_path / "a.png", tmp_path / "fig.png"
    rc, _, err = run(["render", *SITE, "--width", "128", "--out", str(out), "--figure", str(fig)],
                     capsys)
    assert rc == 0, err
    a, f = iio.imread(out), iio.imread(fig)
    assert f.shape[1] == a.shape[1] and f.shape[0] > a.shape[0]
    np.testing.assert_array_equal(f[:a.shape[0]], a)  # the band is below, the stimulus intact
    assert "not a stimulus" in texts(raw_chunks(fig))["Warning"]
    assert "Warning" not in texts(raw_chunks(out))


def test_demo_files_are_labelled(tmp_path, capsys):
    """Every demo PNG carries the standard keywords; stimuli the sRGB chunk, the labelled
    contact sheet a Warning that it is not a stimulus."""
    out = tmp_path / "demo"
    rc, _, err = run(["demo", "--out", str(out), "--width", "64"], capsys)
    assert rc == 0, err
    pngs = sorted(p for p in os.listdir(out) if p.endswith(".png"))
    assert pngs
    for name in pngs:
        ch = raw_chunks(out / name)
        t = texts(ch)
        assert {"Software", "Description", "Source", "Disclaimer"} <= set(t), name
        assert "sRGB" in dict(ch), name
        assert ("Warning" in t) == (name == "contact_sheet.png"), name
