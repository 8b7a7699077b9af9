"""Benchmark: lossless PNG encoders on real rendered frames (8-bit sRGB and 16-bit linear).

Renders a few composited world panoramas (the study benchmark's view and scene), then
times every available lossless encoder on the same frames, interleaved round by round
so a busy machine affects all alike, and prints best and median time per frame, the
file size, and ratios to the fastest.  Every candidate's output is decoded and compared
with the input pixels (a mismatch is reported and the candidate is not lossless).
Candidates: Pillow (via imageio) at compress levels 1/3/6, pypng (16-bit) at 1/6,
imagecodecs' libpng at levels 1/6 with its fast filter/strategy settings, and fpng
(8-bit RGB only) when installed.  The encoder presets of :mod:`renderer.io`
("fast", "small") are listed last.  Run:  python bench/encoders.py [--width 1024]
"""

from __future__ import annotations

import argparse
import io
import os
import sys
import time

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))


def frames(width, n):
    from renderer import pipeline
    from renderer.composite import to_uint8_srgb, to_uint16_linear
    from renderer.eye import load_layout
    from renderer.field import fixed
    from renderer.pose import Pose
    from renderer.response import Legendre
    from renderer.scene import dusk
    from renderer.views import WorldPanorama

    scene = dusk(width)
    lay = load_layout("lateral")
    out8, out16 = [], []
    for k in range(n):
        img = pipeline.render(fixed(49.0, 66.0, 3.0), Pose(360.0 * k / n, 0.0, 0.0), lay,
                              Legendre([0.7, 0.0, 0.1]), WorldPanorama(width), scene, gain=2.0)
        out8.append(to_uint8_srgb(img))
        out16.append(to_uint16_linear(img))
    return out8, out16


def candidates():
    """name -> (bit depths, encode(array) -> bytes)."""
    import imageio.v3 as iio

    from renderer import io as rio

    c = {}
    for lvl in (1, 3, 6):
        def pil(a, lvl=lvl):
            buf = io.BytesIO()
            iio.imwrite(buf, a, extension=".png", compress_level=lvl)
            return buf.getvalue()
        c[f"pillow level {lvl}"] = ((8,), pil)
    import png

    for lvl in (1, 6):
        def pypng(a, lvl=lvl):
            buf = io.BytesIO()
            H, W, C = a.shape
            png.Writer(W, H, greyscale=False, alpha=False, bitdepth=16, compression=lvl).write(buf, a.reshape(H, W * C))
            return buf.getvalue()
        c[f"pypng level {lvl}"] = ((16,), pypng)
    try:
        import imagecodecs as ic

        c["imagecodecs level 1, sub filter, RLE"] = (
            (8, 16), lambda a: ic.png_encode(a, level=1, strategy=3, filter=16))
        c["imagecodecs level 1, sub filter"] = (
            (8, 16), lambda a: ic.png_encode(a, level=1, filter=16))
        c["imagecodecs level 1, default filters"] = ((8, 16), lambda a: ic.png_encode(a, level=1))
        c["imagecodecs level 3, default filters"] = ((8, 16), lambda a: ic.png_encode(a, level=3))
        c["imagecodecs level 6, default filters"] = ((8, 16), lambda a: ic.png_encode(a, level=6))
        if ic.SPNG.available:
            c["imagecodecs spng level 1"] = ((8, 16), lambda a: ic.spng_encode(a, level=1))
    except ImportError:
        print("imagecodecs not installed")
    try:
        import fpng

        c["fpng"] = ((8,), lambda a: fpng.from_bytes(np.ascontiguousarray(a).tobytes(),
                                                    a.shape[1], a.shape[0], a.shape[2]))
    except ImportError:
        print("fpng not installed")
    for preset in rio.PNG_ENCODERS:
        c[f"renderer.io '{preset}'"] = ((8, 16), lambda a, p=preset: rio.png_bytes(a, encoder=p))
    return c


def decode(data):
    import png

    r = png.Reader(bytes=data)
    W, H, rows, info = r.read()
    dt = np.uint16 if info["bitdepth"] == 16 else np.uint8
    return np.vstack([np.asarray(x, dtype=dt) for x in rows]).reshape(H, W, info["planes"])


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--width", type=int, default=1024)
    ap.add_argument("--frames", type=int, default=4)
    ap.add_argument("--repeat", type=int, default=5)
    a = ap.parse_args(argv)
    f8, f16 = frames(a.width, a.frames)
    cands = candidates()
    for bits, imgs in ((8, f8), (16, f16)):
        use = {k: fn for k, (depths, fn) in cands.items() if bits in depths}
        sizes, ok, ts = {}, {}, {k: [] for k in use}
        for k, fn in use.items():
            data = [fn(x) for x in imgs]
            sizes[k] = float(np.mean([len(d) for d in data]))
            ok[k] = all(np.array_equal(decode(d), x) for d, x in zip(data, imgs))
        for _ in range(a.repeat):  # interleaved rounds
            for k, fn in use.items():
                t = time.perf_counter()
                for x in imgs:
                    fn(x)
                ts[k].append((time.perf_counter() - t) / len(imgs))
        fastest = min(min(v) for v in ts.values())
        print(f"{bits}-bit frames {a.width}x{a.width // 2} RGB ({len(imgs)} rendered frames, "
              f"{a.repeat} interleaved rounds; load average {os.getloadavg()[0]:.1f} on "
              f"{os.cpu_count()} cores)")
        print(f"  {'encoder':40s} {'best ms':>8s} {'median':>8s} {'/fastest':>8s} {'kB':>7s} lossless")
        for k in use:
            print(f"  {k:40s} {min(ts[k]) * 1e3:8.1f} {np.median(ts[k]) * 1e3:8.1f} "
                  f"{min(ts[k]) / fastest:8.2f} {sizes[k] / 1e3:7.0f} {'yes' if ok[k] else 'NO'}")


if __name__ == "__main__":
    main()
