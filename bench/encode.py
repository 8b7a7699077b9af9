"""Benchmark of stimulus encoding: display model + quantiser + PNG, side by side.

Prints, in one run, for one rendered frame (world panorama on the dusk scene):

* the median time of each encode (quantise and PNG-encode to bytes, no disk): the
  plain 8-bit sRGB path (``composite.to_uint8_srgb`` + PNG, what every default output
  has always done), the same through the display model without dither, noisy-bit and
  ordered dithering, a 10-bit gamma display with noise, the 16-bit linear file;
* each one's ratio to the plain path measured in the same run, and the file sizes
  (dither noise costs PNG compression); the quantisers alone (no PNG) for the split;
* the dither figures of the tests in numbers: the mean error of a uniform patch
  between two codes in binomial standard errors, and the fitted amplitude and phase
  error of a 0.5 % sinusoid on 8-bit sRGB, for rounding, noise and ordered.

Usage: ``python bench/encode.py [--width 1024] [--repeat 7]``.  Timings alternate
the methods round by round so that a busy machine affects all of them alike.
"""

from __future__ import annotations

import argparse
import os
import sys
import time

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.abspath(__file__))))


def frame(width):
    import renderer
    from renderer.eye import load_layout
    from renderer.field import igrf
    from renderer.pose import Pose
    from renderer.response import Legendre
    from renderer.scene import dusk
    from renderer.views import WorldPanorama

    return renderer.render(igrf(52.0, 5.0, 0.0, "2026-06-01"), Pose(30.0), load_layout("lateral"),
                           Legendre([0.7, 0.0, 0.1]), WorldPanorama(width), scene=dusk(width),
                           gain=1.0)


def encoders(img):
    from renderer.composite import to_uint8_srgb
    from renderer.display import SRGB8, make_display
    from renderer.dither import frame_seed, quantise
    from renderer.io import display_png_bytes, linear16_png_bytes, png_bytes

    g10 = make_display("gamma", bits=10, gamma=2.2)
    return {
        "plain sRGB 8-bit": lambda: png_bytes(to_uint8_srgb(img)),
        "display sRGB, none": lambda: display_png_bytes(quantise(SRGB8, img, "none"), SRGB8),
        "display sRGB, noise": lambda: display_png_bytes(
            quantise(SRGB8, img, "noise", frame_seed(1, 0)), SRGB8),
        "display sRGB, ordered": lambda: display_png_bytes(
            quantise(SRGB8, img, "ordered", frame_seed(1, 0)), SRGB8),
        "gamma 10-bit, noise": lambda: display_png_bytes(
            quantise(g10, img, "noise", frame_seed(1, 0)), g10),
        "linear 16-bit": lambda: linear16_png_bytes(img),
        "quantise only, plain": lambda: to_uint8_srgb(img),
        "quantise only, noise": lambda: quantise(SRGB8, img, "noise", frame_seed(1, 0)),
        "quantise only, ordered": lambda: quantise(SRGB8, img, "ordered", frame_seed(1, 0)),
    }


def dither_figures():
    from renderer.display import SRGB8 as d
    from renderer.dither import quantise

    L = d.black_cd_m2 + d.lut.sum(axis=0)
    out = []
    # Uniform patch 30 % of the way from code 100 to 101.
    tgt = L[100] + 0.3 * (L[101] - L[100])
    lin = np.full((512, 512, 3), float(d.to_relative(tgt)))
    se = (L[101] - L[100]) * np.sqrt(0.21 / lin[..., 0].size)
    for m in ("none", "noise", "ordered"):
        err = d.displayed_luminance(quantise(d, lin, m, seed=0)).mean() - tgt
        out.append(f"  uniform patch, {m:8s}: mean error {err / se:+8.2f} standard errors")
    # 0.5 % sinusoid around code 118.
    H, W, lam, phi = 256, 1024, 64.0, 0.7
    x = np.arange(W, dtype=np.float64)
    target = L[118] * (1 + 0.005 * np.sin(2 * np.pi * x / lam + phi))
    lin = np.repeat(np.repeat(d.to_relative(target)[None, :, None], H, 0), 3, 2)
    X = np.stack([np.ones(W), np.sin(2 * np.pi * x / lam), np.cos(2 * np.pi * x / lam)], 1)
    for m in ("none", "noise", "ordered"):
        y = d.displayed_luminance(quantise(d, lin, m, seed=0)).mean(axis=0)
        a, b, c = np.linalg.lstsq(X, y, rcond=None)[0]
        amp = np.hypot(b, c) / (0.005 * L[118])
        dp = np.angle(np.exp(1j * (np.arctan2(c, b) - phi)))
        ph = f"{dp:+.4f} rad" if amp > 1e-6 else "undefined (no modulation left)"
        out.append(f"  0.5 % sinusoid, {m:8s}: amplitude {amp:6.3f} of intended, phase error "
                   f"{ph}")
    return out


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--width", type=int, default=1024)
    ap.add_argument("--repeat", type=int, default=7)
    a = ap.parse_args(argv)
    img = frame(a.width)
    enc = encoders(img)
    sizes = {k: (len(r) if isinstance(r := f(), bytes) else None) for k, f in enc.items()}
    times = {k: [] for k in enc}
    for _ in range(a.repeat):
        for k, f in enc.items():
            t = time.perf_counter()
            f()
            times[k].append(time.perf_counter() - t)
    med = {k: float(np.median(v)) for k, v in times.items()}
    base = med["plain sRGB 8-bit"]
    print(f"encode of a {a.width} x {a.width // 2} frame (median of {a.repeat}, same run):")
    for k in enc:
        size = "" if sizes[k] is None else (f"{sizes[k] / 1e3:8.1f} kB  "
                                            f"x{sizes[k] / sizes['plain sRGB 8-bit']:5.2f}")
        print(f"  {k:24s} {1e3 * med[k]:8.1f} ms  x{med[k] / base:5.2f}   {size}")
    print("dither figures (8-bit sRGB display):")
    for line in dither_figures():
        print(line)


if __name__ == "__main__":
    main()
