"""Exports of a scan Dataset: a tidy CSV table and a JSON document with QCSchema molecules.

Tidy CSV (:func:`tidy_rows`, :func:`write_tidy_csv`): one row per value of every
per-point variable, with the columns ``level``, [``dispersion``,] ``distance_angstrom``,
``factor``, ``variable``, ``value``, ``unit``, ``status``. Variables without a level
dimension (the SAPT0 terms) leave ``level`` empty; (level, scheme) pairs that do not
exist (a dispersion scheme on a non-DFT level) have no rows, and a scheme without
parameters for a functional has empty values with the reason as status. Per-atom arrays (forces) and
per-calculation totals stay in the netCDF file and the JSON export. Column names follow
the convention of :mod:`interkit.data.columns`; the table reads back as a reference
curve (:func:`interkit.analysis.comparison.reference_from_csv`).

Geometries: ``.xyz`` (multi-frame XYZ) and ``.extxyz`` (extended XYZ with the
interaction energy in eV and forces in eV/angstrom of one curve), see
:mod:`interkit.share.trajectory`.

JSON (:func:`scan_document`, :func:`write_json`): a document of our own,
``"schema_name": "interkit_scan_export"``, holding the units, the provenance, every
variable with its dimensions, and one molecule per scan point in the QCSchema molecule
layout (geometry in bohr, converted with CODATA 2018), with the counterpoise
calculations of the point as the same molecule with ``real`` marking the ghost atoms.
NaN is written as ``null`` (standard JSON has no NaN).
"""

from __future__ import annotations

import csv
import json
import math
import os
from dataclasses import dataclass

import numpy as np
import xarray as xr

from ..errors import InputError
from ..fileio import existing_folder
from ..units import (
    ANGSTROM_TO_BOHR,
    CODATA_EDITION,
    ENERGY_UNITS,
    FORCE_UNITS,
    MATCHING_FORCE_UNIT,
    convert_energy,
    convert_force,
)

EXPORT_SCHEMA_NAME = "interkit_scan_export"
EXPORT_SCHEMA_VERSION = 1
#: variables that describe a run rather than its results (left out of the tidy table)
RUN_VARIABLES = frozenset({"wall_time_s", "sapt_wall_time_s"})
#: per-point dimensions of the tidy table, in column order
POINT_DIMS = ("level", "dispersion", "distance")
FORMATS = ("csv", "json", "xyz", "extxyz")   # xyz/extxyz: interkit.share.trajectory


def _check_folder(path: str) -> None:
    existing_folder(path, "export")


def _check_unit(unit: str) -> None:
    if unit not in ENERGY_UNITS:
        raise InputError(f"unit: {unit!r} is not one of {', '.join(ENERGY_UNITS)}")


def tidy_variables(ds: xr.Dataset) -> list[str]:
    """Numeric variables with one value per point (dims within level, dispersion, distance)."""
    out = []
    for name, var in ds.data_vars.items():
        if name in RUN_VARIABLES or "distance" not in var.dims or var.dtype.kind not in "fiu":
            continue
        if set(var.dims) <= set(POINT_DIMS):
            out.append(str(name))
    return out


def _status_of(ds: xr.Dataset, name: str) -> xr.DataArray | None:
    """The status variable that applies to ``name`` (``sapt_status`` for the SAPT0 terms)."""
    from ..data.sapt0 import ENERGY_NAMES

    var = ds[name]
    candidates = ["sapt_status"] if name in ENERGY_NAMES else ["status"]
    for cand in candidates:
        if cand in ds.variables and set(ds[cand].dims) <= set(var.dims):
            return ds[cand].broadcast_like(var).transpose(*var.dims)
    return None


def _pair_status(ds: xr.Dataset, var: xr.DataArray) -> np.ndarray | None:
    """``dispersion_status`` as a (level, dispersion) array of str, for variables with both dims."""
    if "dispersion_status" not in ds.variables or not {"level", "dispersion"} <= set(var.dims):
        return None
    return np.asarray(ds["dispersion_status"].transpose("level", "dispersion").values).astype(str)


def resolve_force_unit(unit: str, force_unit: str | None) -> str:
    """Check ``unit`` and return ``force_unit``, by default the one matching ``unit``."""
    _check_unit(unit)
    force_unit = force_unit or MATCHING_FORCE_UNIT.get(unit, "kcal/mol/angstrom")
    if force_unit not in FORCE_UNITS:
        raise InputError(f"force_unit: {force_unit!r} is not one of {', '.join(FORCE_UNITS)}")
    return force_unit


@dataclass
class TidyCell:
    """One value of a tidy table: ``lead`` the level [and dispersion] columns, ``tail``
    the value, unit and status columns (strings), ``labels`` its index per dimension."""

    name: str
    labels: dict
    lead: list
    tail: list


