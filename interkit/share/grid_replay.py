"""Replay a saved orientation grid: recompute sampled points, or all of them, and compare.

The same provenance as a scan (:mod:`interkit.share.replay`): a grid Dataset records the
grid recipe (``grid_json``: starting dimer and axes) and the options of the flat scan it
ran as (``spec_json``: levels, thresholds, ...), the versions and every store key. Both
functions rebuild the geometries from the recipe, run them as a flat scan of explicit
frames and compare every variable of the file, point by point, within the tolerances of
:mod:`interkit.share.tolerances`; a deviation names the grid point by its axis values.

* :func:`verify_grid` recomputes a few sampled points from scratch (no store);
* :func:`rerun_grid` recomputes every point (reusing a store, if given) and returns the
  new grid Dataset as well.
"""

from __future__ import annotations

import dataclasses
import os
import re
from collections.abc import Callable

import numpy as np
import xarray as xr

from ..data.grid import FLAT_DIM, cell_labels, check_grid, flat_view, grid_dataset, grid_of, open_grid
from ..errors import InputError
from .compare import Deviation, DeviationTable, compare_datasets
from .provenance import key_agreement, rebuild_spec
from .replay import sample_points, subset_spec

#: a flat point as :func:`interkit.share.compare.compare_datasets` labels it
_FLAT_LABEL = re.compile(rf"\b{FLAT_DIM}=(\d+)\.0000\b")


class GridDeviationTable(DeviationTable):
    """A :class:`~interkit.share.compare.DeviationTable` of a grid: ``indices`` and
    ``distances`` hold the flat point numbers, ``cells`` their axis values as text."""

    def __init__(self, rows=(), what: str = "", indices=None, keys: tuple[int, int] = (0, 0),
                 file_pyscf_version: str = "", fresh: xr.Dataset | None = None, cells=()):
        idx = np.asarray(indices if indices is not None else [], dtype=int)
        super().__init__(rows, what, idx, idx.astype(float), keys, file_pyscf_version, fresh)
        self.cells = list(cells)


def _load(ds_or_path) -> tuple[xr.Dataset, str | None]:
    if isinstance(ds_or_path, xr.Dataset):
        check_grid(ds_or_path)
        return ds_or_path, None
    if isinstance(ds_or_path, (str, os.PathLike)):
        return open_grid(ds_or_path), os.fspath(ds_or_path)
    raise InputError(f"grid: expected an xarray.Dataset or the path of a .nc file, got {type(ds_or_path).__name__}")


def recipe_spec(ds: xr.Dataset, path: str | None = None):
    """The flat ScanSpec of a saved grid, geometries rebuilt from its recipe.

    The calculation options (levels, counterpoise, forces, thresholds, ...) are those
    recorded in ``spec_json``; the frames come from ``grid_json`` (starting dimer and
    axes), so a recomputation checks that the recipe gives the saved geometries.
    """
    from ..model.coordinates import Frames
    from ..model.spec import ScanSpec

    where = f"grid file {path!r}" if path is not None else "grid"
    try:
        grid = grid_of(ds)
    except (KeyError, TypeError, ValueError) as exc:
        raise InputError(f"{where}: attrs.grid_json cannot be rebuilt into a grid ({type(exc).__name__}: {exc})") from None
    recorded = rebuild_spec(ds, path)
    n = len(grid.dimers())
    if len(recorded.points) != n:
        raise InputError(f"{where}: its spec has {len(recorded.points)} points but its grid recipe {n}")
    data = recorded.to_dict()
    data["coordinate"] = Frames(list(grid.dimers()), values=list(range(n))).to_dict()
    data["dimer"] = grid.dimer.to_dict()
    return ScanSpec.from_dict(data)


def _named(rows, labels: list[str]) -> list[Deviation]:
    """Rows with flat point numbers replaced by the grid points they are."""
    out = []
    for row in rows:
        where = _FLAT_LABEL.sub(lambda m: labels[int(m.group(1))], row.where)
        if row.variable == FLAT_DIM:   # the check that the points are the same
            row = dataclasses.replace(row, variable="point", units="1", tolerance_reason="grid points of the recipe")
        out.append(dataclasses.replace(row, where=where))
    return out


