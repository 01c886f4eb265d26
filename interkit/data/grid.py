"""The orientation-grid Dataset: a flat scan of explicit frames reshaped onto its axes.

An orientation scan runs as an ordinary scan of explicit geometries (one frame per grid
point, see :meth:`interkit.model.orientation.OrientationGrid.scan_spec`); this module
turns that flat Dataset (dimension ``distance`` holding the flat point index) into one
with a dimension per grid axis: ``(level, angle)``, ``(level, angle, distance)``,
``(level, distance, orientation)``, ... Every variable of the flat Dataset is kept, with
the flat dimension replaced by the axes (``e_int``, ``e_int_nocp``, ``bsse``, ``status``,
``coordinates``, forces and torques when computed, ...); ``point`` holds the flat index
of every cell. Axis values carry their units (``degree``, ``angstrom``; ``1`` for
orientation numbers). Attributes: those of the flat scan (``spec_json`` of the flat
run, versions, ...) plus ``grid_json`` (the grid recipe, :meth:`OrientationGrid.to_dict`)
and ``schema`` = :data:`GRID_SCHEMA`.
"""

from __future__ import annotations

import json
import os

import numpy as np
import xarray as xr

from ..errors import InputError
from ..model.orientation import OrientationGrid

GRID_SCHEMA = "interkit-orientation-grid/1"
FLAT_DIM = "distance"   # the flat scan's point dimension (its values: flat point numbers)


def grid_dataset(flat: xr.Dataset, grid: OrientationGrid) -> xr.Dataset:
    """Reshape the flat scan ``flat`` of ``grid.scan_spec(...)`` onto the grid's axes."""
    n = int(np.prod(grid.shape))
    if flat.sizes.get(FLAT_DIM) != n or not np.array_equal(flat[FLAT_DIM].values, np.arange(n)):
        raise InputError(f"dataset: the flat scan has {flat.sizes.get(FLAT_DIM)} points, the grid {n}")
    names, shape = grid.names, grid.shape
    data_vars = {}
    for name, var in flat.data_vars.items():
        data_vars[name] = _reshaped(var, names, shape)
    coords = {}
    for name, var in flat.coords.items():
        if name in (FLAT_DIM, "factor"):
            continue
        coords[name] = var
    for ax in grid.axes:
        coords[ax.name] = (ax.name, np.array(ax.values), {"units": ax.units, "long_name": ax.describe()})
        for extra, (dims, values, attrs) in ax.extra_coordinates().items():
            data_vars[extra] = (dims, values, attrs)
    if any("quaternion_component" in v[0] for v in data_vars.values() if isinstance(v, tuple)):
        coords["quaternion_component"] = ("quaternion_component", np.array(["x", "y", "z", "w"]))
    data_vars["point"] = (names, np.arange(n).reshape(shape),
                          {"units": "1", "long_name": "flat point number (the frame number of the flat scan)"})
    attrs = dict(flat.attrs)
    attrs.update({"schema": GRID_SCHEMA, "flat_schema": flat.attrs.get("schema", ""),
                  "grid_json": json.dumps(grid.to_dict(), sort_keys=True),
                  "grid_axes": " x ".join(names),
                  "title": f"orientation scan: {grid.dimer.name} ({grid.describe()})",
                  "grid_order": "point (i, j) = second axis at j applied to (first axis at i applied to the dimer)"})
    attrs.pop("spec_toml", None)   # the frames' TOML repeats spec_json at length
    return xr.Dataset(data_vars=data_vars, coords=coords, attrs=attrs)


def _reshaped(var: xr.DataArray, names: tuple[str, ...], shape: tuple[int, ...]):
    if FLAT_DIM not in var.dims:
        return var.variable
    k = var.dims.index(FLAT_DIM)
    dims = var.dims[:k] + names + var.dims[k + 1:]
    values = var.values.reshape(var.shape[:k] + shape + var.shape[k + 1:])
    return (dims, values, dict(var.attrs))


def grid_of(ds: xr.Dataset) -> OrientationGrid:
    """The OrientationGrid stored in a grid Dataset."""
    check_grid(ds)
    return OrientationGrid.from_dict(json.loads(ds.attrs["grid_json"]))


def check_grid(ds: xr.Dataset) -> None:
    """Raise InputError unless ``ds`` is an orientation-grid Dataset."""
    if not isinstance(ds, xr.Dataset):
        raise InputError(f"dataset: expected an xarray.Dataset, got {type(ds).__name__}")
    if ds.attrs.get("schema") != GRID_SCHEMA:
        raise InputError(f"dataset attrs.schema: {ds.attrs.get('schema')!r} is not {GRID_SCHEMA!r} "
                         "(an orientation-grid Dataset)")
    try:
        recipe = json.loads(ds.attrs["grid_json"])
        names = tuple(a["name"] for a in recipe["axes"])
    except (KeyError, ValueError, TypeError):
        raise InputError("dataset attrs.grid_json: missing or not a grid recipe") from None
    for name in ("e_int", "e_int_nocp", "bsse", "status", "coordinates", "point"):
        if name not in ds.variables:
            raise InputError(f"dataset: variable {name!r} is missing")
    for name in ("e_int", "e_int_nocp", "bsse"):
        if ds[name].attrs.get("units") != "kcal/mol":
            raise InputError(f"dataset variable {name}: units {ds[name].attrs.get('units')!r} is not 'kcal/mol'")
        if ds[name].dims[-len(names):] != names:
            raise InputError(f"dataset variable {name}: dimensions {ds[name].dims} do not end with {names}")
    if ds["coordinates"].dims != names + ("atom", "xyz"):
        raise InputError(f"dataset variable coordinates: dimensions {ds['coordinates'].dims} are wrong")
    for name in names:
        if "units" not in ds[name].attrs:
            raise InputError(f"dataset coordinate {name}: no units")