def tidy_cells(ds: xr.Dataset, variables, unit: str, force_unit: str):
    """Every value of ``variables`` as a :class:`TidyCell`, energies in ``unit`` and forces
    in ``force_unit``; level-scheme pairs that do not exist (HF with a DFT scheme) are left out."""
    has_disp = "dispersion" in ds.dims
    for name in variables:
        var = ds[name]
        units = str(var.attrs.get("units", ""))
        values = np.asarray(var.values, dtype=float)
        if units == "kcal/mol":
            values, units = convert_energy(values, "kcal/mol", unit), unit
        elif units in FORCE_UNITS:
            values, units = convert_force(values, units, force_unit), force_unit
        status = _status_of(ds, name)
        status_values = np.asarray(status.values).astype(str) if status is not None else None
        pair = _pair_status(ds, var)
        for pos in np.ndindex(values.shape):
            labels = dict(zip(var.dims, pos))
            note = pair[labels["level"], labels["dispersion"]] if pair is not None else "ok"
            if note.startswith("not applicable"):
                continue
            lead = [str(ds["level"].values[labels["level"]]) if "level" in labels else ""]
            if has_disp:
                lead.append(str(ds["dispersion"].values[labels["dispersion"]]) if "dispersion" in labels else "")
            v = values[pos]
            yield TidyCell(name, labels, lead, [
                f"{v:.10g}" if np.isfinite(v) else "", units,
                note if note != "ok" else str(status_values[pos]) if status_values is not None else ""])


def tidy_rows(ds: xr.Dataset, unit: str = "kcal/mol",
              force_unit: str | None = None) -> tuple[list[str], list[list[str]]]:
    """Header and rows of the tidy table (strings; missing values are empty).

    Parameters
    ----------
    ds : xarray.Dataset
        A scan Dataset.
    unit : str
        Unit of the energies (variables in kcal/mol are converted; others keep theirs).
    force_unit : str, optional
        Unit of the forces (variables in kcal/mol/angstrom are converted); default: the
        one matching ``unit`` (:data:`interkit.units.MATCHING_FORCE_UNIT`).
    """
    force_unit = resolve_force_unit(unit, force_unit)
    header = ["level"] + (["dispersion"] if "dispersion" in ds.dims else []) + [
        "distance_angstrom", "factor", "variable", "value", "unit", "status"]
    r = np.asarray(ds["distance"].values, dtype=float)
    factor = np.asarray(ds["factor"].values, dtype=float) if "factor" in ds.coords else np.full_like(r, np.nan)
    rows = []
    for cell in tidy_cells(ds, tidy_variables(ds), unit, force_unit):
        i = cell.labels["distance"]
        rows.append(cell.lead + [f"{r[i]:.6f}", f"{factor[i]:.6f}" if np.isfinite(factor[i]) else "",
                                 cell.name] + cell.tail)
    return header, rows


def write_tidy_csv(ds: xr.Dataset, path: str | os.PathLike, unit: str = "kcal/mol",
                   force_unit: str | None = None) -> str:
    """Write the tidy table of :func:`tidy_rows` to ``path``; return the path."""
    path = os.fspath(path)
    _check_folder(path)
    header, rows = tidy_rows(ds, unit, force_unit)
    with open(path, "w", newline="", encoding="utf-8") as fh:
        out = csv.writer(fh)
        out.writerow(header)
        out.writerows(rows)
    return path


