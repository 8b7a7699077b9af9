"""``magretina report STUDY_DIR``: a self-contained static HTML report of a finished study.

Writes ``STUDY_DIR/report.html`` (parameters, contact sheet, plots, metrics table;
no server or network needed to view it).  ``--check-browser`` then opens it in
headless Chromium and fails (exit 1) on console errors or undecoded images.
"""

from __future__ import annotations

import os


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
    p.add_argument("--browser", help="Chromium executable for --check-browser (default: on PATH)")
    p.set_defaults(func=run)


def run(a) -> int:
    from ..errors import MagretinaError
    from ..report import browser_check, build_report

    if a.max_frames < 0:
        raise MagretinaError(f"--max-frames = {a.max_frames}: must be >= 0")
    out = build_report(a.study_dir, out=a.out, thumb_px=a.thumb_px, max_frames=a.max_frames,
                       force=a.force)
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
