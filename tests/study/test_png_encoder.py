"""PNG encoder presets ("fast", "small"): lossless, metadata chunks kept, selectable in the
study file and on the command line (renderer.io.png_bytes, output.png_encoder,
``magretina run --png-encoder``).

Reference for "lossless": the samples decoded by pypng and Pillow (independent PNG
decoders from PyPI) equal the encoded array exactly, as the W3C PNG specification (3rd
edition, 2025, clause 10: zlib deflate is lossless) requires of every conforming encoder.
Chunk order follows the same specification (clause 5.6: sRGB, gAMA, cHRM before IDAT;
text chunks anywhere between IHDR and IEND).
"""

import io
import os
import struct

import numpy as np
import pytest

from renderer import io as rio
from renderer import pngmeta
from renderer.errors import MagretinaError
from renderer.study import run_study
from studyhelp import GRID_STUDY, tree_digest, write


def _decode_pypng(data):
    import png

    W, H, rows, info = png.Reader(bytes=data).read()
    dt = np.uint16 if info["bitdepth"] == 16 else np.uint8
    return np.vstack([np.asarray(r, dtype=dt) for r in rows]).reshape(H, W, info["planes"])


def _chunk_types(data):
    i, out = 8, []
    while i < len(data):
        n = struct.unpack(">I", data[i:i + 4])[0]
        out.append(data[i + 4:i + 8])
        i += 12 + n
    return out


def _images():
    rng = np.random.default_rng(5)
    smooth = np.linspace(0, 1, 48 * 80).reshape(48, 80)
    return [
        (rng.random((48, 80, 3)) * 256).astype(np.uint8),               # noise, RGB
        (np.stack([smooth, smooth.T.reshape(48, 80), 1 - smooth], -1) * 255).astype(np.uint8),
        (rng.random((48, 80, 4)) * 256).astype(np.uint8),               # RGBA
        (rng.random((48, 80)) * 256).astype(np.uint8),                  # grey
        (rng.random((48, 80, 3)) * 65536).astype(np.uint16),            # 16-bit RGB
        (smooth[..., None] * np.array([65535, 30000, 1])).astype(np.uint16),
    ]


@pytest.mark.parametrize("encoder", rio.PNG_ENCODERS)
def test_every_preset_is_lossless_and_keeps_chunks(encoder):
    """Decoded samples equal the input for 8/16-bit, grey/RGB/RGBA (pypng; Pillow too for
    8-bit); the colour and text chunks given are in the file, after IHDR and before IDAT,
    and no chunk the encoder library adds of its own (only IHDR, IDAT, IEND besides)."""
    from PIL import Image

    given = pngmeta.srgb_chunks() + [pngmeta.text_chunk("Comment", "preset check")]
    for a in _images():
        data = rio.png_bytes(a, given, encoder=encoder)
        b = _decode_pypng(data)
        assert np.array_equal(b.reshape(a.shape), a), (encoder, a.dtype, a.shape)
        if a.dtype == np.uint8:
            assert np.array_equal(np.asarray(Image.open(io.BytesIO(data))), a)
        kinds = _chunk_types(data)
        assert kinds[0] == b"IHDR" and kinds[-1] == b"IEND"
        first_idat = kinds.index(b"IDAT")
        assert kinds[1:1 + len(given)] == [c[4:8] for c in given]
        assert set(kinds) == {b"IHDR", b"IDAT", b"IEND"} | {c[4:8] for c in given}
        assert first_idat == 1 + len(given)
        if a.dtype == np.uint8 and a.ndim == 3 and a.shape[2] == 3:
            assert Image.open(io.BytesIO(data)).info["Comment"] == "preset check"


def test_presets_trade_size_the_right_way():
    """On a smooth image "small" (zlib level 6, adaptive filters) is no bigger than "fast"
    (common practice: higher deflate levels and per-row filter choice never lose much and
    usually gain on smooth images)."""
    smooth = _images()[1]
    assert len(rio.png_bytes(smooth, encoder="small")) <= len(rio.png_bytes(smooth, encoder="fast"))


