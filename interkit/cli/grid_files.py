"""The saved-file commands on an orientation-grid file (``interkit orient`` output).

``interkit show``, ``verify``, ``rerun``, ``report`` and ``export`` look at the file's
``schema`` attribute and come here for a grid (:data:`interkit.data.grid.GRID_SCHEMA`),
with the same options and exit codes as for a scan (1: off tolerance; 2: bad input).
"""

from __future__ import annotations

from ..errors import InputError


def show_grid(ds, unit: str = "kcal/mol") -> str:
    """The text ``interkit show`` prints for a grid: axes, lowest point of every level, the
    minimum-energy path (two axes) and the failed points."""
    from ..analysis.grid_minima import grid_minimum, minimum_energy_path
    from ..data.grid import cell_labels, grid_of
    from ..units import convert_energy

    grid = grid_of(ds)
    variable = "e_int_nocp" if ds.attrs.get("counterpoise", "") == "none" else "e_int"
    kind = "uncorrected" if variable == "e_int_nocp" else "counterpoise-corrected"
    scheme = str(ds["dispersion"].values[0]) if "dispersion" in ds.dims else None
    lines = [str(ds.attrs.get("title", "orientation scan")),
             f"grid: {grid.describe()}, {len(grid.dimers())} points; counterpoise: {ds.attrs.get('counterpoise')}"]
    for ax in grid.axes:
        lines.append(f"  {ax.name}: {ax.describe()}; values {', '.join(f'{v:g}' for v in ax.values)}"
                     + (f" {ax.units}" if ax.units != "1" else ""))
    lines.append(f"lowest grid point of the {kind} interaction energy ({variable}, {unit})"
                 + (f", dispersion scheme {scheme}" if scheme else ""))
    labels = cell_labels(ds)
    for level in (str(x) for x in ds["level"].values):
        try:
            low = grid_minimum(ds, level, variable, scheme)
        except InputError:
            lines.append(f"  {level}: no point has a number (all failed)")
            continue
        e = convert_energy(low["energy_kcal_per_mol"], "kcal/mol", unit)
        lines.append(f"  {level}: {e:.3f} at {labels[low['point']]}")
        if len(grid.axes) == 2:
            mep = minimum_energy_path(ds, level, variable, scheme)
            first, second = grid.names
            cells = [f"{x:g}: {y:g}" if y == y else f"{x:g}: –"
                     for x, y in zip(mep[first].values, mep[f"{second}_at_minimum"].values)]
            lines.append(f"    minimum-energy path ({first}: {second} of the lowest point): {'; '.join(cells)}")
    failed = int((ds["status"] == "failed").sum())
    if failed:
        lines.append(f"{failed} point(s) failed; see status_detail in the file")
    lines.append("Note: " + str(ds.attrs.get("caution", "")))
    return "\n".join(lines)


def cmd_show(args) -> int:
    from ..data.grid import open_grid

    print(show_grid(open_grid(args.scan), args.unit))
    return 0


def cmd_verify(args) -> int:
    from ..share.grid_replay import verify_grid
    from .output import verify_and_print

    return verify_and_print(verify_grid, args.scan, args)


def cmd_rerun(args, executor_of) -> int:
    """``interkit rerun`` of a grid; ``executor_of(args)`` is the executor context of
    :mod:`interkit.cli.saved`."""
    from ..share.grid_replay import rerun_grid
    from .orientation import _save
    from .output import check_scan_output

    if args.output is not None:
        check_scan_output(args.output)
    with executor_of(args) as executor:
        fresh, table = rerun_grid(args.scan, cache=args.cache, executor=executor, workers=args.workers,
                                  progress=not args.quiet, log=print)
    print(table)
    if args.output is not None:
        _save(fresh, args.output)
        print(f"wrote {args.output}")
    return 0 if table.passed else 1


def cmd_report(args) -> int:
    from ..share.grid_report import write_grid_report
    from .output import check_output

    check_output(args.output, "--output", (".html", ".htm"), "HTML")
    for option, value in (("--reference", args.reference), ("--window", args.window)):
        if value is not None:
            raise InputError(f"{option}: {value!r} applies to the report of a distance scan, not of an orientation grid")
    if args.region != "all" or args.relative or args.force_unit is not None:
        raise InputError("--region/--relative/--force-unit: apply to the report of a distance scan, "
                         "not of an orientation grid")
    write_grid_report(args.scan, args.output, unit=args.unit)
    print(f"wrote {args.output}")
    return 0


def cmd_export(args) -> int:
    from ..share.grid_export import GRID_FORMATS, export_grid
    from .output import check_output

    kind = args.format or args.output.lower().rpartition(".")[2]
    if kind not in GRID_FORMATS:
        raise InputError(f"--output: {args.output!r}: an orientation grid exports as .csv or .json "
                         f"(geometries: the JSON export holds every point's molecule)")
    if args.level is not None:
        raise InputError(f"--level: {args.level!r} applies to the extxyz export of a distance scan only")
    check_output(args.output, "--output", ("",) if args.format else (".csv", ".json"), "export")
    export_grid(args.scan, args.output, kind, args.unit, args.force_unit)
    print(f"wrote {args.output}")
    return 0
