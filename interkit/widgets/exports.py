"""Files the explorer writes: the Dataset as netCDF, the curves as CSV, and the
shareable forms of the scan (HTML report, JSON with QCSchema molecules, tidy CSV)."""

from __future__ import annotations

import csv
import os

import numpy as np
import xarray as xr

from ..data.columns import column_name
from ..data.dispersion import flatten_dispersion
from ..data.schema import save_scan
from ..errors import InputError
from ..units import MATCHING_FORCE_UNIT, convert_energy, convert_force

CSV_ENERGIES = ("e_int", "e_int_nocp", "bsse")
#: file name suffix of each export button (after the name stem)
EXPORT_SUFFIXES = {"netCDF": ".nc", "CSV": ".csv", "PNG": ".png", "SVG": ".svg", "report": ".html",
                   "JSON": ".json", "tidy CSV": "-tidy.csv"}


def write_netcdf(ds: xr.Dataset, path: str | os.PathLike) -> str:
    """Save the scan with :func:`interkit.save_scan`; return the path written."""
    save_scan(ds, path)
    return os.fspath(path)


def write_csv(ds: xr.Dataset, path: str | os.PathLike, unit: str = "kcal/mol",
              force_unit: str | None = None) -> str:
    """Write one row per (curve, point): distance, factor, energies in ``unit``, the
    force along the coordinate in ``force_unit`` (default: the one matching ``unit``,
    :data:`interkit.units.MATCHING_FORCE_UNIT`), status.

    Column names follow :mod:`interkit.data.columns` (``curve``, ``distance_angstrom``,
    ``factor``, ``e_int_kj_per_mol``, ``force_along_kj_per_mol_per_angstrom`` ...), so the file reads back as a reference curve
    (:func:`interkit.analysis.comparison.reference_from_csv`); missing values are empty.
    """
    ds = flatten_dispersion(ds)
    force_unit = force_unit or MATCHING_FORCE_UNIT.get(unit, "kcal/mol/angstrom")
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise InputError(f"export: folder {folder!r} does not exist")
    # per-level curves, or per-point values shared by every level (SAPT0 components)
    extra = [name for name in ("force_along", "e_elst", "e_exch", "e_ind", "e_disp", "e_sapt0")
             if name in ds.variables and ds[name].dims in (("level", "distance"), ("distance",))]
    header = ["curve", "distance_angstrom", "factor"]
    header += [column_name(name, unit) for name in CSV_ENERGIES]
    for name in extra:
        header.append(column_name(name, force_unit if name == "force_along" else unit))
    header.append("status")
    r = ds["distance"].values
    factor = ds["factor"].values if "factor" in ds.coords else np.full_like(r, np.nan)
    with open(path, "w", newline="", encoding="utf-8") as fh:
        out = csv.writer(fh)
        out.writerow(header)
        for level in ds["level"].values:
            sub = ds.sel(level=level)
            cols = [convert_energy(sub[name].values, "kcal/mol", unit) for name in CSV_ENERGIES]
            for name in extra:
                vals = sub[name].values if "level" in ds[name].dims else ds[name].values
                if name == "force_along":
                    cols.append(convert_force(vals, ds[name].attrs.get("units", "kcal/mol/angstrom"), force_unit))
                else:
                    cols.append(convert_energy(vals, "kcal/mol", unit))
            status = sub["status"].values
            for i in range(r.size):
                row = [str(level), f"{r[i]:.6f}", f"{factor[i]:.6f}"]
                row += ["" if not np.isfinite(c[i]) else f"{c[i]:.8g}" for c in cols]
                row.append(str(status[i]))
                out.writerow(row)
    return path


def write_report_file(ds: xr.Dataset, path: str | os.PathLike, unit: str = "kcal/mol",
                      force_unit: str | None = None) -> str:
    """Write the self-contained HTML report (:func:`interkit.share.report.write_report`)
    with energies in ``unit`` and forces in ``force_unit``; return the path written."""
    from ..share.report import write_report

    return write_report(ds, path, unit=unit, force_unit=force_unit)


def write_shared(ds: xr.Dataset, path: str | os.PathLike, fmt: str, unit: str = "kcal/mol",
                 force_unit: str | None = None) -> str:
    """Write the tidy CSV (``fmt='csv'``, energies in ``unit``, forces in ``force_unit``)
    or the JSON with QCSchema molecules (``fmt='json'``, kcal/mol) of
    :func:`interkit.share.export.export_scan`; return the path written."""
    from ..share.export import export_scan

    if fmt != "csv":
        return export_scan(ds, path, fmt)
    return export_scan(ds, path, fmt, unit=unit, force_unit=force_unit)
