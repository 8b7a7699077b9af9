"""``magretina run``: run (or resume) a study described by a TOML file."""

from __future__ import annotations

from ..errors import MagretinaError
from . import _common


def register(sub):
    p = sub.add_parser("run", help="run or resume a study (TOML) into a study folder",
                       description="Run a study: validate the whole file first, then render "
                                   "what is missing, resumably. Outputs are model "
                                   "predictions, not observations.")
    p.add_argument("study", help="study file (TOML); see `magretina new-study`")
    p.add_argument("--out", help="study folder (default outputs/<study name>)")
    p.add_argument("--jobs", type=int, default=1, help="worker processes (default 1)")
    p.add_argument("--executor", default="local", choices=("local", "dask"),
                   help="local process pool or Dask (default local)")
    p.add_argument("--scheduler", help="address of an existing Dask scheduler (tcp://HOST:PORT)")
    p.add_argument("--dry-run", action="store_true",
                   help="print shot and frame counts, size estimate, first shots; render nothing")
    p.add_argument("--force", action="store_true",
                   help="replace another study's folder (or use a non-empty folder)")
    p.add_argument("--quiet", action="store_true", help="no progress bars")
    p.add_argument("--force-jobs", action="store_true",
                   help="allow more --jobs than this machine has CPUs")
    p.add_argument("--max-memory-gb", type=float, default=None,
                   help="memory the run may plan to use, GB (default: half the machine's memory, "
                        "or the environment variable MAGRETINA_MAX_MEMORY_GB)")
    p.add_argument("--png-encoder", choices=("fast", "small"), default=None,
                   help="PNG compression preset for this run instead of the study file's "
                        "output.png_encoder: fast (default) or small files; lossless either way")
    _common.add_study_display_args(p)
    p.set_defaults(func=run)


def run(a) -> int:
    # deferred: library modules load when the command runs, so start-up stays light
    from ..study import run_study

    from ..budget import check_jobs

    check_jobs(a.jobs, a.force_jobs)
    if a.scheduler and a.executor != "dask":
        raise MagretinaError("--scheduler needs --executor dask")
    s = run_study(a.study, out_dir=a.out, jobs=a.jobs, executor=a.executor,
                  scheduler=a.scheduler, dry=a.dry_run, force=a.force, progress=not a.quiet,
                  max_memory_gb=a.max_memory_gb, force_jobs=a.force_jobs,
                  png_encoder=a.png_encoder, display=_common.study_display_overrides(a))
    if a.dry_run:
        return 0
    if s["shots_rendered"] == 0:
        print(f"study folder {s['out']}: all {s['frames']} frames ({s['shots']} shots) up to "
              f"date; nothing to render (tables checked in {s['wall_s']:.1f} s)")
    else:
        print(f"study folder {s['out']}: {s['shots']} shots, {s['frames']} frames; rendered "
              f"{s['frames_rendered']} frames of {s['shots_rendered']} shots in "
              f"{s['wall_s']:.1f} s ({s['executor']}, {s['jobs']} job(s))")
    print("These are predictions of a model under the study's hypothesis, not measurements.")
    return 0