# ---------------------------------------------------------------------- QCSchema molecules
def qcschema_molecule(symbols, coordinates_angstrom, fragment_a, charges, multiplicities,
                      real=None, name: str = "", dimer_multiplicity: int | None = None) -> dict:
    """One molecule in the QCSchema molecule layout.

    Field names as recalled from memory of the MolSSI QCSchema molecule specification
    (schema_version 2): ``symbols``, ``geometry`` (flat, bohr), ``molecular_charge``,
    ``molecular_multiplicity``, ``fragments`` (lists of 0-based atom indices),
    ``fragment_charges``, ``fragment_multiplicities``, ``real`` (False = ghost atom:
    basis functions, no nucleus or electrons), ``fix_com``, ``fix_orientation``, ``name``,
    ``provenance``. A one-off check during development: qcelemental 0.51.4 accepted these
    molecules (dimer, ghosted monomers, a charged and an open-shell case); qcelemental is
    not a dependency, so re-check when a consumer's validator is stricter.

    Parameters
    ----------
    symbols : sequence of str
    coordinates_angstrom : (natoms, 3) array
    fragment_a : sequence of int
        Atoms of fragment A; the others form B.
    charges, multiplicities : (int, int)
        Of fragments A and B.
    real : sequence of bool, optional
        Per atom; default all real.
    dimer_multiplicity : int, optional
        2S+1 of the whole dimer when both fragments are real; default high spin.
    """
    from ..version import __version__

    n = len(symbols)
    xyz = np.asarray(coordinates_angstrom, dtype=float).reshape(n, 3) * ANGSTROM_TO_BOHR
    a = sorted(int(i) for i in fragment_a)
    b = [i for i in range(n) if i not in set(a)]
    real_mask = [True] * n if real is None else [bool(x) for x in real]
    # charge and unpaired electrons of the real atoms only (a fully ghosted fragment
    # contributes nothing); high-spin coupling of the fragments unless the dimer's
    # multiplicity is given, as the calculations use
    frag_real = [any(real_mask[i] for i in f) for f in (a, b)]
    charge = sum(int(q) for q, on in zip(charges, frag_real) if on)
    unpaired = sum(int(m) - 1 for m, on in zip(multiplicities, frag_real) if on)
    mol = {
        "schema_name": "qcschema_molecule",
        "schema_version": 2,
        "symbols": [str(s) for s in symbols],
        "geometry": [float(x) for x in xyz.ravel()],
        "molecular_charge": float(charge),
        "molecular_multiplicity": int(dimer_multiplicity) if dimer_multiplicity and all(frag_real)
        else int(unpaired + 1),
        "fragments": [a, b],
        # a ghosted fragment has no electrons: charge 0, singlet
        "fragment_charges": [float(q) if on else 0.0 for q, on in zip(charges, frag_real)],
        "fragment_multiplicities": [int(m) if on else 1 for m, on in zip(multiplicities, frag_real)],
        "real": real_mask,
        "fix_com": True,
        "fix_orientation": True,
        "provenance": {"creator": "interkit", "version": __version__, "routine": "interkit.share.export"},
    }
    if name:
        mol["name"] = str(name)
    return mol


def _json_value(x):
    """Plain JSON value of a numpy scalar/array (NaN and infinities -> None)."""
    if isinstance(x, np.ndarray):
        return [_json_value(v) for v in x]
    if isinstance(x, (bool, np.bool_)):
        return bool(x)
    if isinstance(x, (int, np.integer)):
        return int(x)
    if isinstance(x, (float, np.floating)):
        return float(x) if math.isfinite(float(x)) else None
    return str(x)


def _json_attr(value):
    if hasattr(value, "item") and np.ndim(value) == 0:
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, np.ndarray):
        return _json_value(value)
    return value


#: counterpoise calculations exported as ghosted molecules: role -> real fragment
GHOSTED_ROLES = {"a_dimer_basis": "A", "b_dimer_basis": "B"}


def scan_document(ds: xr.Dataset) -> dict:
    """The JSON export of a scan as a plain dict (see the module docstring).

    Returns
    -------
    dict
        ``schema_name``, ``schema_version``, ``title``, ``units``, ``provenance``,
        ``caution``, ``dims`` (coordinate labels), ``points`` (per point: ``index``,
        ``distance``, ``factor``, ``molecule`` and ``counterpoise_molecules``) and
        ``variables`` (name -> ``dims``, ``units``, ``long_name``, ``values``).
    """
    from .provenance import provenance_summary

    symbols = [str(s) for s in ds["symbol"].values]
    frag = np.asarray(ds["fragment"].values).astype(str)
    fragment_a = [i for i, f in enumerate(frag) if f == "A"]
    charges = json.loads(ds.attrs.get("charges", "[0, 0]"))
    mults = json.loads(ds.attrs.get("multiplicities", "[1, 1]"))
    roles = [str(x) for x in ds["role"].values] if "role" in ds.coords else []
    points = []
    factor = ds["factor"].values if "factor" in ds.coords else [math.nan] * ds.sizes["distance"]
    for i, r in enumerate(ds["distance"].values):
        xyz = ds["coordinates"].values[i]
        entry = {
            "index": i,
            "distance": float(r),
            "factor": _json_value(factor[i]),
            "molecule": qcschema_molecule(symbols, xyz, fragment_a, charges, mults,
                                          name=f"dimer at {float(r):.4f} angstrom",
                                          dimer_multiplicity=ds.attrs.get("dimer_multiplicity")),
        }
        cp = {}
        for role, keep in GHOSTED_ROLES.items():
            if role in roles:
                real = [f == keep for f in frag]
                cp[role] = qcschema_molecule(symbols, xyz, fragment_a, charges, mults, real=real,
                                             name=f"{keep} in the dimer basis at {float(r):.4f} angstrom")
        if cp:
            entry["counterpoise_molecules"] = cp
        points.append(entry)
    variables = {}
    skip = {"coordinates", "symbol", "fragment"}   # carried by the molecules
    for name, var in ds.data_vars.items():
        if name in skip:
            continue
        variables[str(name)] = {
            "dims": list(var.dims),
            "units": str(var.attrs.get("units", "")),
            "long_name": str(var.attrs.get("long_name", "")),
            "values": _json_value(np.asarray(var.values)),
        }
    dims = {str(d): _json_value(np.asarray(ds[d].values)) for d in ds.dims if d in ds.coords}
    prov = provenance_summary(ds)
    prov["attrs"] = {k: _json_attr(v) for k, v in sorted(ds.attrs.items())
                     if k not in ("spec_json", "spec_toml")}   # the spec is in prov["spec"]
    return {
        "schema_name": EXPORT_SCHEMA_NAME,
        "schema_version": EXPORT_SCHEMA_VERSION,
        "title": str(ds.attrs.get("title", "")),
        "units": {
            "distance": "angstrom",
            "energy": "kcal/mol",
            "total_energy": "hartree",
            "force": "kcal/mol/angstrom",
            "molecule_geometry": f"bohr ({CODATA_EDITION} bohr radius)",
            "note": "each variable also states its own units",
        },
        "sign_conventions": {
            "interaction_energy": "negative = bound",
            "force_along": "positive = repulsive (pushes the fragments apart)",
        },
        "caution": str(ds.attrs.get("caution", "")),
        "provenance": prov,
        "dims": dims,
        "points": points,
        "variables": variables,
    }


