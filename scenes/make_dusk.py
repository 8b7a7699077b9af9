"""Write the procedural dusk panorama to a PNG (8-bit sRGB, or 16-bit linear with --png16)."""

import argparse

from renderer.io import write_png8_srgb, write_png16_linear
from renderer.scene import dusk


def main():
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--width", type=int, default=2048)
    ap.add_argument("--out", default="scenes/dusk.png")
    ap.add_argument("--png16", action="store_true")
    a = ap.parse_args()
    s = dusk(a.width)
    (write_png16_linear if a.png16 else write_png8_srgb)(a.out, s.image)
    print(a.out)


if __name__ == "__main__":
    main()
