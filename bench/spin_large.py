"""Benchmark: the 7 + 7 nucleus flavin–tryptophan preset (Hilbert dimension 221184).

Prints, in one run: the plan; time per direction of the binned spectral method
(error bound 1e-6), of the direct separable double sum (the spine's exact solver) and
of the same sum with equivalent-nucleus blocks; the error of the spectral method
against the direct sum at a few directions; the projected time of dense eigen, of the
direct sum for the whole table and of spin-coherent-state Monte Carlo; the
Schulten–Wolynes approximation's time and deviation; and the wall time of a
full-sphere table (l_max = 16, 590 Lebedev nodes, 295 solved) with the spectral method.
About 3 minutes on an idle 2-core machine (the direct sums dominate).

Run:  .venv/bin/python bench/spin_large.py [--lmax 16] [--directions 2]
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time

import numpy as np

from renderer.response.spin_table import compute_table
from renderer.spin import load_pair, singlet_yield
from renderer.spin.large import radical_spectrum, separable_binned, separable_direct
from renderer.spin.planner import EIGH_S_PER_N3, plan
from renderer.spin.semiclassical import singlet_yield_semiclassical


def _monte_carlo_projection(pair, field_T, n_vec=8, n_steps=10, n_samples=256):
    """Time a few sparse propagation steps of 8 coherent-state samples; project to a full run."""
    import math

    from scipy.sparse.linalg import expm_multiply

    from renderer.spin.montecarlo import OMEGA_DT, spectral_span, sparse_pair_hamiltonian

    h = sparse_pair_hamiltonian(pair, field_T)
    span = spectral_span(h)
    t_max = math.log(1e9) / pair.k_s
    dt = OMEGA_DT / (1.05 * span)
    psi = np.random.default_rng(0).normal(size=(h.shape[0], n_vec)) + 0j
    t = time.perf_counter()
    expm_multiply(-1j * h, psi, start=dt, stop=n_steps * dt, num=n_steps, endpoint=True)
    per_step = (time.perf_counter() - t) / n_steps / n_vec
    return per_step * (t_max / dt) * n_samples


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--lmax", type=int, default=16)
    ap.add_argument("--directions", type=int, default=2, help="directions for the direct sum")
    ap.add_argument("--field-uT", type=float, default=50.0)
    ap.add_argument("--with-blocks", action="store_true",
                    help="also time the direct sum over methyl total-spin blocks")
    a = ap.parse_args()
    pair = load_pair("fad-trp-7plus7")
    b = a.field_uT * 1e-6
    print(f"preset fad-trp-7plus7: dim A {pair.a.dim}, dim B {pair.b.dim}, Hilbert dimension "
          f"{pair.dim}, k = {pair.k_s:g} s^-1, |B| = {a.field_uT:g} uT")
    pl = plan(pair, 295, field_T=b)
    print(pl.summary())

    rng = np.random.default_rng(1)
    dirs = rng.normal(size=(a.directions, 3))
    dirs /= np.linalg.norm(dirs, axis=1, keepdims=True)

    # calibrate dense eigen on this machine: one 2048 eigh, scaled as N^3
    m = rng.normal(size=(2048, 2048)) + 1j * rng.normal(size=(2048, 2048))
    t = time.perf_counter()
    np.linalg.eigh(m + m.conj().T)
    s_per_n3 = (time.perf_counter() - t) / 2048**3
    dense_s = s_per_n3 * pair.dim**3
    print(f"\ndense eigen (measured {s_per_n3:.2e} s per N^3 at N = 2048): projected "
          f"{dense_s / 86400:.3g} days per direction, {16 * pair.dim**2 / 2**40:.2f} TiB per "
          f"complex N x N matrix (planner constant {EIGH_S_PER_N3:.1e})")

    # build the per-block operators once (cached), so per-direction times are steady-state
    radical_spectrum(pair.a, b * dirs[0]), radical_spectrum(pair.b, b * dirs[0])
    rows = []
    for d in dirs:
        f = b * d
        t0 = time.perf_counter()
        sa, sb = radical_spectrum(pair.a, f), radical_spectrum(pair.b, f)
        t1 = time.perf_counter()
        phi_bin, bound, h = separable_binned(sa, sb, pair.k_s, tol=1e-6)
        t2 = time.perf_counter()
        phi_blk = separable_direct(sa, sb, pair.k_s) if a.with_blocks else float("nan")
        t3 = time.perf_counter()
        phi_dir = singlet_yield(pair, f, method="separable")
        t4 = time.perf_counter()
        rows.append((t2 - t0, t3 - t2 + (t1 - t0), t4 - t3, phi_dir, phi_bin, phi_blk, bound, h))
    print("\nper direction                      time        Φ_S              |Φ − Φ_direct|")
    for r in rows:
        t_bin, t_blk, t_dir, phi_dir, phi_bin, phi_blk, bound, h = r
        print(f"  direct separable sum (spine)  {t_dir:8.2f} s  {phi_dir:.12f}")
        if a.with_blocks:
            print(f"  direct sum, methyl blocks     {t_blk:8.2f} s  {phi_blk:.12f}  {abs(phi_blk - phi_dir):.1e}")
        print(f"  binned spectral (bound {bound:.0e}) {t_bin:6.3f} s  {phi_bin:.12f}  "
              f"{abs(phi_bin - phi_dir):.1e}  (h = k/{pair.k_s / h:.0f})")
    t_bin = np.mean([r[0] for r in rows])
    t_dir = np.mean([r[2] for r in rows])
    print(f"\nratio direct / spectral per direction: {t_dir / t_bin:.0f}x; "
          f"max error {max(abs(r[4] - r[3]) for r in rows):.1e} (bound 1e-6)")
    print(f"projected full table (295 directions): direct sum {295 * t_dir / 60:.1f} min, "
          f"dense eigen {295 * dense_s / 86400 / 365:.3g} years")
    mc = {e.method: e for e in pl.estimates}["montecarlo"]
    t_mc = _monte_carlo_projection(pair, b * dirs[0])
    print(f"spin-coherent-state Monte Carlo, 256 samples: measured-step projection "
          f"{t_mc / 86400:.3g} days per direction (planner estimate "
          f"{mc.seconds_per_direction / 86400:.3g} days)")

    t = time.perf_counter()
    sw, se = singlet_yield_semiclassical(pair, b * dirs[0], return_error=True)
    t_sw = time.perf_counter() - t
    print(f"Schulten-Wolynes (approximation): {t_sw:.2f} s per direction, Φ_S = {sw:.5f} ± {se:.1e}, "
          f"deviation from exact {sw - rows[0][3]:+.4f}")

    with tempfile.TemporaryDirectory() as tmp:
        t = time.perf_counter()
        from renderer.spin.large import singlet_yield_spectral

        tab = compute_table(lambda f: singlet_yield_spectral(pair, f, tol=1e-6), b,
                            {"pair": pair.describe(), "method": "spectral", "tol": 1e-6},
                            lmax=a.lmax, run_dir=tmp, n_workers=os.cpu_count() or 1)
        wall = time.perf_counter() - t
    s = tab.summary()
    print(f"(table run with {os.cpu_count()} worker threads, single-threaded BLAS each)")
    print(f"\nfull-sphere table, spectral, l_max = {a.lmax}: {tab.meta['n_directions']} nodes, "
          f"{tab.meta['n_solved']} solved in {wall:.1f} s ({wall / tab.meta['n_solved']:.3f} s per "
          f"direction; target <= 600 s); anisotropy {s['anisotropy']:.4g}, fit residual max "
          f"{s['residual_max']:.1e}")


if __name__ == "__main__":
    main()
