"""Minima of orientation-grid Datasets: the grid minimum and the minimum-energy path."""

from __future__ import annotations

import json

import numpy as np
import xarray as xr

from ..data.grid import check_grid
from ..errors import InputError


def grid_energies(ds: xr.Dataset, level: str | None = None, variable: str = "e_int",
                  dispersion: str | None = None) -> xr.DataArray:
    """``variable`` (kcal/mol) of one level on the grid axes only (NaN: failed points).

    ``level`` may be omitted when the Dataset has one level; ``dispersion`` names the
    scheme when the Dataset compares several.
    """
    check_grid(ds)
    if variable not in ("e_int", "e_int_nocp", "bsse"):
        raise InputError(f"variable: {variable!r} is not one of e_int, e_int_nocp, bsse")
    levels = [str(x) for x in ds["level"].values]
    if level is None:
        if len(levels) != 1:
            raise InputError(f"level: the Dataset has {len(levels)} levels ({', '.join(levels)}); name one")
        level = levels[0]
    if level not in levels:
        raise InputError(f"level: {level!r} is not one of {', '.join(levels)}")
    e = ds[variable].sel(level=level)
    if "dispersion" in e.dims:
        schemes = [str(x) for x in ds["dispersion"].values]
        if dispersion not in schemes:
            raise InputError(f"dispersion: {dispersion!r} is not one of {', '.join(schemes)}; name the scheme")
        e = e.sel(dispersion=dispersion)
    return e


def axis_names(ds: xr.Dataset) -> tuple[str, ...]:
    """Dimension names of the grid axes, in grid order."""
    check_grid(ds)
    return tuple(a["name"] for a in json.loads(ds.attrs["grid_json"])["axes"])


def grid_minimum(ds: xr.Dataset, level: str | None = None, variable: str = "e_int",
                 dispersion: str | None = None) -> dict:
    """The lowest computed point of the grid: ``{axis name: value, ...,
    'energy_kcal_per_mol': value, 'point': flat number}`` (the grid point itself, not an
    interpolated minimum). Raises InputError when no point has a number."""
    e = grid_energies(ds, level, variable, dispersion)
    values = e.values
    if not np.isfinite(values).any():
        raise InputError(f"{variable}: no point of the grid has a number (all failed)")
    idx = np.unravel_index(int(np.nanargmin(values)), values.shape)
    out = {name: float(ds[name].values[k]) for name, k in zip(e.dims, idx)}
    out["energy_kcal_per_mol"] = float(values[idx])
    out["point"] = int(ds["point"].values[idx])
    return out


def minimum_energy_path(ds: xr.Dataset, level: str | None = None, variable: str = "e_int",
                        dispersion: str | None = None) -> xr.Dataset:
    """For each value of the first axis, the minimum over the second.

    Returns a Dataset along the first axis with ``energy`` (kcal/mol) and
    ``<second axis>_at_minimum`` (its units); NaN where no point of that row has a number.
    """
    names = axis_names(ds)
    if len(names) != 2:
        raise InputError(f"grid: the minimum-energy path needs two axes, the Dataset has {len(names)}")
    e = grid_energies(ds, level, variable, dispersion).transpose(*names).values
    first, second = ds[names[0]].values, ds[names[1]].values
    at = np.full(len(first), np.nan)
    low = np.full(len(first), np.nan)
    for i, row in enumerate(e):
        if np.isfinite(row).any():
            j = int(np.nanargmin(row))
            at[i], low[i] = float(second[j]), float(row[j])
    return xr.Dataset(
        {"energy": (names[0], low, {"units": "kcal/mol", "long_name": f"lowest {variable} over {names[1]}"}),
         f"{names[1]}_at_minimum": (names[0], at, {"units": ds[names[1]].attrs.get("units", ""),
                                                   "long_name": f"{names[1]} of the lowest point"})},
        coords={names[0]: (names[0], first, dict(ds[names[0]].attrs))})
