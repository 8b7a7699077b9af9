"""``magretina response``: compute and inspect radical-pair response tables.

Subcommands: ``compute`` (a definition file or preset → full-sphere singlet-yield
table, with a progress bar), ``show`` (summary of a table and a plot written beside
it), ``presets`` (list bundled radical-pair presets) and ``clear-cache``.  All the
work is in :mod:`renderer.response.spin_table` and :mod:`renderer.spin`; this module
only parses arguments and prints.
"""

from __future__ import annotations

import os
from pathlib import Path

from ..errors import MagretinaError, check_range

HYPOTHESIS_NOTE = ("Model prediction of the radical-pair hypothesis for the stated parameters; "
                   "not a measurement of any receptor or animal.")


def register(subparsers):
    p = subparsers.add_parser("response", help="radical-pair angular response tables",
                              description="Compute and inspect singlet-yield response tables of "
                                          "radical pairs. " + HYPOTHESIS_NOTE)
    sub = p.add_subparsers(dest="response_command", metavar="ACTION")
    sub.required = True

    c = sub.add_parser("compute", help="compute a full-sphere table from a definition or preset")
    c.add_argument("pair", metavar="DEF_OR_PRESET",
                   help="radical-pair definition file (TOML) or preset name (see 'response presets')")
    c.add_argument("--field-ut", type=float, required=True, help="field magnitude |B|, µT")
    c.add_argument("--k-s", type=float, default=None, help="singlet recombination rate, s^-1 "
                                                            "(default: the file's)")
    c.add_argument("--k-t", type=float, default=None, help="triplet rate, s^-1 (default: k_s)")
    c.add_argument("--lmax", type=int, default=16,
                   help="highest spherical-harmonic degree of the fit (even, 0..64)")
    c.add_argument("--method", default="auto",
                   help="spin solver: auto or a name of renderer.spin.SOLVERS (an unknown name "
                        "is refused with the list)"),
    c.add_argument("--no-cache", action="store_true", help="neither read nor write the disk cache")
    c.add_argument("--out", required=True, metavar="TABLE", help="output table file (.npz)")
    c.add_argument("--force", action="store_true", help="overwrite an existing --out file")
    c.add_argument("--executor", default="local", choices=("local", "dask"),
                   help="solve the directions here or on Dask (default local; the table is "
                        "the same bitwise)")
    c.add_argument("--jobs", type=int, default=2,
                   help="Dask LocalCluster worker processes (default 2; with --executor dask)")
    c.add_argument("--scheduler", help="address of an existing Dask scheduler (tcp://HOST:PORT)")
    c.set_defaults(func=cmd_compute)

    s = sub.add_parser("show", help="print a table's summary and write a plot beside it")
    s.add_argument("table", metavar="TABLE",
                   help="response table (.npz) written by 'magretina response compute'")
    s.add_argument("--plot", default=None, help="plot file (default: TABLE with suffix .png)")
    s.set_defaults(func=cmd_show)

    q = sub.add_parser("information", help="quantum and yield Fisher information about the field "
                                           "direction over the full sphere, with a plot")
    q.add_argument("pair", metavar="DEF_OR_PRESET",
                   help="radical-pair definition file (TOML) or preset name (equal rates)")
    q.add_argument("--field-ut", type=float, required=True, help="field magnitude |B|, µT")
    q.add_argument("--k-s", type=float, default=None, help="recombination rate k_s = k_t, s^-1 "
                                                            "(default: the file's)")
    q.add_argument("--order", type=int, default=17, help="Lebedev order of the direction grid")
    q.add_argument("--no-cache", action="store_true", help="neither read nor write the disk cache")
    q.add_argument("--out", required=True, metavar="TABLE", help="output table file (.npz); the plot "
                                                                 "is written beside it (.png)")
    q.set_defaults(func=cmd_information)

    ls = sub.add_parser("presets", help="list the bundled radical-pair presets")
    ls.set_defaults(func=cmd_presets)

    cc = sub.add_parser("clear-cache", help="delete cached response tables")
    cc.set_defaults(func=cmd_clear_cache)
    return p


