"""``magretina report STUDY_DIR``: a self-contained static HTML report of a finished study.

Writes ``STUDY_DIR/report.html`` (parameters, contact sheet, plots, metrics table;
no server or network needed to view it).  ``--check-browser`` then opens it in
headless Chromium and fails (exit 1) on console errors or undecoded images.
"""

from __future__ import annotations

import os
import sys

from ..errors import MagretinaError


def register(sub):
    p = sub.add_parser("report", help="write a static HTML report of a finished study",
                       description="Write a self-contained HTML report of a study folder. The "
                                   "report's images and numbers are model predictions, not "
                                   "measurements.")
    p.add_argument("study_dir", metavar="STUDY_DIR", help="folder written by 'magretina run'")
    p.add_argument("--out", help="HTML file to write (default STUDY_DIR/report.html)")
    p.add_argument("--thumb-px", type=int, default=192, aliases=["--thumb"],
                   help="thumbnail size, pixels (16..1024)")
    p.add_argument("--max-frames", type=int, default=400, help="at most this many thumbnails")
    p.add_argument("--force", action="store_true", help="overwrite an existing report")
    p.add_argument("--check-browser", action="store_true",
                   help="open the report in headless Chromium and check it loads cleanly")
    p.add_argument("--browser", metavar="PATH",
                   help="Chromium executable for --check-browser (default: on PATH)")
    p.add_argument("--quiet", action="store_true", help="no progress bars")
    p.set_defaults(func=run)


def run(a) -> int:
    # deferred: library modules load when the command runs, so start-up stays light
    from ..browser import BROWSER_NAMES, browser_check, find_browser
    from ..report import build_report

    if a.max_frames < 0:
        raise MagretinaError(f"--max-frames = {a.max_frames}: must be >= 0")
    if a.check_browser and find_browser(a.browser) is None:
        # say so before spending the time on the report
        looked = f"--browser {a.browser}" if a.browser else "looked for " + ", ".join(BROWSER_NAMES)
        raise MagretinaError(f"--check-browser needs headless Chromium and none was found ({looked}); "
                             f"install it (Debian/Ubuntu: 'apt-get install chromium') or pass "
                             f"--browser PATH, or leave out --check-browser")
    bars = {}

    def progress(stage, done, total):
        # one bar per stage on stderr (plots, then thumbnails); the report takes seconds
        # deferred: library modules load when the command runs, so start-up stays light
        from tqdm import tqdm

        if stage not in bars:
            for b in bars.values():
                b.close()
            bars[stage] = tqdm(total=total, desc=stage, unit=stage.rstrip("s"), file=sys.stderr,
                               disable=a.quiet)
        bar = bars[stage]
        bar.total = max(bar.total or 0, total)
        bar.update(done - bar.n)

    try:
        out = build_report(a.study_dir, out=a.out, thumb_px=a.thumb_px, max_frames=a.max_frames,
                           force=a.force, progress=progress)
    finally:
        for b in bars.values():
            b.close()
    print(out)
    if a.check_browser:
        res = browser_check(out, browser=a.browser)
        bad = [i for i in res["images"] if not (i["complete"] and i["w"] > 0)]
        print(f"{res['browser']}: {len(res['images'])} image(s), {len(bad)} not rendered, "
              f"{len(res['console_errors'])} console error(s)")
        for e in res["console_errors"]:
            print("  " + e)
        if bad or res["console_errors"]:
            return 1
    return 0 if os.path.isfile(out) else 1
