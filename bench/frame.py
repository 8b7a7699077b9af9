"""Benchmark: one composited 2048x1024 frame, numba kernel vs NumPy twin vs memory floor.

Prints, measured side by side in this run after warm-up: the numba kernel's time,
the NumPy twin's time (same maths), and a plain copy of the same input and output
buffers (the memory floor), with the ratios (best and median of alternating runs).  Targets (world panorama): kernel
<= 3x the floor and >= 3x faster than the twin.  The head panorama resamples the
scene and is reported the same way.  Then every receptor-alignment hypothesis is
timed on the same composited world panorama and reported relative to the axial normal
mode (target: all within 1.5x, because orientational averages are precomputed into
the tables).  Then the scene filters (:mod:`renderer.kernels.filtering`): the head
panorama and an eye disc of about the same pixel count, plain bilinear beside the
anisotropic and the isotropic mipmap, each with its ratio to the memory floor, all
interleaved in one run (target: the filtered head panorama and eye disc within 4x the
floor).  Run:  python bench/frame.py [--width 2048]
"""

from __future__ import annotations

import argparse
import os
import sys
import time

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))

from renderer import kernels, pipeline  # noqa: E402
from renderer.eye import load_layout  # noqa: E402
from renderer.field import fixed  # noqa: E402
from renderer.pose import Pose  # noqa: E402
from renderer.response import Legendre  # noqa: E402
from renderer.scene import dusk  # noqa: E402
from renderer.views import HeadPanorama, WorldPanorama  # noqa: E402


