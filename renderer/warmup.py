"""Compiles the rendering kernels a command needs before it starts, when numba's disk cache
holds none of them yet.

For: the first run in a fresh environment.  numba compiles each kernel on its first call
(half a minute of CPU for the biggest), which used to leave a progress bar sitting at 0
with no word said, and made every study worker compile the same kernels at once.
:func:`ensure` checks cheaply whether the entry points' cache index files exist (the
package's stamp check in :mod:`renderer.kernels._cache` has already removed stale ones
at import), and if some are missing says so in one line, then compiles them on tiny
inputs built by the real pipeline (so the types are exactly those of a real call), in two
processes at once (this one and one child) when a second core is idle.  Every later
process (the command's own calls, study workers, the next command) loads them from the
cache.  Not for: correctness (a kernel not warmed here still compiles on first use) or
other numba code (spin dynamics, Fisher information).
"""

from __future__ import annotations

import glob
import os
import subprocess
import sys

from . import kernels  # noqa: F401  (its import runs the stale-cache check)
from .eye import load_layout
from .field.fixed import fixed
from .kernels import _cache
from .pipeline import composite_inputs, prepare, signal_map
from .pose import Pose
from .response import Legendre
from .scene import dusk
from .views import EyeDisc, HeadPanorama, WorldPanorama

#: Entry point -> (module of renderer.kernels, compiled function).
ENTRIES = {
    "pattern_equirect": ("rows", "_pattern_equirect"),
    "pattern_dirs": ("pixels", "_pattern_dirs"),
    "composite_world_aligned": ("rows", "_composite_world_aligned"),
    "composite_resampled": ("sampling", "_composite_resampled"),
    "composite_dirs": ("pixels", "_composite_dirs"),
}

#: Rough compile CPU seconds of each entry point on one core of the 2-core reference
#: machine (bench/startup.py), used only for the estimate in the message.  The row passes'
#: shared helpers are counted in each row entry point.
COST_S = {"pattern_equirect": 14, "pattern_dirs": 6, "composite_world_aligned": 14,
          "composite_resampled": 16, "composite_dirs": 6}


def _cache_dir():
    return _cache.numba_cache_dir(os.path.dirname(os.path.abspath(_cache.__file__)))


def missing(names) -> list[str]:
    """The entry points in ``names`` (keys of :data:`ENTRIES`) with no numba cache index.

    Imports :mod:`renderer.kernels` first, so stale entries are already gone.
    """
    # renderer.kernels, imported above, has already removed stale entries
    path = _cache_dir()
    if path is None:
        return list(names)
    ver = f"py{sys.version_info[0]}{sys.version_info[1]}"
    out = []
    for n in names:
        mod, fn = ENTRIES[n]
        if not glob.glob(os.path.join(glob.escape(path), f"{mod}.{fn}-*.{ver}*.nbi")):
            out.append(n)
    return out


def names_for(views, scene_shape=None, patterns=False) -> list[str]:
    """The entry points that rendering ``views`` needs (the visual-field mean always needs
    the equirectangular pattern pass).

    Parameters
    ----------
    views : iterable of View
    scene_shape : (H, W) of the scene, or None for the dusk scene made at the view's size
    patterns : bool
        Also the pattern passes of non-equirectangular views (pattern maps, metrics).
    """
    out = ["pattern_equirect"]
    for v in views:
        if getattr(v, "equirect", False):
            same = scene_shape is None or tuple(scene_shape[:2]) == tuple(v.shape)
            out.append("composite_world_aligned" if v.frame == "world" and same
                       else "composite_resampled")
        else:
            out.append("composite_dirs")
            if patterns:
                out.append("pattern_dirs")
    return list(dict.fromkeys(out))


def compile_entries(names):
    """Compile (or load) ``names`` in this process on tiny inputs of the real types."""
    layout = load_layout("lateral")
    inputs = prepare(fixed(50.0, 60.0), Pose(0.0), layout, Legendre((0.7, 0.0, 0.1)))
    world, disc = WorldPanorama(16), EyeDisc("left", size=8)
    scene = dusk(16)
    for n in names:
        if n == "pattern_equirect":
            signal_map(inputs, world, layout, inputs.lut)
        elif n == "pattern_dirs":
            signal_map(inputs, disc, layout, inputs.lut)
        elif n == "composite_world_aligned":
            composite_inputs(inputs, 1.0, layout, world, scene, 1.0, 0.25)
        elif n == "composite_resampled":
            composite_inputs(inputs, 1.0, layout, HeadPanorama(16), scene, 1.0, 0.25)
        elif n == "composite_dirs":
            composite_inputs(inputs, 1.0, layout, disc, scene, 1.0, 0.25)


def _split(names):
    """Two groups of about equal compile cost (the biggest first, each to the lighter)."""
    a, b, ca, cb = [], [], 0, 0
    for n in sorted(names, key=lambda n: -COST_S[n]):
        if ca <= cb:
            a.append(n)
            ca += COST_S[n]
        else:
            b.append(n)
            cb += COST_S[n]
    return a, b, max(ca, cb)


def _idle_core() -> bool:
    """Whether a second core is free: two compiling processes repeat the row passes'
    shared helpers (about a fifth more CPU in all), which only pays when the second
    process gets a core of its own (bench/startup.py: on a busy 2-core machine one process
    was faster)."""
    n = os.cpu_count() or 1
    try:
        load = os.getloadavg()[0]
    except OSError:
        return False
    return n >= 2 and load <= n - 1.5


def ensure(names, stream=None, jobs=None) -> list[str]:
    """Compile the entry points of ``names`` that numba's cache lacks, saying so first.

    Parameters
    ----------
    names : iterable of str
        Keys of :data:`ENTRIES` (see :func:`names_for`).
    stream : file, optional
        Where the one-line notice goes (default stderr).
    jobs : int, optional
        Processes to compile in (default 2 when a second core is idle, else 1).

    Returns
    -------
    list of str
        The entry points that were missing (empty: nothing to do, nothing printed).
    """
    need = missing(list(dict.fromkeys(names)))
    if not need:
        return []
    stream = sys.stderr if stream is None else stream
    if jobs is None:
        jobs = 2 if _idle_core() else 1
    here, there, cost = _split(need) if jobs >= 2 and len(need) > 1 else (need, [], 0)
    if not there:
        cost = sum(COST_S[n] for n in need)
    print(f"compiling {len(need)} rendering kernel(s) once, about {cost + 3} s; "
          f"later runs start in seconds", file=stream, flush=True)
    child = None
    if there:
        env = dict(os.environ)
        root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
        env["PYTHONPATH"] = root + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH")
                                    else "")
        try:
            child = subprocess.Popen([sys.executable, "-m", "renderer.warmup", *there], env=env,
                                     stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL)
        except OSError:  # cannot start a process: compile everything here
            here, child = need, None
    try:
        compile_entries(here)
    finally:
        if child is not None:
            child.wait()
    # whatever the child could not cache compiles here on first use
    return need


if __name__ == "__main__":  # the child of ensure()
    compile_entries([n for n in sys.argv[1:] if n in ENTRIES])
