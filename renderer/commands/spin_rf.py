"""``magretina spin-plan``, ``rf-spectrum`` and ``rf-table``: large pairs and RF conditions.

``spin-plan PAIR`` prints which method a full-sphere table would use, its memory and
its estimated time, and with ``--out`` runs it resumably (per-direction results are
cached; Ctrl-C and run again to resume).  ``rf-spectrum PAIR`` writes the change of
the singlet yield against RF frequency at one geometry (JSON + PNG plot);
``rf-table PAIR`` writes a full-sphere response table with an RF field on.  The work
is in :mod:`renderer.spin.planner`, :mod:`renderer.spin.large`,
:mod:`renderer.spin.rf`; this module parses arguments and prints.
"""

from __future__ import annotations

import os

import numpy as np

from ..errors import MagretinaError, check_range
from . import _common

NOTE = ("Model prediction of the radical-pair hypothesis for the stated parameters; not a "
        "measurement of any receptor or animal.")


#: What ``spin-plan --method`` accepts (the plan's table lists only these).
PLAN_METHODS = ["auto", "separable", "spectral", "eigenbasis", "liouville", "montecarlo",
                "semiclassical"]


def _pair_args(p):
    p.add_argument("pair", metavar="DEF_OR_PRESET", help="radical-pair definition (TOML) or preset name")
    p.add_argument("--field-ut", type=float, required=True, help="static field magnitude |B0|, µT")
    p.add_argument("--k-s", type=float, default=None, help="singlet rate, s^-1 (default: the file's)")
    p.add_argument("--k-t", type=float, default=None, help="triplet rate, s^-1 (default: k_s)")


def _load(args):
    # deferred: library modules load when the command runs, so start-up stays light
    from ..spin.definition import load_pair

    check_range("--field-ut", args.field_ut, 0.0, 1e9, lo_open=True, unit="µT")
    if args.k_t is not None and args.k_s is None:
        raise MagretinaError("--k-t needs --k-s as well")
    return load_pair(args.pair, k_s=args.k_s, k_t=args.k_t)


def _check_budget(what, method, per_process_bytes, processes, args):
    """Refuse (with the figure and the limit) before a spin run allocates more than the
    shared limit of :mod:`renderer.budget`: ``per_process_bytes`` for each of
    ``processes`` workers."""
    # deferred: library modules load when the command runs, so start-up stays light
    from .. import budget

    est = budget.Estimate(what, processes=processes)
    est.add(f"'{method}' solver per direction", per_process_bytes)
    return est.check(getattr(args, "max_memory_gb", None), check_frames=False)


