"""Commands of ``interkit`` that work on a saved scan file (see :mod:`interkit.cli.main`).

    interkit rerun scan.nc [-o out.nc] [--cache DIR] [--workers N] [--serial] [--quiet]
    interkit verify scan.nc [--sample N] [--seed S] [--workers N] [--serial] [--quiet]
    interkit report scan.nc -o report.html [--reference LEVEL] [--unit kJ/mol] [--force-unit kJ/mol/nm]
    interkit export scan.nc -o out.csv|out.json|out.xyz|out.extxyz [--format F] [--unit UNIT] [--level L]

``rerun`` and ``verify`` exit with status 1 when a number lies outside its tolerance.
Each command also takes an orientation-grid file (``interkit orient`` output; it is
recognised by its schema attribute, see :mod:`interkit.cli.grid_files`).
"""

from __future__ import annotations

from contextlib import contextmanager

from ..errors import InputError

COMMANDS = ("rerun", "verify", "report", "export")
DEFAULT_SAMPLE = 3


def add_commands(sub, add_run_options) -> None:
    """Register the sub-commands on the ``interkit`` sub-parser collection ``sub``."""
    p = sub.add_parser("rerun", help="run a saved scan's spec again (store entries are reused) and "
                                     "report whether the numbers match the file")
    p.add_argument("scan", help="netCDF scan file")
    p.add_argument("-o", "--output", default=None, help="netCDF file for the rerun (optional)")
    add_run_options(p)

    p = sub.add_parser("verify", help="recompute sampled points from scratch (no store) and check every "
                                      "variable against the file within stated tolerances")
    p.add_argument("scan", help="netCDF scan file")
    p.add_argument("--sample", type=int, default=DEFAULT_SAMPLE,
                   help="number of points to recompute (default: %(default)s; more than the scan has = all)")
    p.add_argument("--seed", type=int, default=0, help="seed of the point sampling (default: %(default)s)")
    p.add_argument("--workers", type=int, default=None, help="worker processes (default: all cores)")
    p.add_argument("--serial", action="store_true", help="run in this process instead of worker processes")
    p.add_argument("--quiet", action="store_true", help="no progress bar")

    p = sub.add_parser("report", help="write a self-contained HTML report (figures inline, works offline)")
    p.add_argument("scan", help="netCDF scan file")
    p.add_argument("-o", "--output", required=True, help="HTML file to write")
    p.add_argument("--reference", default=None,
                   help="curve used as reference in the comparison (default: as interkit compare, the most "
                        "accurate wavefunction level of the scan, else its first curve)")
    from ..analysis.error_statistics import REGIONS

    p.add_argument("--region", choices=REGIONS, default="all",
                   help="points in the statistics, as interkit compare --region (default: all)")
    p.add_argument("--window", metavar="ANGSTROM", type=float, default=None,
                   help="half-width of --region window in angstrom (default 0.5)")
    p.add_argument("--relative", action="store_true", help="errors in per cent of |reference|")
    from .output import add_unit_options

    add_unit_options(p)

    from ..share.export import FORMATS

    p = sub.add_parser("export", help="write the scan as a tidy CSV table, JSON with QCSchema molecules, or XYZ geometries (.xyz; .extxyz with energies and forces)")
    p.add_argument("scan", help="netCDF scan file")
    p.add_argument("-o", "--output", required=True, help="file to write (.csv, .json, .xyz or .extxyz)")
    p.add_argument("--format", choices=FORMATS, default=None, help="csv, json, xyz or extxyz (default: from the suffix)")
    p.add_argument("--unit", default="kcal/mol", help="energy unit of the CSV (default: %(default)s)")
    p.add_argument("--force-unit", default=None,
                   help="force unit of the CSV (default: the one matching --unit)")
    p.add_argument("--level", default=None, help="extxyz: curve whose energy and forces are written")


@contextmanager
def _executor(args):
    """The executor named by the run options: a Dask client for ``--scheduler`` (closed
    afterwards), else ``'serial'`` or ``'processes'``."""
    if not getattr(args, "scheduler", None):
        yield "serial" if args.serial else "processes"
        return
    from ..run.dask import connect, dask_executor

    if args.serial or args.workers is not None:
        raise InputError("--scheduler: the cluster's workers run the scan; leave out --serial and --workers")
    client = connect(args.scheduler, timeout=args.cluster_wait)
    try:
        yield dask_executor(client, args.cluster_wait)
    finally:
        client.close()


def _finish(table) -> int:
    print(table)
    return 0 if table.passed else 1


def _grid(args) -> bool:
    """True when the file named on the command line is an orientation grid (its schema)."""
    from ..data.grid import is_grid_file

    return is_grid_file(args.scan)


def cmd_rerun(args) -> int:
    if _grid(args):
        from .grid_files import cmd_rerun as rerun_grid

        return rerun_grid(args, _executor)
    from ..share.replay import rerun_scan
    from .output import check_scan_output

    if args.output is not None:
        check_scan_output(args.output)
    with _executor(args) as executor:
        fresh, table = rerun_scan(args.scan, cache=args.cache, executor=executor, workers=args.workers,
                                  progress=not args.quiet, log=print)
    code = _finish(table)
    if args.output is not None:
        from .output import save_or_rescue

        save_or_rescue(fresh, args.output)
        print(f"wrote {args.output}")
    return code


def cmd_verify(args) -> int:
    if _grid(args):
        from .grid_files import cmd_verify as verify_grid

        return verify_grid(args)
    from ..share.replay import verify_scan
    from .output import verify_and_print

    return verify_and_print(verify_scan, args.scan, args)


def cmd_report(args) -> int:
    if _grid(args):
        from .grid_files import cmd_report as grid_report

        return grid_report(args)
    from ..data.schema import open_scan
    from ..share.report import write_report
    from .output import check_output, force_unit_of

    check_output(args.output, "--output", (".html", ".htm"), "HTML")
    ds = open_scan(args.scan)
    write_report(ds, args.output, reference=args.reference, region=args.region, window_angstrom=args.window,
                 relative=args.relative, unit=args.unit, force_unit=force_unit_of(args))
    print(f"wrote {args.output}")
    return 0


def cmd_export(args) -> int:
    if _grid(args):
        from .grid_files import cmd_export as export_grid

        return export_grid(args)
    from ..data.schema import open_scan
    from ..share.export import FORMATS, export_format, export_scan
    from .output import check_output

    export_format(args.output, args.format, ("--output", "--format"))   # check before reading the scan
    check_output(args.output, "--output", tuple(f".{f}" for f in FORMATS) if args.format is None else ("",), "export")
    ds = open_scan(args.scan)
    export_scan(ds, args.output, args.format, args.unit, level=args.level, force_unit=args.force_unit)
    print(f"wrote {args.output}")
    return 0


HANDLERS = {"rerun": cmd_rerun, "verify": cmd_verify, "report": cmd_report, "export": cmd_export}
