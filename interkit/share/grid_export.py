"""Exports of an orientation-grid Dataset: a tidy CSV table and JSON with QCSchema molecules.

Tidy CSV (:func:`grid_tidy_rows`): one row per value of every per-point variable, with
the columns ``level``, [``dispersion``,] one column per grid axis named by the axis and
its unit (``angle_degree``, ``distance_angstrom``, ``offset_angstrom``; an orientation
number has none: ``orientation``), ``point`` (the flat point number), ``variable``,
``value``, ``unit``, ``status``. Failed points have an empty value and ``failed`` as
status.

JSON (:func:`grid_document`): ``"schema_name": "interkit_grid_export"``, with the units,
the provenance, the grid recipe, the axes with their values and units, every variable
with its dimensions, and one entry per grid point: its axis values (and the quaternion of
a sampled orientation), the dimer as a QCSchema molecule (geometry in bohr) and the
counterpoise calculations as the same molecule with ``real`` marking the ghost atoms.
NaN is written as ``null``.
"""

from __future__ import annotations

import csv
import json
import os

import numpy as np
import xarray as xr

from ..data.columns import column_name
from ..data.grid import check_grid, grid_of, open_grid
from ..errors import InputError
from ..units import CODATA_EDITION
from .export import (
    GHOSTED_ROLES,
    RUN_VARIABLES,
    _check_folder,
    _json_attr,
    _json_value,
    qcschema_molecule,
    resolve_force_unit,
    tidy_cells,
)

GRID_EXPORT_SCHEMA_NAME = "interkit_grid_export"
GRID_EXPORT_SCHEMA_VERSION = 1
GRID_FORMATS = ("csv", "json")


def axis_column(ds: xr.Dataset, name: str) -> str:
    """CSV column of grid axis ``name``: the name with its unit suffix (``angle_degree``)."""
    return column_name(name, str(ds[name].attrs.get("units", "1")))


def grid_tidy_variables(ds: xr.Dataset) -> list[str]:
    """Numeric variables with one value per grid point (dims: level, dispersion, the axes)."""
    names = grid_of(ds).names
    out = []
    for name, var in ds.data_vars.items():
        if name in RUN_VARIABLES or name == "point" or var.dtype.kind not in "fiu":
            continue
        if set(names) <= set(var.dims) <= set(names) | {"level", "dispersion"}:
            out.append(str(name))
    return out


def grid_tidy_rows(ds: xr.Dataset, unit: str = "kcal/mol",
                   force_unit: str | None = None) -> tuple[list[str], list[list[str]]]:
    """Header and rows of the grid's tidy table (strings; missing values are empty).

    Parameters
    ----------
    ds : xarray.Dataset
        An orientation-grid Dataset.
    unit : str
        Unit of the energies (variables in kcal/mol are converted; others keep theirs).
    force_unit : str, optional
        Unit of the forces; default: the one matching ``unit``.
    """
    check_grid(ds)
    force_unit = resolve_force_unit(unit, force_unit)
    names = grid_of(ds).names
    header = (["level"] + (["dispersion"] if "dispersion" in ds.dims else []) + [axis_column(ds, n) for n in names]
              + ["point", "variable", "value", "unit", "status"])
    axis_values = {n: np.asarray(ds[n].values) for n in names}
    point = ds["point"]
    rows = []
    for cell in tidy_cells(ds, grid_tidy_variables(ds), unit, force_unit):
        flat = int(point.values[tuple(cell.labels[d] for d in point.dims)])
        rows.append(cell.lead + [f"{float(axis_values[n][cell.labels[n]]):.10g}" for n in names]
                    + [str(flat), cell.name] + cell.tail)
    return header, rows


