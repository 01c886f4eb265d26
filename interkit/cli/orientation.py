"""``interkit orient``: an orientation scan (rotations, offsets, separations, samples)
from a TOML file (see :func:`interkit.model.orientation_file.load_orientation_toml`).

    interkit orient turn.toml -o turn.nc [--cache DIR] [--workers N] [--serial] [--quiet]

Prints the lowest grid point of every level and writes the grid Dataset (netCDF,
:func:`interkit.save_grid`). Exit status 1 when a point failed, 2 for bad input.
"""

from __future__ import annotations

import os
import tempfile

from ..errors import InputError
from .output import OutputRescued


def add_commands(sub, add_run_options) -> None:
    """Register ``orient`` on the ``interkit`` sub-command parser."""
    p = sub.add_parser("orient", help="run an orientation scan (B turned, slid or sampled over "
                                      "orientations, on one or two axes) from a TOML file")
    p.add_argument("spec", help="TOML file with [system], [calculation] and [[orientation.axis]] tables")
    p.add_argument("-o", "--output", required=True, help="netCDF file to write")
    add_run_options(p)


def _save(ds, path: str) -> None:
    from ..data.grid import save_grid

    try:
        save_grid(ds, path)
        return
    except OSError as exc:
        first = exc
    fd, rescue = tempfile.mkstemp(prefix="orientation.rescued-", suffix=".nc")
    os.close(fd)
    save_grid(ds, rescue)
    raise OutputRescued(f"--output: could not write {path!r} ({first.strerror or type(first).__name__}); "
                        f"the computed scan was saved to {rescue!r} instead") from None


def cmd_orient(args, run_flat) -> int:
    """Handler of ``interkit orient``; ``run_flat(spec, args)`` runs a ScanSpec as
    ``interkit scan`` does (executor, store, cluster options)."""
    from ..analysis.grid_minima import grid_minimum
    from ..data.grid import grid_dataset
    from ..model.orientation_file import load_orientation_toml
    from .output import check_scan_output

    grid, options = load_orientation_toml(args.spec)
    check_scan_output(args.output)
    spec = grid.scan_spec(**options)
    ds = grid_dataset(run_flat(spec, args), grid)
    _save(ds, args.output)
    print(f"orientation scan {spec.name}: {grid.describe()}, {len(grid.dimers())} points")
    for level in ds["level"].values:
        try:
            low = grid_minimum(ds, str(level))
        except InputError:
            print(f"  {level}: no point has a number")
            continue
        where = ", ".join(f"{ax.name} = {low[ax.name]:g}" + (f" {ax.units}" if ax.units != "1" else "")
                          for ax in grid.axes)
        print(f"  {level}: lowest E_int {low['energy_kcal_per_mol']:.3f} kcal/mol at {where}")
    failed = int((ds["status"] == "failed").sum())
    if failed:
        print(f"{failed} point(s) failed; see status_detail in the file")
    print(f"wrote {args.output}")
    return 1 if failed else 0