def verify_grid(ds_or_path, sample: int = 3, seed: int = 0, executor="processes", workers: int | None = None,
                progress=True, log: Callable[[str], None] | None = None) -> GridDeviationTable:
    """Recompute sampled points of a saved orientation grid from scratch and compare.

    Parameters
    ----------
    ds_or_path : xarray.Dataset or path-like
        The saved grid (:func:`interkit.save_grid`).
    sample : int
        Number of grid points to recompute; more than the grid has recomputes all.
    seed : int
        Seed of the point sampling (:func:`interkit.share.replay.sample_points`, over the
        flat point numbers).
    executor, workers, progress
        As for :func:`interkit.run_scan`.
    log : callable, optional
        Receives one-line messages (the points chosen, the store keys), e.g. ``print``.

    Returns
    -------
    GridDeviationTable
        One row per variable: largest absolute deviation and its tolerance in the
        variable's units (kcal/mol for energies, hartree for totals, angstrom for
        geometries); ``where`` names the grid point, e.g. ``point 3 (angle = 20 degree,
        distance = 3.2 angstrom)``.
    """
    from ..run.plan import plan_scan
    from ..run.scan import run_scan

    saved, path = _load(ds_or_path)
    spec = recipe_spec(saved, path)
    labels = cell_labels(saved)
    indices = sample_points(len(spec.points), sample, seed)
    sub = subset_spec(spec, indices)
    if log is not None:
        log(f"verifying {len(indices)} of {len(labels)} grid points (seed {seed}), recomputed from scratch: "
            + "; ".join(labels[i] for i in indices))
    fresh = run_scan(sub, executor=executor, cache=None, progress=progress, workers=workers)
    flat = flat_view(saved)
    table = GridDeviationTable(_named(compare_datasets(flat, fresh, indices), labels), "verify", indices,
                               key_agreement(flat, plan_scan(sub, check=False), indices),
                               str(saved.attrs.get("pyscf_version", "")), fresh, [labels[i] for i in indices])
    if log is not None:
        log(table.key_line())
    return table


def rerun_grid(ds_or_path, cache: str | os.PathLike | None = None, executor="processes",
               workers: int | None = None, progress=True,
               log: Callable[[str], None] | None = None) -> tuple[xr.Dataset, GridDeviationTable]:
    """Recompute every point of a saved orientation grid from its recipe and compare.

    Parameters
    ----------
    ds_or_path : xarray.Dataset or path-like
        The saved grid.
    cache : path-like, optional
        Result store; calculations found there are reused, not recomputed.
    executor, workers, progress
        As for :func:`interkit.run_scan`.
    log : callable, optional
        Receives one-line messages (calculations computed and reused, store keys).

    Returns
    -------
    (xarray.Dataset, GridDeviationTable)
        The new grid Dataset (same axes; energies in kcal/mol) and one row per variable
        against the saved one, in the variable's units.
    """
    from ..run.plan import plan_scan
    from ..run.scan import run_scan

    saved, path = _load(ds_or_path)
    spec = recipe_spec(saved, path)
    fresh = run_scan(spec, executor=executor, cache=cache, progress=progress, workers=workers)
    if log is not None:
        log(f"rerun of {path or 'the grid'}: {fresh.attrs.get('calculations_from_store', 0)} calculations from "
            f"the store, {fresh.attrs.get('calculations_computed', 0)} computed")
    labels = cell_labels(saved)
    flat = flat_view(saved)
    n = len(labels)
    table = GridDeviationTable(_named(compare_datasets(flat, fresh), labels), "rerun", np.arange(n),
                               key_agreement(flat, plan_scan(spec, check=False)),
                               str(saved.attrs.get("pyscf_version", "")), fresh, labels)
    if log is not None:
        log(table.key_line())
    return grid_dataset(fresh, grid_of(saved)), table
