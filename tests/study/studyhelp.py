"""Helpers for the study tests: small study files (64 x 32 panoramas), tree digests."""

import hashlib
import os
import textwrap


GRID_STUDY = """
[study]
name = "grid-test"
seed = 42

[site]
name = "Test Marsh (invented)"
lat_deg = 40.0
lon_deg = 5.0

[field]
model = "igrf"
date = "2026-05-20"

[response]
kind = "legendre"
coeffs = [0.7, 0.0, 0.1]

[views.world]
kind = "world-panorama"
width = 64

[render]
gain = 2.0

[sequence]
kind = "heading-sweep"
start_deg = 0.0
stop_deg = 360.0
step_deg = 30.0

[output]
png8 = true
{output_extra}

[[sweep.axis]]
key = "site.lat_deg"
values = [30.0, 45.0, 60.0]
name = "latitude_deg"

[[sweep.axis]]
key = "response.coeffs"
values = [[0.7, 0.0, 0.1], [0.7, 0.0, -0.1]]
labels = ["p2_plus", "p2_minus"]
name = "response_shape"
"""


def write(tmp_path, text, name="study.toml"):
    p = tmp_path / name
    p.write_text(textwrap.dedent(text), encoding="utf-8")
    return str(p)


def tree_digest(root, skip=()):
    """relative path -> sha256 of every file under root."""
    out = {}
    for dirpath, _dirs, files in os.walk(root):
        for f in files:
            full = os.path.join(dirpath, f)
            rel = os.path.relpath(full, root)
            if rel in skip:
                continue
            with open(full, "rb") as fh:
                out[rel] = hashlib.sha256(fh.read()).hexdigest()
    return out




def read_png16(path):
    """Decode a 16-bit PNG with pypng (Pillow, behind imageio, reduces 16-bit RGB to 8 bits)."""
    import numpy as np
    import png

    w, h, rows, info = png.Reader(filename=str(path)).asDirect()
    assert info["bitdepth"] == 16, info
    return np.array(list(rows), dtype=np.uint16).reshape(h, w, info["planes"])