def grid_document(ds: xr.Dataset) -> dict:
    """The JSON export of a grid as a plain dict (see the module docstring)."""
    from .provenance import provenance_summary

    grid = grid_of(ds)
    names = grid.names
    symbols = [str(s) for s in ds["symbol"].values]
    frag = np.asarray(ds["fragment"].values).astype(str)
    fragment_a = [i for i, f in enumerate(frag) if f == "A"]
    charges = json.loads(ds.attrs.get("charges", "[0, 0]"))
    mults = json.loads(ds.attrs.get("multiplicities", "[1, 1]"))
    roles = [str(x) for x in ds["role"].values] if "role" in ds.coords else []
    coords = ds["coordinates"].transpose(*names, "atom", "xyz").values
    points = []
    for p, idx in enumerate(np.ndindex(*grid.shape)):
        where = {n: _json_value(ds[n].values[k]) for n, k in zip(names, idx)}
        text = ", ".join(f"{n} = {v:g}" + (f" {ds[n].attrs.get('units')}" if ds[n].attrs.get("units") != "1" else "")
                         for n, v in where.items())
        xyz = coords[idx]
        entry = {"index": p, "axes": where,
                 "molecule": qcschema_molecule(symbols, xyz, fragment_a, charges, mults, name=f"dimer at {text}",
                                               dimer_multiplicity=ds.attrs.get("dimer_multiplicity"))}
        for n, k in zip(names, idx):
            if "quaternion" in ds.variables and ds["quaternion"].dims[0] == n:
                entry["quaternion_xyzw"] = _json_value(np.asarray(ds["quaternion"].values[k]))
        cp = {}
        for role, keep in GHOSTED_ROLES.items():
            if role in roles:
                real = [f == keep for f in frag]
                cp[role] = qcschema_molecule(symbols, xyz, fragment_a, charges, mults, real=real,
                                             name=f"{keep} in the dimer basis at {text}")
        if cp:
            entry["counterpoise_molecules"] = cp
        points.append(entry)
    variables = {}
    for name, var in ds.data_vars.items():
        if name in ("coordinates", "symbol", "fragment"):
            continue
        variables[str(name)] = {"dims": list(var.dims), "units": str(var.attrs.get("units", "")),
                                "long_name": str(var.attrs.get("long_name", "")),
                                "values": _json_value(np.asarray(var.values))}
    prov = provenance_summary(ds)
    prov["attrs"] = {k: _json_attr(v) for k, v in sorted(ds.attrs.items())
                     if k not in ("spec_json", "spec_toml", "grid_json")}
    return {
        "schema_name": GRID_EXPORT_SCHEMA_NAME,
        "schema_version": GRID_EXPORT_SCHEMA_VERSION,
        "title": str(ds.attrs.get("title", "")),
        "units": {"energy": "kcal/mol", "total_energy": "hartree", "force": "kcal/mol/angstrom",
                  "molecule_geometry": f"bohr ({CODATA_EDITION} bohr radius)",
                  "note": "each axis and variable also states its own units"},
        "sign_conventions": {"interaction_energy": "negative = bound"},
        "caution": str(ds.attrs.get("caution", "")),
        "provenance": prov,
        "grid": json.loads(ds.attrs["grid_json"]),
        "axes": [{"name": n, "units": str(ds[n].attrs.get("units", "")),
                  "long_name": str(ds[n].attrs.get("long_name", "")),
                  "values": _json_value(np.asarray(ds[n].values))} for n in names],
        "dims": {str(d): _json_value(np.asarray(ds[d].values)) for d in ds.dims if d in ds.coords},
        "points": points,
        "variables": variables,
    }


def export_grid(ds, path: str | os.PathLike, fmt: str | None = None, unit: str = "kcal/mol",
                force_unit: str | None = None) -> str:
    """Write an orientation grid as a tidy CSV table or JSON with QCSchema molecules.

    Parameters
    ----------
    ds : xarray.Dataset or path-like
        A grid Dataset, or the ``.nc`` file written by :func:`interkit.save_grid`.
    path : path-like
        File to write (``.csv`` or ``.json``); its folder must exist.
    fmt : {'csv', 'json'}, optional
        Default: from the suffix of ``path``.
    unit, force_unit : str
        Energy and force units of the CSV (the JSON keeps kcal/mol and kcal/mol/angstrom
        and states every variable's units).

    Returns
    -------
    str
        The path written.
    """
    from ..fileio import atomic_write_text

    path = os.fspath(path)
    kind = fmt if fmt is not None else os.path.splitext(path)[1].lower().lstrip(".")
    if kind not in GRID_FORMATS:
        raise InputError(f"{'fmt' if fmt is not None else 'path'}: {fmt if fmt is not None else path!r} is not "
                         "an export of an orientation grid (csv or json)")
    _check_folder(path)
    if not isinstance(ds, xr.Dataset):
        ds = open_grid(ds)
    check_grid(ds)
    if kind == "csv":
        header, rows = grid_tidy_rows(ds, unit, force_unit)
        import io

        buf = io.StringIO(newline="")
        out = csv.writer(buf)
        out.writerow(header)
        out.writerows(rows)
        return atomic_write_text(path, buf.getvalue())
    if unit != "kcal/mol" or force_unit not in (None, "kcal/mol/angstrom"):
        raise InputError(f"unit: the JSON export keeps kcal/mol and kcal/mol/angstrom (each variable states its "
                         f"units), not {unit if unit != 'kcal/mol' else force_unit!r}")
    return atomic_write_text(path, json.dumps(grid_document(ds), indent=1, allow_nan=False))