def cmd_compute(args) -> int:
    # deferred: library modules load when the command runs, so start-up stays light
    from tqdm import tqdm

    from ..response.harmonic import lebedev_grid, lebedev_order_for
    from ..response.spin_table import compute_spin_table
    from ..spin import choose_method
    from ..spin.definition import load_pair, preset_metadata

    from . import _common

    _common.check_out_file("--out", args.out)
    _common.refuse_overwrite([args.out], getattr(args, "force", False))
    field_uT = check_range("--field-ut", args.field_ut, 0.0, 1e9, lo_open=True, unit="µT")
    if args.k_s is not None:
        check_range("--k-s", args.k_s, 0.0, None, lo_open=True, unit="s^-1")
    if args.k_t is not None:
        if args.k_s is None:
            raise MagretinaError("--k-t needs --k-s as well")
        check_range("--k-t", args.k_t, 0.0, None, unit="s^-1")
    if args.lmax < 0 or args.lmax % 2 or args.lmax > 64:
        raise MagretinaError(f"--lmax = {args.lmax} is not allowed; use an even degree in [0, 64]")
    pair = load_pair(args.pair, k_s=args.k_s, k_t=args.k_t)
    info = preset_metadata(args.pair)
    method = choose_method(pair, args.method)
    from .. import budget
    from ..spin.planner import estimate_memory_bytes

    # The solver's own estimate (renderer.spin.planner), checked against the shared limit.
    budget.Estimate("response compute").add(f"'{method}' solver", estimate_memory_bytes(
        pair, method)).check(check_frames=False)
    n_nodes = len(lebedev_grid(lebedev_order_for(2 * args.lmax + 5))[0])
    print(f"radical pair {info.get('name', args.pair)}: Hilbert dimension {pair.dim}, "
          f"k_s = {pair.k_s:g} s^-1, k_t = {pair.k_t:g} s^-1, solver '{method}', "
          f"{n_nodes} directions ({n_nodes // 2} solved, inversion symmetry)")
    meta = {"pair_input": os.fspath(args.pair), **{f"pair_{k}": v for k, v in info.items()}}
    executor = getattr(args, "executor", "local")
    if getattr(args, "scheduler", None) and executor != "dask":
        raise MagretinaError("--scheduler needs --executor dask")
    if executor == "dask":
        from ..response.cluster import compute_spin_tables

        if args.jobs < 1:
            raise MagretinaError(f"--jobs {args.jobs}: must be >= 1")
        with tqdm(total=n_nodes, unit="dir", desc="directions") as bar:
            (table,) = compute_spin_tables(
                [{"pair": pair, "field_T": field_uT * 1e-6, "lmax": args.lmax,
                  "method": method, "meta": meta}], jobs=args.jobs, scheduler=args.scheduler,
                use_cache=not args.no_cache, progress=bar.update)
    else:
        with tqdm(total=n_nodes, unit="dir", desc="directions") as bar:
            table = compute_spin_table(pair, field_uT * 1e-6, lmax=args.lmax, method=method,
                                       use_cache=not args.no_cache, progress=bar.update,
                                       meta=meta)
    out = table.save(args.out)
    _print_summary(table)
    print(f"wrote {out}")
    return 0


def _print_summary(table):
    s = table.summary()
    print(f"field |B| = {s['field_uT']:g} µT, l_max = {s['lmax']}, "
          f"solver '{table.meta.get('method')}', Hilbert dimension {table.meta.get('dim')}")
    print(f"singlet yield: mean {s['mean']:.6f}, min {s['min']:.6f}, max {s['max']:.6f}, "
          f"anisotropy (max - min) {s['anisotropy']:.6f}")
    print(f"minimum at theta = {s['argmin_theta_deg']:.2f} deg, phi = {s['argmin_phi_deg']:.2f} deg; "
          f"maximum at theta = {s['argmax_theta_deg']:.2f} deg, phi = {s['argmax_phi_deg']:.2f} deg "
          f"(molecular frame; theta from z, phi from x towards y)")
    rr, rm = s.get("residual_rms"), s.get("residual_max")
    if rr is not None:
        rel = rm / s["anisotropy"] if s["anisotropy"] > 0 else float("nan")
        print(f"fit residual at the {table.meta.get('n_directions')} nodes: rms {rr:.3g}, "
              f"max {rm:.3g} ({rel:.2%} of the anisotropy); raise --lmax if this is too large")
    print(HYPOTHESIS_NOTE)


def cmd_show(args) -> int:
    # deferred: library modules load when the command runs, so start-up stays light
    from ..plots import plot_spin_table
    from ..response.spin_table import SpinTable

    if not os.path.isfile(args.table):
        raise MagretinaError(f"spin table {args.table}: no such file")
    table = SpinTable.load(args.table)
    _print_summary(table)
    plot = Path(args.plot) if args.plot else Path(args.table).with_suffix(".png")
    plot_spin_table(table, plot, note=HYPOTHESIS_NOTE)
    print(f"wrote {plot}")
    return 0


