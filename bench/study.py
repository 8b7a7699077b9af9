"""Benchmark of the study runner: a 360-frame 1024 x 512 heading sweep with PNG export.

Prints, in one run and side by side:

* the wall time of ``run_study`` on 2 local worker processes (fresh folder);
* the encoding floor: the same 2 processes only PNG-encode the same 360 frames (the
  study's own 8-bit frames, decoded once outside the timing) with the fastest lossless
  encoder measured by bench/encoders.py (the "fast" preset of renderer.io) and write
  them atomically, one after the other;
* their ratio (target <= 1.1), and for reference the floor as defined before the
  encoder presets (sRGB conversion + zlib level 6 + atomic write);
* the shot throughput of a 2-worker Dask LocalCluster relative to the local pool,
  on the same frames as 360 one-frame shots.

Usage: ``.venv/bin/python bench/study.py [--frames 360] [--width 1024] [--no-extras]``.  Runs in a
temporary folder; takes about a minute on 2 cores.
"""

from __future__ import annotations

import argparse
import multiprocessing as mp
import os
import shutil
import sys
import tempfile
import time

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.abspath(__file__))))

STUDY = """
[study]
name = "bench"
seed = 1

[site]
name = "Bench Fen (invented)"
lat_deg = 52.0
lon_deg = 5.0

[field]
model = "igrf"
date = "2026-05-20"

[response]
kind = "legendre"
coeffs = [0.7, 0.0, 0.1]

[views.world]
kind = "world-panorama"
width = {width}

[render]
gain = 2.0

[sequence]
{sequence}

[output]
png8 = true
{extra}
"""

SWEEP_SEQ = 'kind = "heading-sweep"\nstart_deg = 0.0\nstop_deg = 360.0\nstep_deg = {step}'
SHOTS_SEQ = ('kind = "still"\n\n[[sweep.axis]]\nkey = "pose.yaw_deg"\nrange = [0.0, 360.0, {step}]'
             '\nname = "yaw"')


def _encode_worker(args):
    from renderer.composite import to_uint8_srgb
    from renderer.io import atomic_write_bytes, png_bytes

    imgs, folder, idx, old = args
    for i in idx:
        img = imgs[i % len(imgs)]
        if old:  # the floor before the presets: sRGB conversion and zlib level 6
            data = png_bytes(to_uint8_srgb(img), encoder="small")
        else:
            data = png_bytes(img, encoder="fast")
        atomic_write_bytes(os.path.join(folder, f"f{i:04d}.png"), data)
    return len(idx)


_IMGS = None


def _init(imgs):
    global _IMGS
    import numba

    numba.set_num_threads(1)
    _IMGS = imgs


def _encode_chunk(args):
    folder, idx, old = args
    return _encode_worker((_IMGS[old], folder, idx, old))


def encoding_floor(frames, n, jobs, folder, old=False):
    """Seconds for ``jobs`` processes to encode and write ``n`` frames (cycling through
    ``frames``: 8-bit codes, or linear float for the ``old`` floor), pool start
    excluded."""
    ctx = mp.get_context("spawn")
    with ctx.Pool(jobs, initializer=_init, initargs=({old: frames},)) as pool:
        pool.map(_encode_chunk, [(folder, [0], old)] * jobs)  # warm up imports
        idx = np.array_split(np.arange(n), jobs * 8)
        chunks = [(folder, [int(i) for i in c], old) for c in idx]
        t0 = time.perf_counter()
        done = sum(pool.map(_encode_chunk, chunks))
        dt = time.perf_counter() - t0
    assert done == n
    return dt


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--frames", type=int, default=360)
    ap.add_argument("--width", type=int, default=1024)
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--no-extras", action="store_true",
                    help="only the run and the floor (skip the level-6 floor and the Dask shots)")
    a = ap.parse_args()

    from renderer.study import run_study

    step = 360.0 / a.frames
    tmp = tempfile.mkdtemp(prefix="magretina-bench-")
    try:
        sweep = os.path.join(tmp, "sweep.toml")
        with open(sweep, "w") as fh:
            fh.write(STUDY.format(width=a.width, sequence=SWEEP_SEQ.format(step=step),
                                  extra="metrics = true"))
        out = os.path.join(tmp, "sweep_out")
        t0 = time.perf_counter()
        s = run_study(sweep, out, jobs=a.jobs, progress=False)
        t_run = time.perf_counter() - t0
        assert s["frames_rendered"] == a.frames

        # Frames for the floor: a few of the study's own frames (8-bit codes).
        import imageio.v3 as iio

        from renderer.io import read_image_linear

        paths = [os.path.join(out, f"frames/shot000/world_{k:04d}.png")
                 for k in range(0, a.frames, max(1, a.frames // 8))]
        codes = [np.asarray(iio.imread(p)) for p in paths]
        lin = [read_image_linear(p) for p in paths]
        floor_dir = os.path.join(tmp, "floor")
        os.makedirs(floor_dir)
        t_floor = encoding_floor(codes, a.frames, a.jobs, floor_dir)
        t_old = None if a.no_extras else encoding_floor(lin, a.frames, a.jobs, floor_dir, old=True)

        print(f"study run, {a.frames} frames {a.width}x{a.width // 2}, {a.jobs} local workers: "
              f"{t_run:7.2f} s  ({a.frames / t_run:6.1f} frames/s, includes pool start, "
              f"planning, metrics, tables)")
        print(f"encoding floor (fastest lossless PNG + atomic write, {a.jobs} workers): "
              f"{t_floor:7.2f} s  ({a.frames / t_floor:6.1f} frames/s)")
        if t_old is not None:
            print(f"  floor as defined before (sRGB + zlib level 6 + atomic write): "
                  f"{t_old:7.2f} s  ({a.frames / t_old:6.1f} frames/s)")
        print(f"ratio run / floor: {t_run / t_floor:5.2f}x   (target <= 1.1x); "
              f"load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
        if a.no_extras:
            return

        shots = os.path.join(tmp, "shots.toml")
        with open(shots, "w") as fh:
            fh.write(STUDY.format(width=a.width, sequence=SHOTS_SEQ.format(step=step),
                                  extra="metrics = true"))
        t0 = time.perf_counter()
        run_study(shots, os.path.join(tmp, "shots_local"), jobs=a.jobs, progress=False)
        t_local = time.perf_counter() - t0
        t0 = time.perf_counter()
        run_study(shots, os.path.join(tmp, "shots_dask"), jobs=a.jobs, executor="dask",
                  progress=False)
        t_dask = time.perf_counter() - t0
        print(f"{a.frames} one-frame shots, local pool ({a.jobs}): {t_local:7.2f} s "
              f"({a.frames / t_local:6.1f} shots/s)")
        print(f"{a.frames} one-frame shots, Dask LocalCluster ({a.jobs} workers): "
              f"{t_dask:7.2f} s ({a.frames / t_dask:6.1f} shots/s)")
        print(f"Dask throughput / local throughput: {t_local / t_dask:5.2f}x "
              f"(both include start-up of their workers)")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
