"""``magretina demo``: render the built-in demo study on defaults."""

from __future__ import annotations

import os

from . import _common


def register(sub):
    p = sub.add_parser("demo", help="render the built-in demo study into outputs/demo/")
    p.add_argument("--out", default="outputs/demo", metavar="DIR", help="output folder")
    p.add_argument("--width", type=int, default=1024, help="panorama width, pixels")
    p.add_argument("--force", action="store_true", help="write into a non-empty folder of other content")
    _common.add_display_args(p)
    p.set_defaults(func=run)


def run(a) -> int:
    # deferred: library modules load when the command runs, so start-up stays light
    from ..demo import CAUTION, SITE, run_demo

    from ..warmup import ensure  # deferred: numba loads only for rendering

    display, method, seed = _common.display_from_args(a)
    # on a cold cache: say so, and compile in two processes (later runs load them)
    ensure(["pattern_equirect", "composite_world_aligned", "composite_resampled",
            "composite_dirs"])
    files = run_demo(a.out, width=a.width, force=a.force, display=display, dither=method,
                     dither_seed=seed)
    from ..vocabulary import latlon_text

    print(f"demo: {SITE['name']}, {latlon_text(SITE['lat_deg'], SITE['lon_deg'], 2)}, "
          f"{SITE['date']} (an invented scenario)")
    print(f"wrote {len(files)} files to {os.path.abspath(a.out)}:")
    for f in files:
        print("  " + f)
    print(CAUTION)
    return 0