def print_information_summary(table, indent=""):
    """Print the sphere summary of an information table (shared with ``predict``)."""
    s = table.summary()
    print(f"{indent}quantum Fisher information (one pair, sphere mean of Tr F_Q): "
          f"{s['mean_trace_quantum_rad-2']:.4g} rad^-2 (max {s['max_trace_quantum_rad-2']:.4g})")
    print(f"{indent}yield readout Fisher information (sphere mean of Tr F_C): "
          f"{s['mean_trace_yield_rad-2']:.4g} rad^-2 (max {s['max_trace_yield_rad-2']:.4g})")
    print(f"{indent}quantum / yield along the yield gradient: min {s['ratio_along_gradient_min']:.3g}, "
          f"median {s['ratio_along_gradient_median']:.3g}, max {s['ratio_along_gradient_max']:.3g} "
          f"(directions where the yield carries >= 1 % of its peak information)")
    return s


def cmd_information(args) -> int:
    # deferred: library modules load when the command runs, so start-up stays light
    from tqdm import tqdm

    from ..plots import plot_information
    from ..response.harmonic import lebedev_grid, lebedev_order_for
    from ..spin.definition import load_pair, preset_metadata
    from ..response.information_table import compute_information_table, estimate_information_cost

    field_uT = check_range("--field-ut", args.field_ut, 0.0, 1e9, lo_open=True, unit="µT")
    if args.k_s is not None:
        check_range("--k-s", args.k_s, 0.0, None, lo_open=True, unit="s^-1")
    if lebedev_order_for(max(1, args.order)) != args.order:
        raise MagretinaError(f"--order = {args.order} is not an available Lebedev order")
    pair = load_pair(args.pair, k_s=args.k_s, k_t=args.k_s)
    info = preset_metadata(args.pair)
    n_nodes = len(lebedev_grid(args.order)[0])
    mem, flops = estimate_information_cost(pair, args.order)
    print(f"radical pair {info.get('name', args.pair)}: Hilbert dimension {pair.dim}, "
          f"k = {pair.k_s:g} s^-1, {n_nodes} directions; about {mem / 2**20:.1f} MiB working "
          f"memory and {flops / 1e9:.3g} GFLOP (about {flops / 3e9:.3g} s at 3 GFLOP/s; a rough guide)")
    meta = {"pair_input": os.fspath(args.pair), **{f"pair_{k}": v for k, v in info.items()}}
    with tqdm(total=n_nodes, unit="dir", desc="directions") as bar:
        table = compute_information_table(pair, field_uT * 1e-6, order=args.order,
                                          use_cache=not args.no_cache, progress=bar.update,
                                          meta=meta)
    out = table.save(args.out)
    print_information_summary(table)
    plot = plot_information(table, Path(args.out).with_suffix(".png"))
    print(HYPOTHESIS_NOTE)
    print(f"wrote {out}")
    print(f"wrote {plot}")
    return 0


def cmd_presets(args) -> int:
    # deferred: library modules load when the command runs, so start-up stays light
    from ..spin.definition import list_presets, load_pair, preset_metadata

    for name in list_presets():
        try:
            pair = load_pair(name)
            dim = pair.dim
        except MagretinaError as exc:
            print(f"{name}: cannot be loaded ({exc})")
            continue
        meta = preset_metadata(name)
        status = meta["status"]
        tag = "default" if status == "primary" else "NOT a default: values not confirmed in primary sources"
        print(f"{name}  (Hilbert dimension {dim}; {tag})  {meta.get('description', '')}")
        ro = meta.get("relative_orientation")
        if ro is not None and not ro.get("published", False):
            print(f"    relative orientation of the radicals: NOT published; a parameter "
                  f"(now rotation {ro.get('rotation_deg', 0.0)} deg about {ro.get('rotation_axis')}, "
                  f"an assumption; {ro.get('note', '')})")
    print(HYPOTHESIS_NOTE)
    return 0


def cmd_clear_cache(args) -> int:
    # deferred: library modules load when the command runs, so start-up stays light
    from ..response import cache
    from ..response.spin_table import CACHE_KIND

    n = cache.clear_cache(CACHE_KIND)
    print(f"removed {n} cached table(s) from {cache.cache_root() / CACHE_KIND}")
    return 0
