"""``magretina new-study``: write a commented example study file (an invented scenario)."""

from __future__ import annotations

import os

from ._common import refuse_overwrite


def register(sub):
    p = sub.add_parser("new-study", help="write a commented example study file",
                       description="Write a commented example study (TOML) to start from.")
    p.add_argument("path", nargs="?", default="study.toml", help="file to write (default study.toml)")
    p.add_argument("--force", action="store_true", help="overwrite an existing file")
    p.set_defaults(func=run)


def example_text(path=None) -> str:
    """The example study; with ``path``, its header's commands name that file."""
    # deferred: library modules load when the command runs, so start-up stays light
    from importlib import resources

    text = (resources.files("renderer.study") / "examples" / "example_study.toml").read_text(
        encoding="utf-8")
    if path is not None:
        text = text.replace("magretina run example_study.toml",
                            f"magretina run {os.fspath(path)}")
    return text


def run(a) -> int:
    # deferred: library modules load when the command runs, so start-up stays light
    from ..io import atomic_write_text

    refuse_overwrite([a.path], a.force)
    atomic_write_text(a.path, example_text(a.path))
    print(f"wrote {a.path}; check it with: magretina run {a.path} --dry-run")
    return 0
