"""run_orientation_scan: an orientation grid run as a scan of explicit frames, reshaped."""

from __future__ import annotations

import os
import threading

import xarray as xr

from ..data.grid import grid_dataset
from ..errors import InputError
from ..model.orientation import OrientationGrid
from .scan import ProgressCallback, run_scan
from .store import DEFAULT_STORE


def run_orientation_scan(
    grid: OrientationGrid,
    executor: str = "processes",
    cache: str | os.PathLike | None = DEFAULT_STORE,
    progress: bool | ProgressCallback = True,
    workers: int | None = None,
    cancel: threading.Event | None = None,
    **spec_options,
) -> xr.Dataset:
    """Compute interaction energies at every point of an orientation grid.

    The grid's geometries run through :func:`~interkit.run.scan.run_scan` as explicit
    frames (the same plan, store, executors and feasibility checks as any scan; the
    monomers in their own basis run once per distinct orientation, their calculations
    being centred), then the flat Dataset is reshaped onto the axes (see
    :mod:`interkit.data.grid`).

    Parameters
    ----------
    grid : OrientationGrid
        The starting dimer and one or two axes.
    executor, cache, progress, workers, cancel
        As for :func:`~interkit.run.scan.run_scan`.
    **spec_options
        ScanSpec fields: ``levels``, ``counterpoise``, ``forces``,
        ``scf_threshold_hartree``, ``dispersion``, ``name``, ... (not ``dimer``,
        ``coordinate``, ``distances`` or ``factors``).

    Returns
    -------
    xarray.Dataset
        Dimensions ``(level, <axis 1>[, <axis 2>])``; energies in kcal/mol, angles in
        degree, distances and offsets in angstrom.
    """
    if not isinstance(grid, OrientationGrid):
        raise InputError(f"grid: expected an interkit.OrientationGrid, got {type(grid).__name__}")
    spec = grid.scan_spec(**spec_options)
    flat = run_scan(spec, executor=executor, cache=cache, progress=progress, workers=workers, cancel=cancel)
    return grid_dataset(flat, grid)