def write_json(ds: xr.Dataset, path: str | os.PathLike) -> str:
    """Write :func:`scan_document` as JSON (standard JSON: no NaN); return the path."""
    path = os.fspath(path)
    _check_folder(path)
    text = json.dumps(scan_document(ds), indent=1, allow_nan=False)
    with open(path, "w", encoding="utf-8") as fh:
        fh.write(text)
    return path


def export_format(path: str, fmt: str | None = None, fields: tuple[str, str] = ("path", "fmt")) -> str:
    """The export format named by ``fmt`` or, if None, by the suffix of ``path``.

    ``fields`` names the two arguments in error messages (the command line passes
    ``("--output", "--format")``).
    """
    if fmt is not None:
        if fmt not in FORMATS:
            raise InputError(f"{fields[1]}: {fmt!r} is not one of {', '.join(FORMATS)}")
        return fmt
    suffix = os.path.splitext(path)[1].lower().lstrip(".")
    if suffix not in FORMATS:
        raise InputError(f"{fields[0]}: {path!r} should end in .csv, .json, .xyz or .extxyz (or give {fields[1]})")
    return suffix


def export_scan(ds, path: str | os.PathLike, fmt: str | None = None, unit: str = "kcal/mol",
                level: str | None = None, force_unit: str | None = None) -> str:
    """Write a scan as a tidy CSV table, JSON with QCSchema molecules, or XYZ geometries.

    Parameters
    ----------
    ds : xarray.Dataset or path-like
        A scan Dataset, or the ``.nc`` file written by :func:`interkit.save_scan`.
    path : path-like
        File to write; its folder must exist.
    fmt : {'csv', 'json', 'xyz', 'extxyz'}, optional
        Default: from the suffix of ``path``.
    unit : str
        Energy unit of the CSV (kcal/mol, kJ/mol, eV, cm-1 or hartree). The JSON keeps kcal/mol and states every variable's units;
        the extended XYZ uses eV and eV/angstrom, as ase expects.
    force_unit : str, optional
        Force unit of the CSV (a key of :data:`interkit.units.FORCE_UNITS`; default: the
        one matching ``unit``); the other formats have fixed units.
    level : str, optional
        Extended XYZ only: the curve (folded label) whose energy and forces are written;
        required when the scan has several.

    Returns
    -------
    str
        The path written.
    """
    from .provenance import refuse_grid

    path = os.fspath(path)
    kind = export_format(path, fmt)
    refuse_grid(ds)   # a grid Dataset has no single distance axis: export_grid
    if not isinstance(ds, xr.Dataset):
        from .provenance import load_saved

        ds = load_saved(ds)[0]
    if kind in ("xyz", "extxyz"):
        from .trajectory import write_trajectory

        if unit != "kcal/mol" or force_unit is not None:
            raise InputError(f"unit: the {kind} export has fixed units (angstrom; eV for extxyz), "
                             f"not {unit if unit != 'kcal/mol' else force_unit!r}")
        return write_trajectory(ds, path, kind, level)
    if level is not None:
        raise InputError(f"level: applies to the extxyz export only, not {kind}")
    if kind == "csv":
        return write_tidy_csv(ds, path, unit, force_unit)
    if force_unit not in (None, "kcal/mol/angstrom"):
        raise InputError(f"force_unit: the {kind} export keeps kcal/mol/angstrom, not {force_unit!r}")
    if unit != "kcal/mol":
        raise InputError(f"unit: the JSON export keeps kcal/mol (each variable states its units), not {unit!r}")
    return write_json(ds, path)
