"""Commands of ``interkit`` that work on a saved scan file (see :mod:`interkit.cli`).

    interkit rerun scan.nc [-o out.nc] [--cache DIR] [--workers N] [--serial] [--quiet]
    interkit verify scan.nc [--sample N] [--seed S] [--workers N] [--serial] [--quiet]
    interkit report scan.nc -o report.html [--reference LEVEL]
    interkit export scan.nc -o out.csv|out.json [--format csv|json] [--unit UNIT]

``rerun`` and ``verify`` exit with status 1 when a number lies outside its tolerance.
"""

from __future__ import annotations

import os

from .errors import InputError

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
                   help="level used as reference in the comparison (default: the highest level of the scan)")

    from .export import FORMATS

    p = sub.add_parser("export", help="write the scan as a tidy CSV table or as JSON with QCSchema molecules")
    p.add_argument("scan", help="netCDF scan file")
    p.add_argument("-o", "--output", required=True, help="file to write (.csv or .json)")
    p.add_argument("--format", choices=FORMATS, default=None, help="csv or json (default: from the suffix)")
    p.add_argument("--unit", default="kcal/mol", help="energy unit of the CSV (default: %(default)s)")


def _spec_of(ds, path: str):
    from .results import spec_of

    try:
        return spec_of(ds)
    except InputError as exc:
        raise InputError(f"scan file {path!r}: its spec cannot be rebuilt ({exc})") from None
    except (KeyError, TypeError, ValueError) as exc:
        raise InputError(f"scan file {path!r}: attrs.spec_json cannot be rebuilt into a spec "
                         f"({type(exc).__name__}: {exc})") from None


def _key_line(saved, spec, indices=None) -> str:
    from .plan import plan_scan
    from .provenance import key_agreement

    match, total = key_agreement(saved, plan_scan(spec), indices)
    line = f"store keys: {match} of {total} recorded keys are the keys of today's calculations"
    if match < total:
        line += (" (keys change with the pyscf version or interkit's numerics version: "
                 f"file written with pyscf {saved.attrs.get('pyscf_version', '?')})")
    return line


def _finish(rows, what: str) -> int:
    from .provenance import all_passed, deviation_lines

    print("\n".join(deviation_lines(rows)))
    if all_passed(rows):
        print(f"{what}: every variable within its tolerance")
        return 0
    failed = ", ".join(r.variable for r in rows if not r.passed)
    print(f"{what}: FAILED for {failed}")
    return 1


def cmd_rerun(args) -> int:
    from .cli import _check_output, _run
    from .provenance import compare_datasets
    from .results import open_scan, save_scan

    saved = open_scan(args.scan)
    spec = _spec_of(saved, args.scan)
    if args.output is not None:
        _check_output(args.output)
    fresh = _run(spec, args)
    print(f"rerun of {args.scan}: {fresh.attrs.get('calculations_from_store', 0)} calculations from the store, "
          f"{fresh.attrs.get('calculations_computed', 0)} computed")
    print(_key_line(saved, spec))
    code = _finish(compare_datasets(saved, fresh), "rerun")
    if args.output is not None:
        save_scan(fresh, args.output)
        print(f"wrote {args.output}")
    return code


def cmd_verify(args) -> int:
    from .provenance import compare_datasets, sample_points, subset_spec
    from .results import open_scan
    from .run import run_scan

    saved = open_scan(args.scan)
    spec = _spec_of(saved, args.scan)
    n = len(spec.points)
    if saved.sizes["distance"] != n:
        print(f"verify: FAILED: the file has {saved.sizes['distance']} points but its spec gives {n}")
        return 1
    indices = sample_points(n, args.sample, args.seed)
    sub = subset_spec(spec, indices)
    where = ", ".join(f"{p.distance:.4f}" for p in sub.points)
    print(f"verifying {len(indices)} of {n} points (seed {args.seed}) at {where} Å, recomputed from scratch")
    fresh = run_scan(sub, executor="serial" if args.serial else "processes", cache=None,
                     progress=not args.quiet, workers=args.workers)
    print(_key_line(saved, sub, indices))
    return _finish(compare_datasets(saved, fresh, indices), "verify")


def cmd_report(args) -> int:
    from .report import write_report
    from .results import open_scan

    if not args.output.lower().endswith((".html", ".htm")):
        raise InputError(f"--output: {args.output!r} should end in .html")
    folder = os.path.dirname(os.path.abspath(args.output))
    if not os.path.isdir(folder):
        raise InputError(f"--output: folder {folder!r} does not exist")
    ds = open_scan(args.scan)
    write_report(ds, args.output, reference=args.reference)
    print(f"wrote {args.output}")
    return 0


def cmd_export(args) -> int:
    from .export import export_format, export_scan
    from .results import open_scan

    export_format(args.output, args.format)       # check before reading the scan
    ds = open_scan(args.scan)
    export_scan(ds, args.output, args.format, args.unit)
    print(f"wrote {args.output}")
    return 0


HANDLERS = {"rerun": cmd_rerun, "verify": cmd_verify, "report": cmd_report, "export": cmd_export}