def _memory_limit(args, processes):
    """Bytes one solver call may use: the spin ceiling and this command's share of the
    shared limit (so 'auto' picks a method that fits both)."""
    # deferred: library modules load when the command runs, so start-up stays light
    from .. import budget
    from ..spin.planner import memory_limit_bytes

    share = budget.memory_limit_bytes(getattr(args, "max_memory_gb", None))
    return min(memory_limit_bytes(), share // (processes + (1 if processes > 1 else 0)))


def _plan_within(args, processes, *a, **kw):
    """``renderer.spin.planner.plan`` within this command's memory share; a refusal says
    how to raise the limit."""
    # deferred: library modules load when the command runs, so start-up stays light
    from .. import budget
    from ..spin.planner import plan

    try:
        return plan(*a, memory_limit=_memory_limit(args, processes), **kw)
    except MagretinaError as exc:
        total = budget.memory_limit_bytes(getattr(args, "max_memory_gb", None))
        raise MagretinaError(f"{exc} (the limit is the spin ceiling or this command's share "
                             f"of {budget.fmt_bytes(total)} over {processes} process(es); raise "
                             f"it with {budget.MEMORY_ENV} or --max-memory-gb)") from None


def _direction(text, name):
    try:
        v = np.array([float(x) for x in str(text).split(",")])
    except ValueError:
        raise MagretinaError(f"{name} = {text!r} must be three comma-separated numbers") from None
    if v.shape != (3,) or not np.all(np.isfinite(v)) or np.linalg.norm(v) == 0:
        raise MagretinaError(f"{name} = {text!r} must be a non-zero 3-vector 'x,y,z'")
    return v / np.linalg.norm(v)


def register(subparsers):
    p = subparsers.add_parser("spin-plan", help="estimate (and run) a large spin table resumably",
                              description="Say which method, memory and time a full-sphere "
                                          "singlet-yield table needs; with --out, run it with "
                                          "per-direction caching. " + NOTE)
    _pair_args(p)
    p.add_argument("--lmax", type=int, default=16, help="highest harmonic degree (even)")
    p.add_argument("--method", default="auto", choices=PLAN_METHODS,
                   help="solver ('semiclassical' is the Schulten-Wolynes approximation)")
    p.add_argument("--tol", type=float, default=1e-6, help="error bound of the spectral method")
    p.add_argument("--samples", type=int, default=256, help="Monte Carlo samples per direction")
    p.add_argument("--out", default=None, metavar="TABLE", help="run and write the table (.npz)")
    p.add_argument("--force", action="store_true", help="overwrite an existing --out file")
    p.add_argument("--run-dir", default=None,
                   help="folder for per-direction results, so an interrupted run resumes "
                        "(default: none, no resume)")
    p.set_defaults(func=cmd_plan)

    s = subparsers.add_parser("rf-spectrum", help="singlet-yield change against RF frequency",
                              description="Resonance spectrum: ΔΦ_S (RF on − off) against "
                                          "frequency at a fixed geometry (Floquet, phase-"
                                          "averaged). " + NOTE)
    _pair_args(s)
    s.add_argument("--field-dir", default="0,0,1", help="B0 direction, molecular frame 'x,y,z'")
    s.add_argument("--rf-nt", type=float, required=True, help="RF peak amplitude, nT")
    s.add_argument("--rf-dir", default="1,0,0", help="RF direction, molecular frame 'x,y,z'")
    s.add_argument("--f-min-mhz", type=float, default=0.1, help="lowest RF frequency, MHz")
    s.add_argument("--f-max-mhz", type=float, default=5.0, help="highest RF frequency, MHz")
    s.add_argument("--points", type=int, default=50,
                   help="number of frequencies, evenly spaced from --f-min-mhz to --f-max-mhz (2..10000)")
    s.add_argument("--out", required=True, help="output JSON; the plot goes beside it (.png)")
    s.add_argument("--force", action="store_true", help="overwrite existing output files")
    s.set_defaults(func=cmd_spectrum)

    t = subparsers.add_parser("rf-table", help="full-sphere response table with an RF field on",
                              description="Singlet-yield table with an RF field at a fixed angle "
                                          "to the static field, its azimuth about B0 averaged. "
                                          + NOTE)
    _pair_args(t)
    t.add_argument("--rf-nt", type=float, required=True, help="RF peak amplitude, nT")
    t.add_argument("--rf-mhz", type=float, required=True, help="RF frequency, MHz")
    t.add_argument("--rf-angle-deg", type=float, default=90.0, help="angle between B1 and B0, degrees")
    t.add_argument("--lmax", type=int, default=8,
                   help="highest spherical-harmonic degree of the fit (even, 0..64)")
    t.add_argument("--out", required=True, metavar="TABLE", help="output response table (.npz)")
    t.add_argument("--force", action="store_true", help="overwrite an existing --out file")
    t.add_argument("--run-dir", default=None,
                   help="folder for per-direction results, so an interrupted run resumes "
                        "(default: none, no resume)")
    t.set_defaults(func=cmd_rf_table)

    g = subparsers.add_parser("rf-lab-table", help="RF table over both field directions (lab-fixed coil)",
                              description="Singlet-yield table over the static-field AND the RF "
                                          "direction in the molecular frame, for an RF coil fixed "
                                          "in the laboratory (no azimuth average). Shows the "
                                          "memory and time estimate first. " + NOTE)
    _pair_args(g)
    g.add_argument("--rf-nt", type=float, required=True, help="RF peak amplitude, nT")
    g.add_argument("--rf-mhz", type=float, required=True, help="RF frequency, MHz")
    g.add_argument("--lmax", type=int, default=8,
                   help="highest harmonic degree in the static-field direction (even, 0..32)")
    g.add_argument("--lmax-rf", type=int, default=4,
                   help="highest harmonic degree in the RF direction (even, 0..16)")
    g.add_argument("--out", required=True, metavar="TABLE", help="output RF lab table (.npz)")
    g.add_argument("--force", action="store_true", help="overwrite an existing --out file")
    g.set_defaults(func=cmd_rf_lab_table)
    for q in (p, s, t, g):
        _common.add_budget_args(q)
    return p


def _bar(total, desc):
    from tqdm import tqdm  # deferred: only commands that show progress need it

    return tqdm(total=total, unit="dir", desc=desc)


def _lmax(v):
    if v < 0 or v % 2 or v > 64:
        raise MagretinaError(f"--lmax = {v} is not allowed; use an even degree in [0, 64]")
    return v


def _check_outputs(args, *extra):
    """Refuse a bad or existing --out (and --run-dir) before any work: one line each."""
    _common.check_out_file("--out", args.out)
    run_dir = _common.check_out_dir("--run-dir", getattr(args, "run_dir", None))
    if run_dir is not None and args.out is not None and \
            os.path.abspath(run_dir) == os.path.abspath(args.out):
        raise MagretinaError(f"--run-dir {run_dir}: is the --out file; give a folder of its own")
    if args.out is not None:
        _common.refuse_overwrite([args.out, *extra], getattr(args, "force", False))


def cmd_plan(args) -> int:
    _check_outputs(args)
    # deferred: library modules load when the command runs, so start-up stays light
    from ..response.harmonic import lebedev_grid, lebedev_order_for
    from ..response.spin_table import compute_table
    from ..spin import singlet_yield
    from ..spin.planner import plan

    pair = _load(args)
    lmax = _lmax(args.lmax)
    b = args.field_ut * 1e-6
    check_range("--tol", args.tol, 0.0, 0.1, lo_open=True)
    n_nodes = len(lebedev_grid(lebedev_order_for(2 * lmax + 5))[0])
    n_solve = (n_nodes + 1) // 2
    m = args.method
    # Spectral and semiclassical runs solve directions in parallel, one process each.
    procs = (os.cpu_count() or 1) if args.out is not None else 1
    kw = dict(field_T=b, method="auto" if m in ("auto", "semiclassical") else m, tol=args.tol,
              n_samples=args.samples)
    pl = _plan_within(args, procs, pair, n_solve, **kw) if args.out is not None else \
        plan(pair, n_solve, **kw)
    print(f"radical pair {args.pair}: Hilbert dimension {pair.dim} (A {pair.a.dim} x B {pair.b.dim}), "
          f"{n_nodes} directions, {n_solve} solved (inversion symmetry)")
    print(pl.summary(methods=PLAN_METHODS))
    by = {e.method: e.seconds_per_direction for e in pl.estimates}
    if by.get("montecarlo", 0) > min(by.get(k, float("inf")) for k in ("eigenbasis", "separable")):
        print("note: Monte Carlo costs dimension² × samples × time steps; it pays off only where "
              "the exact methods do not fit in memory")
    chosen = pl.method if m == "auto" else m
    if m == "semiclassical":
        print("NOTE: 'semiclassical' is the Schulten-Wolynes APPROXIMATION, not an exact yield")
    if args.out is None:
        return 0
    if chosen == "spectral":
        from ..spin.large import singlet_yield_spectral

        def fn(bi):
            return singlet_yield_spectral(pair, bi, tol=args.tol)
    elif chosen == "montecarlo":
        from ..spin.montecarlo import singlet_yield_montecarlo

        def fn(bi):
            return singlet_yield_montecarlo(pair, bi, n_samples=args.samples, return_error=False)
    elif chosen == "semiclassical":
        from ..spin.semiclassical import singlet_yield_semiclassical

        def fn(bi):
            return singlet_yield_semiclassical(pair, bi)
    else:
        def fn(bi):
            return singlet_yield(pair, bi, method=chosen)
    params = {"pair": pair.describe(), "method": chosen, "tol": args.tol, "samples": args.samples}
    # the spectral and semiclassical paths run single-threaded BLAS per direction, so
    # directions go in parallel; the others parallelise internally
    workers = (os.cpu_count() or 1) if chosen in ("spectral", "semiclassical") else 1
    _check_budget("spin-plan", chosen, {e.method: e for e in pl.estimates}.get(
        chosen, pl).memory_bytes, workers, args)
    with _bar(n_solve, chosen) as bar:
        table = compute_table(fn, b, params, lmax=lmax, run_dir=args.run_dir, progress=bar.update,
                              meta={"pair_input": os.fspath(args.pair)}, n_workers=workers)
    table.save(args.out)
    s = table.summary()
    print(f"wrote {args.out}: anisotropy {s['anisotropy']:.4g}, fit residual max "
          f"{s['residual_max']:.2g}. {NOTE}")
    return 0


def cmd_spectrum(args) -> int:
    _check_outputs(args, os.path.splitext(str(args.out))[0] + ".png")
    # deferred: library modules load when the command runs, so start-up stays light
    from tqdm import tqdm

    from ..io import atomic_write_json
    from ..plots import plot_resonance_spectrum
    from ..spin.rf import resonance_spectrum

    pair = _load(args)
    check_range("--rf-nt", args.rf_nt, 0.0, None, lo_open=True, unit="nT")
    lo = check_range("--f-min-mhz", args.f_min_mhz, 0.0, None, lo_open=True, unit="MHz")
    hi = check_range("--f-max-mhz", args.f_max_mhz, lo, None, lo_open=True, unit="MHz")
    if not 2 <= args.points <= 10000:
        raise MagretinaError(f"--points = {args.points} is out of range; allowed [2, 10000]")
    b0 = args.field_ut * 1e-6 * _direction(args.field_dir, "--field-dir")
    rf_dir = _direction(args.rf_dir, "--rf-dir")
    _common.check_out_file("--out", args.out)
    from ..spin.planner import estimate

    # The Floquet variant the spectrum uses (renderer.spin.rf.rf_singlet_yield 'auto'),
    # estimated before anything is allocated.
    sep = pair.equal_rates and not pair.coupled
    method = "floquet-separable" if (sep and pair.dim > 256) else "floquet"
    need = {e.method: e for e in estimate(pair, args.field_ut * 1e-6)}[method].memory_bytes
    _check_budget("rf-spectrum", method, need, 1, args)
    freqs = np.linspace(lo, hi, args.points) * 1e6
    with tqdm(total=len(freqs), unit="freq", desc="RF spectrum") as bar:
        spec = resonance_spectrum(pair, b0, args.rf_nt * 1e-9, freqs, rf_dir,
                                  progress=bar.update)
    atomic_write_json(args.out, spec.to_dict())
    png = os.path.splitext(args.out)[0] + ".png"
    plot_resonance_spectrum(spec, png)
    i = int(np.argmax(np.abs(spec.delta)))
    print(f"wrote {args.out} and {png}: largest |ΔΦ_S| = {abs(spec.delta[i]):.3g} at "
          f"{freqs[i] / 1e6:.4g} MHz (free-electron Larmor {spec.larmor_Hz / 1e6:.4g} MHz). {NOTE}")
    return 0


def cmd_rf_table(args) -> int:
    _check_outputs(args)
    # deferred: library modules load when the command runs, so start-up stays light
    from ..response.harmonic import lebedev_grid, lebedev_order_for
    from ..response.spin_table import compute_table
    from ..spin.planner import plan
    from ..spin.rf import RFField, rf_yield_relative

    pair = _load(args)
    lmax = _lmax(args.lmax)
    b = args.field_ut * 1e-6
    amp = check_range("--rf-nt", args.rf_nt, 0.0, None, unit="nT") * 1e-9
    f = check_range("--rf-mhz", args.rf_mhz, 0.0, None, lo_open=True, unit="MHz") * 1e6
    ang = check_range("--rf-angle-deg", args.rf_angle_deg, 0.0, 180.0, unit="deg")
    RFField(amp, f).check_against([0.0, 0.0, b])
    n_solve = (len(lebedev_grid(lebedev_order_for(2 * lmax + 5))[0]) + 1) // 2
    n_psi = 1 if ang % 180 == 0 else 4
    workers = os.cpu_count() or 1
    pl = _plan_within(args, workers, pair, n_solve * n_psi, field_T=b, rf=True)
    _check_budget("rf-table", pl.method, pl.memory_bytes, workers, args)
    print(pl.summary())

    def fn(bi):
        return rf_yield_relative(pair, bi, amp, f, ang, method=pl.method)

    params = {"pair": pair.describe(), "method": pl.method, "rf_amplitude_T": amp,
              "rf_frequency_Hz": f, "rf_angle_deg": ang, "rf_azimuths": n_psi}
    with _bar(n_solve, "RF table") as bar:
        table = compute_table(fn, b, params, lmax=lmax, run_dir=args.run_dir, progress=bar.update,
                              meta={"pair_input": os.fspath(args.pair), "rf": True},
                              n_workers=workers)
    table.save(args.out)
    s = table.summary()
    print(f"wrote {args.out}: RF on ({args.rf_nt:g} nT, {args.rf_mhz:g} MHz, {ang:g} deg to B0), "
          f"anisotropy {s['anisotropy']:.4g}. {NOTE}")
    return 0


def cmd_rf_lab_table(args) -> int:
    _check_outputs(args)
    # deferred: library modules load when the command runs, so start-up stays light
    from ..response.rf_lab_table import MAX_LMAX_RF, MAX_LMAX_STATIC, compute_lab_table, estimate_lab_table
    from ..spin.rf import RFField

    pair = _load(args)
    amp = check_range("--rf-nt", args.rf_nt, 0.0, None, unit="nT") * 1e-9
    f = check_range("--rf-mhz", args.rf_mhz, 0.0, None, lo_open=True, unit="MHz") * 1e6
    for name, v, hi in (("--lmax", args.lmax, MAX_LMAX_STATIC), ("--lmax-rf", args.lmax_rf, MAX_LMAX_RF)):
        if v < 0 or v % 2 or v > hi:
            raise MagretinaError(f"{name} = {v} is not allowed; use an even degree in [0, {hi}]")
    b = args.field_ut * 1e-6
    rf = RFField(amp, f)
    rf.check_against([0.0, 0.0, b])
    nw = os.cpu_count() or 1
    cost = estimate_lab_table(pair, b, lmax_static=args.lmax, lmax_rf=args.lmax_rf, n_workers=nw, rf=rf)
    print(f"plan: {cost.describe()}")
    cost.estimate.check(args.max_memory_gb, check_frames=False)
    with _bar(cost.n_solve, "RF lab table") as bar:
        table = compute_lab_table(pair, b, amp, f, lmax_static=args.lmax, lmax_rf=args.lmax_rf,
                                  n_workers=nw, progress=bar.update, max_memory_gb=args.max_memory_gb)
    table.meta["pair_input"] = os.fspath(args.pair)
    table.save(args.out)
    print(f"wrote {args.out}: RF on ({args.rf_nt:g} nT, {args.rf_mhz:g} MHz), lab-fixed geometry "
          f"(static and RF direction in the molecular frame), fit residual max "
          f"{table.residual_max:.2g}. {NOTE}")
    return 0
