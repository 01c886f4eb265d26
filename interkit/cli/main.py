"""The ``interkit`` command line.

    interkit scan SPEC.toml -o scan.nc [--workers N] [--cache DIR] [--serial] [--quiet]
                  [--scheduler ADDRESS]
    interkit demo [-o DIR] [--workers N]
    interkit show scan.nc [--unit kJ/mol] [--force-unit kJ/mol/nm]
    interkit systems
    interkit store info DIR | interkit store prune DIR --max-size 500MB
    interkit rerun scan.nc [-o out.nc] [--cache DIR] [--workers N]   # same spec, compare with the file
    interkit verify scan.nc [--sample N] [--seed S]    # recompute N points fresh; exit 1 off tolerance
    interkit report scan.nc -o report.html [--reference LEVEL]   # self-contained HTML, works offline
    interkit export scan.nc -o out.csv|out.json       # tidy CSV, or JSON with QCSchema molecules
    interkit compare scan.nc [--reference LABEL | --reference-file FILE.csv|.nc] [--table out.csv]
    interkit methods scan.nc [--bibtex refs.bib]     # methods paragraph for a paper
    interkit inspect FILE.xyz [--charges QA QB]       # atoms, fragments, closest A-B contacts
    interkit cube scan.nc --point K -o DIR            # densities of one point as cube files
    interkit optimise IN.toml|IN.xyz -o traj.nc [--level L]   # rigid-body CP minimum, final XYZ
    interkit fit-sites scan.nc ... --model lj|buckingham-tt    # site-site parameters, CSV/JSON
    interkit --version

The saved-file commands (rerun, verify, report, export) live in :mod:`interkit.cli.saved`;
methods, inspect and systems in :mod:`interkit.cli.extras`; optimise and fit-sites in
:mod:`interkit.cli.rigid`.

Exit status: 0 success; 1 finished, but some points failed (the summary names them) or
a check is off tolerance; 2 usage error or bad input (one line, nothing written); 3
internal error, or a result that could not be written where asked (one line naming the
file the traceback or the rescued scan went to). No command prints a raw traceback.
"""

from __future__ import annotations

import argparse
import os
import sys

from ..errors import InterkitError

EXIT_USAGE = 2
EXIT_INTERNAL = 3

#: the demo scan: small enough for about a minute on 2 cores
DEMO_LEVELS = ("hf/def2-svp", "b3lyp-d3bj/def2-svp")
DEMO_FACTORS = (0.85, 0.9, 0.95, 1.0, 1.05, 1.1, 1.2, 1.35, 1.5, 1.75, 2.0)


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit 2
        self.exit(EXIT_USAGE, f"interkit: error: {message}\n")