def test_unknown_preset_is_refused_with_its_name():
    with pytest.raises(MagretinaError, match="'fastest'.*'fast', 'small'"):
        rio.png_bytes(np.zeros((2, 2, 3), np.uint8), encoder="fastest")


STUDY = GRID_STUDY.replace("step_deg = 30.0", "step_deg = 180.0").replace(
    "values = [30.0, 45.0, 60.0]", "values = [30.0]").replace(
    'values = [[0.7, 0.0, 0.1], [0.7, 0.0, -0.1]]', "values = [[0.7, 0.0, 0.1]]").replace(
    'labels = ["p2_plus", "p2_minus"]', 'labels = ["p2_plus"]')


def _frames(out):
    got = {}
    for dirpath, _d, files in os.walk(os.path.join(out, "frames")):
        for f in sorted(files):
            p = os.path.join(dirpath, f)
            with open(p, "rb") as fh:
                data = fh.read()
            got[os.path.relpath(p, out)] = (data, _decode_pypng(data))
    return got


def test_study_encoder_choice_changes_compression_only(tmp_path):
    """output.png_encoder = "small" vs the default "fast": the same frame files with the
    same decoded pixels (8-bit and 16-bit) and the same text chunks; the tables, which do
    not depend on compression, are byte-identical; the configuration's identity
    (config_sha256) does not change, so a folder can be resumed with the other preset;
    the run's --png-encoder option wins over the study file."""
    fast = write(tmp_path, STUDY.replace("{output_extra}", "png16 = true"), "fast.toml")
    small = write(tmp_path, STUDY.replace("{output_extra}", 'png16 = true\npng_encoder = "small"'),
                  "small.toml")
    a, b, c = (str(tmp_path / n) for n in ("a", "b", "c"))
    run_study(fast, a, progress=False)
    run_study(small, b, progress=False)
    run_study(small, c, progress=False, png_encoder="fast")
    fa, fb, fc = _frames(a), _frames(b), _frames(c)
    assert set(fa) == set(fb) == set(fc) and len(fa) == 4
    for rel in fa:
        assert np.array_equal(fa[rel][1], fb[rel][1]), rel
        assert fa[rel][0] == fc[rel][0], rel  # the option replaced the study file's preset
        ta = [k for k in _chunk_types(fa[rel][0]) if k not in (b"IDAT",)]
        assert ta == [k for k in _chunk_types(fb[rel][0]) if k not in (b"IDAT",)]
    assert any(fa[rel][0] != fb[rel][0] for rel in fa)  # the presets do differ
    da, db = tree_digest(a), tree_digest(b)
    for rel in ("conditions.csv", "metrics.csv"):
        assert da[rel] == db[rel]
    from renderer.study.expand import load_study

    assert load_study(fast).config_sha256 == load_study(small).config_sha256
    # resuming the "fast" folder with the "small" study file is the same study
    s = run_study(small, a, progress=False)
    assert s["frames_rendered"] == 0


def test_bad_preset_in_study_file_and_option(tmp_path):
    bad = write(tmp_path, STUDY.replace("{output_extra}", 'png_encoder = "tiny"'))
    with pytest.raises(MagretinaError, match="output.png_encoder.*tiny"):
        run_study(bad, str(tmp_path / "o"), progress=False)
    ok = write(tmp_path, STUDY.replace("{output_extra}", ""), "ok.toml")
    with pytest.raises(MagretinaError, match="--png-encoder.*'tiny'"):
        run_study(ok, str(tmp_path / "o2"), progress=False, png_encoder="tiny")


def test_cli_option(tmp_path, capsys):
    from renderer.cli import main

    ok = write(tmp_path, STUDY.replace("{output_extra}", ""), "ok.toml")
    assert main(["run", ok, "--out", str(tmp_path / "o"), "--quiet", "--png-encoder", "small"]) == 0
    with pytest.raises(SystemExit) as e:
        main(["run", ok, "--out", str(tmp_path / "o3"), "--png-encoder", "tiny"])
    assert e.value.code == 2