def best(fn, repeat):
    ts = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        ts.append(time.perf_counter() - t)
    return min(ts)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--width", type=int, default=2048)
    ap.add_argument("--repeat", type=int, default=15)
    a = ap.parse_args(argv)
    import numba

    print(f"numba threads: {numba.get_num_threads()}, width {a.width}")
    field = fixed(49.0, 66.0, 3.0)
    pose = Pose(37.0, 5.0, -3.0)
    layout = load_layout("lateral")
    response = Legendre([0.7, 0.0, 0.1])
    scene = dusk(a.width)
    inputs = pipeline.prepare(field, pose, layout, response)
    mean = pipeline.visual_field_mean(inputs)
    img = scene.image
    out = np.empty_like(img)

    for view in (WorldPanorama(a.width), HeadPanorama(a.width)):
        H, W = view.shape
        tables = view.tables()
        M = np.ascontiguousarray(inputs.R_head_world if view.frame == "world" else np.eye(3))
        Q = np.ascontiguousarray(inputs.R_head_world.T @ M)

        if view.frame == "world":
            def kern():
                kernels.composite_world_aligned(img, *tables, M, inputs.R_eye_head, inputs.eye_params,
                                                inputs.b_eye, inputs.lut, -1, 1.0 / mean, 1.0, 0.25, out)
        else:
            def kern():
                kernels.composite_resampled(img, scene.north_col, *tables, M, Q, inputs.R_eye_head,
                                            inputs.eye_params, inputs.b_eye, inputs.lut, -1,
                                            1.0 / mean, 1.0, 0.25, out)

        def twin():
            dirs = kernels.equirect_dirs(*tables)
            s = kernels.pattern_numpy(dirs, M, inputs.R_eye_head, inputs.eye_params, inputs.b_eye,
                                      inputs.lut)
            if view.frame == "world":
                px = img.reshape(-1, 3)
            else:
                px = kernels.sample_equirect_numpy(img, scene.north_col, dirs @ Q.T)
            return kernels.modulate_numpy(px, s, 1.0 / mean, 1.0, 0.25).astype(np.float32)

        def floor():
            np.copyto(out, img)

        kern()
        ref = twin().reshape(out.shape)
        err = float(np.max(np.abs(ref - out)))
        # kernel and floor alternate, so a machine whose speed drifts affects both alike
        tks, tfs = [], []
        for _ in range(a.repeat):
            tks.append(best(kern, 1))
            tfs.append(best(floor, 1))
        tk, tf = min(tks), min(tfs)
        mk, mf = float(np.median(tks)), float(np.median(tfs))
        tt = best(twin, max(2, a.repeat // 5))
        name = f"{view.frame} panorama {W}x{H}"
        print(f"{name}: kernel {tk * 1e3:8.2f} ms | numpy twin {tt * 1e3:8.1f} ms | "
              f"memory floor {tf * 1e3:6.2f} ms | kernel/floor {tk / tf:5.2f}x "
              f"(medians {mk * 1e3:.2f} / {mf * 1e3:.2f} ms: {mk / mf:5.2f}x) | "
              f"twin/kernel {tt / tk:5.1f}x | max |kernel - twin| {err:.1e}")
    bench_filters(a.width, a.repeat)
    bench_modes(a.width, a.repeat)


def bench_filters(width, repeat):
    """Head panorama and eye disc per scene filter, beside the memory floor, interleaved."""
    from renderer.views import EyeDisc

    field = fixed(49.0, 66.0, 3.0)
    pose = Pose(37.0, 5.0, -3.0)
    layout = load_layout("lateral")
    inputs = pipeline.prepare(field, pose, layout, Legendre([0.7, 0.0, 0.1]))
    inv = 1.0 / pipeline.visual_field_mean(inputs)
    scene = dusk(width)
    img = scene.image
    t0 = time.perf_counter()
    pyr = kernels.build_pyramid(img)
    t_pyr = time.perf_counter() - t0
    out = np.empty_like(img)
    head = HeadPanorama(width)
    tables = head.tables()
    M = np.eye(3)
    Q = np.ascontiguousarray(inputs.R_head_world.T)
    size = int(round((width * width // 2) ** 0.5))
    disc = EyeDisc(0, size)
    dirs = np.ascontiguousarray(disc.directions(layout).reshape(-1, 3))
    dout = np.empty((dirs.shape[0], 3), np.float32)
    runs = []
    for filt in ("bilinear", "trilinear", "mipmap"):
        nt = kernels.ntaps_for(filt)
        p = pyr if nt else None

        def head_k(p=p, nt=nt):
            kernels.composite_resampled(img, scene.north_col, *tables, M, Q, inputs.R_eye_head,
                                        inputs.eye_params, inputs.b_eye, inputs.lut, -1, inv,
                                        1.0, 0.25, out, pyramid=p, ntaps_max=nt)

        def disc_k(p=p, nt=nt):
            kernels.composite_dirs(img, scene.north_col, dirs, M, Q, inputs.R_eye_head,
                                   inputs.eye_params, inputs.b_eye, inputs.lut, 0, inv, 1.0,
                                   0.25, dout, pyramid=p, ntaps_max=nt, grid_width=size)

        runs.append((f"head panorama {width}x{width // 2}, {filt}", head_k, []))
        runs.append((f"eye disc {size}x{size}, {filt}", disc_k, []))

    def floor():
        np.copyto(out, img)

    floors = []
    for _, k, _ in runs:
        k()
    for _ in range(repeat):  # interleaved: a busy machine slows every entry alike
        for _, k, ts in runs:
            ts.append(best(k, 1))
            floors.append(best(floor, 1))
    tf, mf = min(floors), float(np.median(floors))
    print(f"scene filters (pyramid built once per scene: {t_pyr * 1e3:.0f} ms); memory floor "
          f"best {tf * 1e3:.2f} ms, median {mf * 1e3:.2f} ms; target filtered <= 4x floor:")
    base = {}
    for name, _, ts in runs:
        tk, mk = min(ts), float(np.median(ts))
        key = name.split(",")[0]
        base.setdefault(key, mk)
        print(f"  {name:42s} best {tk * 1e3:8.2f} ms ({tk / tf:6.2f}x floor) | median "
              f"{mk * 1e3:8.2f} ms ({mk / mf:6.2f}x floor) | / bilinear (medians) "
              f"{mk / base[key]:5.2f}x")


def bench_modes(width, repeat):
    """Composited world panorama per alignment hypothesis, relative to the axial normal mode."""
    from renderer.eye.alignment import ChiefRay, Disorder, FullFrame, Normal, Ratio, Tilt
    from renderer.response.harmonic import SphericalHarmonic

    field = fixed(49.0, 66.0, 3.0)
    pose = Pose(37.0, 5.0, -3.0)
    base = load_layout("lateral")
    base = base.with_eyes([e.__class__(**{**e.describe(), "alignment": None,
                                          "nodal_offset_mm": 1.5}) for e in base.eyes])
    rng = np.random.default_rng(0)
    c = np.zeros(25)
    c[0], c[4:9], c[16:25] = 2.0, 0.2 * rng.normal(size=5), 0.05 * rng.normal(size=9)
    full = SphericalHarmonic(c)
    axial = full.axial_average()
    modes = [("normal (axial)", Normal(), axial), ("chief-ray", ChiefRay(), axial),
             ("tilt 40 deg", Tilt(tilt_deg=40.0), axial), ("disorder kappa 4", Disorder(kappa=4.0), axial),
             ("ratio 2 populations", Ratio(delta_deg=90.0), axial),
             ("full frame, random in-plane", FullFrame(in_plane="random"), full),
             ("full frame, meridian", FullFrame(in_plane="meridian"), full),
             ("full frame, fixed in-plane", FullFrame(in_plane="fixed", in_plane_deg=30.0), full)]
    scene = dusk(width)
    img = scene.image
    out = np.empty_like(img)
    view = WorldPanorama(width)
    tables = view.tables()
    print(f"alignment modes, composited world panorama {width}x{width // 2}, lateral layout, "
          f"d = 1.5 mm (response: real harmonics l <= 4); rounds interleaved, best of {repeat}:")
    runs = []
    for name, al, resp in modes:
        lay = base.with_alignment(al)
        t0 = time.perf_counter()
        inputs = pipeline.prepare(field, pose, lay, resp)
        t_prep = time.perf_counter() - t0
        mean = pipeline.visual_field_mean(inputs)
        M = np.ascontiguousarray(inputs.R_head_world)

        def kern(inputs=inputs, mean=mean, M=M):
            kernels.composite_world_aligned(img, *tables, M, inputs.R_eye_head, inputs.eye_params,
                                            inputs.b_eye, inputs.lut, -1, 1.0 / mean, 1.0, 0.25, out,
                                            cubes=inputs.cubes)

        kern()
        runs.append((name, kern, t_prep, []))
    for _ in range(repeat):  # interleaved, so a busy machine affects every mode alike
        for _, kern, _, ts in runs:
            ts.append(best(kern, 1))
    ref = min(runs[0][3])
    for name, _, t_prep, ts in runs:
        tk = min(ts)
        print(f"  {name:30s} kernel {tk * 1e3:8.2f} ms | / normal {tk / ref:5.2f}x "
              f"(target <= 1.5x) | first prepare {t_prep * 1e3:7.1f} ms")


if __name__ == "__main__":
    main()