def _build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="interkit", description="Counterpoise-corrected interaction-energy scans of dimers.")
    parser.add_argument("--version", action="version", version=f"interkit {__import__('interkit').__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True

    p = sub.add_parser("scan", help="run the scan described by a TOML spec file")
    p.add_argument("spec", help="TOML spec file")
    p.add_argument("-o", "--output", required=True, help="netCDF file to write")
    _add_run_options(p)

    p = sub.add_parser("demo", help="run the bundled demo scan (water-methanol hydrogen bond)")
    p.add_argument("-o", "--output-dir", default="demo-output", help="folder for scan.nc and curve.png")
    _add_run_options(p, default_cache=None)

    p = sub.add_parser("show", help="print the minimum position and well depth of every level "
                                    "(and the SAPT0 components, if computed)")
    p.add_argument("scan", help="netCDF scan file")
    from .output import add_unit_options

    add_unit_options(p)

    sub.add_parser("systems", help="list the bundled demo dimers")

    from .saved import add_commands

    add_commands(sub, _add_run_options)

    from .compare import add_commands as add_compare

    add_compare(sub)
    from .extras import add_commands as add_extras

    add_extras(sub)
    from .study import add_commands as add_study

    add_study(sub, _add_run_options)

    from .volumes import add_commands as add_volumes

    add_volumes(sub)
    from .orientation import add_commands as add_orientation

    add_orientation(sub, _add_run_options)
    from .rigid import add_commands as add_rigid

    add_rigid(sub)   # optimise, fit-sites

    p = sub.add_parser("store", help="inspect or shrink a result store (the --cache folder)")
    store_sub = p.add_subparsers(dest="store_command", metavar="ACTION", parser_class=_Parser)
    store_sub.required = True
    q = store_sub.add_parser("info", help="entries, size, least and most recent use, damaged entries")
    q.add_argument("store", help="store folder")
    q = store_sub.add_parser("prune", help="remove the least recently used entries until the store "
                                           "fits a size limit")
    q.add_argument("store", help="store folder")
    q.add_argument("--max-size", required=True, help="size limit, e.g. 500MB, 2GB or 1GiB")
    return parser


_STORE_RULE = object()  # default of _add_run_options: the folder rule of run.store


def _add_run_options(p, default_cache=_STORE_RULE) -> None:
    if default_cache is _STORE_RULE:  # $INTERKIT_CACHE, else .interkit-cache (as run_scan)
        from ..run.store import DEFAULT_STORE_FOLDER, STORE_ENV_VARIABLE

        default_cache = os.environ.get(STORE_ENV_VARIABLE, "").strip() or DEFAULT_STORE_FOLDER
    p.add_argument("--workers", type=int, default=None, help="worker processes (default: all cores)")
    p.add_argument("--cache", default=default_cache,
                   help="result store folder (default: %(default)s); finished calculations are reused")
    p.add_argument("--serial", action="store_true", help="run in this process instead of worker processes")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.add_argument("--scheduler", metavar="ADDRESS", default=None,
                   help="run one calculation per task on the Dask cluster of this scheduler "
                        "(e.g. tcp://HOST:8786); the --cache folder must be visible to its workers")
    p.add_argument("--cluster-wait", metavar="SECONDS", type=float, default=None,
                   help="with --scheduler: seconds to wait for the scheduler (default 10) and for a "
                        "first worker (default 60) before giving up with an error")


def _energy_table(ds, unit: str = "kcal/mol") -> str:
    from ..data.dispersion import flatten_dispersion
    from ..model.level_names import display_label
    from ..units import convert_energy

    ds = flatten_dispersion(ds)
    variable, kind = _energy_variable(ds)
    levels = [str(x) for x in ds["level"].values]
    width = max(14, *(len(display_label(lv)) + 2 for lv in levels))
    head = f"{'R / Å':>8s}  " + "".join(f"{display_label(lv):>{width}s}" for lv in levels)
    lines = [f"interaction energy, {kind} ({unit})", head]
    for i, r in enumerate(ds["distance"].values):
        cells = []
        for lv in levels:
            v = convert_energy(float(ds[variable].sel(level=lv).values[i]), "kcal/mol", unit)
            st = str(ds["status"].sel(level=lv).values[i])
            cells.append(f"{'failed':>{width}s}" if st == "failed" else f"{v:>{width}.3f}")
        lines.append(f"{r:8.3f}  " + "".join(cells))
    return "\n".join(lines)


def _minimum_report(ds, unit: str = "kcal/mol", force_unit: str = "kcal/mol/angstrom") -> str:
    from ..data.dispersion import flatten_dispersion

    ds = flatten_dispersion(ds)
    from ..analysis.minima import headline_table
    from ..model.level_names import display_label
    from ..units import convert_energy

    variable, kind = _energy_variable(ds)
    depth_head, bsse_head = f"well depth / {unit}", f"BSSE at R_min / {unit}"
    width = max([28] + [len(display_label(str(lv))) + 1 for lv in ds["level"].values])
    lines = [f"scan: {ds.attrs.get('title', '')}",
             f"coordinate: {ds['distance'].attrs.get('long_name', '')}; counterpoise: {ds.attrs.get('counterpoise')}",
             f"minimum and well depth of the {kind} interaction energy ({variable}), from a natural "
             "cubic spline through the points",
             f"{'level':<{width}s} {'R_min / Å':>10s} {depth_head:>22s} {bsse_head:>24s}  note"]
    for row in headline_table(ds, variable):
        note = [] if row["interior"] else ["minimum at the edge of the grid"]
        if row["failed_points"]:
            note.append(f"{row['failed_points']} failed point(s)")
        depth = convert_energy(row["well_depth_kcal_per_mol"], "kcal/mol", unit)
        bsse = convert_energy(row["bsse_at_minimum_kcal_per_mol"], "kcal/mol", unit)
        bsse_text = f"{bsse:>24.3f}" if bsse == bsse else f"{'–':>24s}"
        lines.append(f"{display_label(row['level']):<{width}s} {row['r_min_angstrom']:>10.3f} "
                     f"{depth:>22.3f} {bsse_text}  {'; '.join(note)}")
    lines.extend(_force_report(ds, force_unit, width))
    from ..data.sapt0 import decomposition_report

    lines.extend(decomposition_report(ds))
    lines.append("Note: " + ds.attrs.get("caution", ""))
    return "\n".join(lines)


def _energy_variable(ds) -> tuple[str, str]:
    """The interaction-energy variable a scan's tables use, and how to call it: the
    uncorrected ``e_int_nocp`` when the scan ran without counterpoise."""
    if ds.attrs.get("counterpoise", "") == "none":
        return "e_int_nocp", "uncorrected (no counterpoise correction)"
    return "e_int", "counterpoise-corrected"


def _failed_points(ds) -> list[str]:
    """One line per level with failed points: where and why."""
    lines = []
    for level in ds["level"].values:
        status = ds["status"].sel(level=level).values
        bad = [i for i, st in enumerate(status) if str(st) == "failed"]
        if not bad:
            continue
        detail = ds["status_detail"].sel(level=level).values if "status_detail" in ds.variables else None
        where = ", ".join(f"R = {float(ds['distance'].values[i]):.3f} Å"
                          + (f" ({str(detail[i])[:120]})" if detail is not None and str(detail[i]) else "")
                          for i in bad)
        lines.append(f"failed points of {level}: {where}")
    return lines


def _force_report(ds, force_unit: str = "kcal/mol/angstrom", width: int = 28) -> list[str]:
    """Where the net force along the coordinate vanishes, and the largest attractive
    force, per level (if the scan has forces)."""
    if "force_along" not in ds.variables:
        return []
    import numpy as np

    from ..analysis.minima import force_zero_crossing
    from ..model.level_names import display_label
    from ..units import convert_force

    stored = ds["force_along"].attrs.get("units", "kcal/mol/angstrom")
    pull_head = f"largest pull / {force_unit}"
    lines = [f"{'level':<{width}s} {'force zero / Å':>14s} {pull_head:>28s}  forces from"]
    for level in ds["level"].values:
        f = ds["force_along"].sel(level=level).values
        r0 = force_zero_crossing(ds["distance"].values, f)
        method = str(ds["force_method"].sel(level=level).values)
        text = f"{r0:>14.3f}" if r0 == r0 else f"{'no sign change':>14s}"
        finite = f[np.isfinite(f)]
        pull = convert_force(float(finite.min()), stored, force_unit) if finite.size else float("nan")
        pull_text = f"{pull:>28.3f}" if pull == pull and pull < 0 else f"{'–':>28s}"
        lines.append(f"{display_label(str(level)):<{width}s} {text} {pull_text}  {method}")
    return lines


def _run(spec, args):
    from ..run.scan import run_scan

    if getattr(args, "scheduler", None):
        return _run_on_scheduler(spec, args)
    return run_scan(spec, executor="serial" if args.serial else "processes", cache=args.cache,
                    progress=not args.quiet, workers=args.workers)


def _cmd_scan(args) -> int:
    from ..model.spec_file import load_spec_toml
    from .output import OutputRescued, check_scan_output, save_or_rescue

    spec = load_spec_toml(args.spec)
    check_scan_output(args.output)
    ds = _run(spec, args)
    rescued = None
    try:
        save_or_rescue(ds, args.output)
    except OutputRescued as exc:
        rescued = exc
    print(_energy_table(ds))
    print(_minimum_report(ds))
    failed = _failed_points(ds)
    for line in failed:
        print(line)
    if rescued is not None:
        raise rescued
    print(f"wrote {args.output}")
    _store_summary(ds, args.output)
    return 1 if failed else 0


def _store_summary(ds, where: str) -> None:
    """One line on stderr when results could not be written to the store."""
    n = int(ds.attrs.get("calculations_not_stored", 0))
    if n:
        print(f"interkit: warning: {n} calculation(s) could not be written to the store; their results "
              f"are in {where}, a rerun computes them again", file=sys.stderr)


def demo_spec():
    """The ScanSpec that ``interkit demo`` runs."""
    from ..model.coordinates import AtomPair
    from ..model.demo import DEFAULT_DEMO, demo_catalog, load_demo
    from ..model.spec import ScanSpec

    dimer = load_demo(DEFAULT_DEMO)
    i, j = demo_catalog()[DEFAULT_DEMO]["contact"]
    return ScanSpec(dimer=dimer, coordinate=AtomPair(i, j), factors=DEMO_FACTORS, levels=DEMO_LEVELS,
                    name="water-methanol demo")


def _cmd_demo(args) -> int:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from ..plot.curves import plot_curves
    from .output import check_output_folder, save_or_rescue

    out = args.output_dir
    check_output_folder(out, "--output-dir")
    os.makedirs(out, exist_ok=True)
    if args.cache is None:
        args.cache = os.path.join(out, "cache")
    spec = demo_spec()
    ds = _run(spec, args)
    nc, png = os.path.join(out, "scan.nc"), os.path.join(out, "curve.png")
    save_or_rescue(ds, nc, "--output-dir")   # a failed write keeps the scan under another name
    ax = plot_curves(ds, show_uncorrected=True)
    ax.set_title("water–methanol hydrogen bond (interkit demo)", fontsize=10)
    ax.figure.tight_layout()
    ax.figure.savefig(png, dpi=120)
    plt.close(ax.figure)
    print(_energy_table(ds))
    print(_minimum_report(ds))
    print(f"wrote {nc} and {png} ({ds.attrs['calculations_computed']} calculations computed, "
          f"{ds.attrs['calculations_from_store']} from the store, {ds.attrs['run_wall_time_s']:.1f} s)")
    _store_summary(ds, nc)
    failed = _failed_points(ds)
    for line in failed:
        print(line)
    return 1 if failed else 0


def _cmd_show(args) -> int:
    from ..data.grid import is_grid_file

    if is_grid_file(args.scan):   # an orientation grid (interkit orient)
        from .grid_files import cmd_show

        return cmd_show(args)
    from ..data.schema import open_scan

    ds = open_scan(args.scan)
    from .output import force_unit_of

    print(_minimum_report(ds, args.unit, force_unit_of(args)))
    return 0


def _cmd_systems(args) -> int:
    from ..model.demo import demo_catalog

    for name, entry in sorted(demo_catalog().items()):
        print(f"{name:<20s} {entry.get('character', ''):<22s} {entry.get('title', '')}")
    return 0


def _run_on_scheduler(spec, args):
    from ..errors import InputError
    from ..run.dask import connect, dask_executor
    from ..run.scan import run_scan

    if args.serial or args.workers is not None:
        raise InputError("--scheduler: the cluster's workers run the scan; leave out --serial and --workers")
    client = connect(args.scheduler, timeout=args.cluster_wait)
    try:
        return run_scan(spec, executor=dask_executor(client, args.cluster_wait), cache=args.cache,
                        progress=not args.quiet)
    finally:
        client.close()


def _cmd_store(args) -> int:
    from ..run.store import ResultStore, format_size, parse_size

    if args.store_command == "prune":
        limit = parse_size(args.max_size, "--max-size")
        store = ResultStore(args.store, create=False)
        res = store.prune(limit)
        print(f"removed {res.removed_entries} least recently used entries, {res.removed_damaged} damaged "
              f"and {res.removed_partial} abandoned temporary files ({format_size(res.freed_bytes)})")
        print(f"{args.store}: {res.remaining_entries} entries, {format_size(res.remaining_bytes)} "
              f"(limit {format_size(limit)})")
        return 0
    info = ResultStore(args.store, create=False).info()

    def when(t):
        return t.strftime("%Y-%m-%d %H:%M:%S UTC") if t is not None else "-"

    print(f"store               {info.root}")
    print(f"entries             {info.entries} ({format_size(info.entry_bytes)})")
    print(f"size on disk        {format_size(info.total_bytes)} ({info.total_bytes} bytes, all files)")
    print(f"least recently used {when(info.least_recent_use)}")
    print(f"most recently used  {when(info.most_recent_use)}")
    print(f"damaged, set aside  {info.damaged}")
    print(f"unfinished writes   {info.partial}")
    return 0


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``interkit`` command; returns the exit status."""
    parser = _build_parser()
    args = parser.parse_args(argv)
    if getattr(args, "workers", None) is not None and args.workers < 1:
        print(f"interkit: error: --workers: {args.workers} is not a positive integer", file=sys.stderr)
        return EXIT_USAGE
    handlers = {"scan": _cmd_scan, "demo": _cmd_demo, "show": _cmd_show, "systems": _cmd_systems,
                "store": _cmd_store}
    from .saved import HANDLERS

    handlers.update(HANDLERS)
    from .compare import run_compare

    handlers["compare"] = run_compare
    from .extras import HANDLERS as EXTRA_HANDLERS

    handlers.update(EXTRA_HANDLERS)   # methods, inspect, and systems with its contacts
    from .study import HANDLERS as STUDY_HANDLERS

    handlers.update(STUDY_HANDLERS)   # interkit study run/rank/verify/rerun/report

    from .volumes import HANDLERS as VOLUME_HANDLERS

    handlers.update(VOLUME_HANDLERS)   # cube
    from .orientation import cmd_orient

    handlers["orient"] = lambda a: cmd_orient(a, _run)   # orientation scans
    from .rigid import HANDLERS as RIGID_HANDLERS

    handlers.update(RIGID_HANDLERS)   # optimise, fit-sites
    try:
        return handlers[args.command](args)
    except InterkitError as exc:
        print(f"interkit: error: {_one_line(exc)}", file=sys.stderr)
        return getattr(exc, "exit_code", EXIT_USAGE)
    except KeyboardInterrupt:
        print("interkit: interrupted; finished calculations are kept in the store", file=sys.stderr)
        return 130
    except Exception as exc:  # last resort: one line, the traceback goes to a file
        from .output import internal_error

        return internal_error(exc)


def _one_line(exc: BaseException) -> str:
    """The message of ``exc`` on one line (newlines of an embedded excerpt folded)."""
    return " ".join(str(exc).split("\n"))


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