def save_grid(ds: xr.Dataset, path: str | os.PathLike) -> None:
    """Write an orientation-grid Dataset to netCDF-4 (temporary file, then rename)."""
    check_grid(ds)
    from .netcdf import write_netcdf

    write_netcdf(ds, path)


def open_grid(path: str | os.PathLike) -> xr.Dataset:
    """Read an orientation-grid Dataset written by :func:`save_grid` (loaded, file closed)."""
    from .netcdf import read_netcdf

    ds = read_netcdf(path, "grid")
    check_grid(ds)
    return ds


def cell_dimer(ds: xr.Dataset, **where):
    """The geometry (Dimer) of one grid cell, chosen by axis value, e.g.
    ``cell_dimer(ds, angle=30.0, distance=2.9)`` (exact values of the axes)."""
    check_grid(ds)
    recipe_names = tuple(a["name"] for a in json.loads(ds.attrs["grid_json"])["axes"])
    if set(where) != set(recipe_names):
        raise InputError(f"cell: give a value for each of {', '.join(recipe_names)} (got {', '.join(where) or 'none'})")
    index = {}
    for name, value in where.items():
        values = ds[name].values
        hits = np.flatnonzero(np.isclose(values, float(value), rtol=0, atol=1e-9))
        if not hits.size:
            raise InputError(f"cell {name}: {value!r} is not one of the grid's values {values.tolist()}")
        index[name] = int(hits[0])
    from .schema import spec_of

    dimer = spec_of(ds).dimer
    coords = ds["coordinates"].isel(index).values
    return dimer.with_coordinates(coords)


def flat_view(ds: xr.Dataset) -> xr.Dataset:
    """The grid Dataset as the flat scan it was computed as (inverse of :func:`grid_dataset`).

    The axes are replaced by one dimension ``distance`` holding the flat point number
    (``p = i * n2 + j``, units ``1``); variables the grid adds (``point``, an axis's extra
    variables such as the quaternions of an orientation sample) are left out, so the
    result lines up with a recomputation of the flat scan (:func:`interkit.verify_grid`).
    """
    grid = grid_of(ds)
    names, shape = grid.names, grid.shape
    n = int(np.prod(shape))
    grid_only = {"point"} | {k for ax in grid.axes for k in ax.extra_coordinates()}
    data_vars = {}
    for name, var in ds.data_vars.items():
        if name in grid_only:
            continue
        if not set(names) & set(var.dims):
            data_vars[name] = var.variable
            continue
        k = var.dims.index(names[0])
        if var.dims[k:k + len(names)] != names:
            raise InputError(f"dataset variable {name}: dimensions {var.dims} do not hold the axes {names} in order")
        dims = var.dims[:k] + (FLAT_DIM,) + var.dims[k + len(names):]
        values = var.values.reshape(var.shape[:k] + (n,) + var.shape[k + len(names):])
        data_vars[name] = (dims, values, dict(var.attrs))
    coords = {name: var.variable for name, var in ds.coords.items()
              if not set(var.dims) & set(names) and name != "quaternion_component"}
    coords[FLAT_DIM] = (FLAT_DIM, np.arange(n, dtype=float), {"units": "1", "long_name": "flat point number"})
    attrs = dict(ds.attrs)
    attrs["schema"] = str(ds.attrs.get("flat_schema", ""))
    return xr.Dataset(data_vars=data_vars, coords=coords, attrs=attrs)


def cell_labels(ds: xr.Dataset) -> list[str]:
    """Text naming every grid point in flat order, e.g. ``'point 4 (angle = 20 degree,
    distance = 3.2 angstrom)'``."""
    grid = grid_of(ds)
    out = []
    for p, idx in enumerate(np.ndindex(*grid.shape)):
        parts = [f"{ax.name} = {ax.values[k]:g}" + (f" {ax.units}" if ax.units != "1" else "")
                 for ax, k in zip(grid.axes, idx)]
        out.append(f"point {p} ({', '.join(parts)})")
    return out


def file_schema(path: str | os.PathLike) -> str | None:
    """The ``schema`` attribute of a netCDF file (None when it has none or cannot be read,
    so that the reader of the expected kind reports the problem)."""
    path = os.fspath(path)
    if not os.path.isfile(path):
        return None
    try:
        with xr.open_dataset(path, engine="h5netcdf") as handle:
            schema = handle.attrs.get("schema")
    except (OSError, ValueError):
        return None
    return str(schema) if schema is not None else None


def is_grid_file(path: str | os.PathLike) -> bool:
    """True when ``path`` is a netCDF file of an orientation grid (:data:`GRID_SCHEMA`)."""
    return file_schema(path) == GRID_SCHEMA
