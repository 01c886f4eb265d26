"""A self-contained static HTML report of an orientation-grid Dataset.

Same rules as :mod:`interkit.share.report`: one file, figures inline (PNG ``data:`` URIs),
style sheet inline, no scripts, no network, every text from the file escaped. Sections:
the caution about model results, the grid (axes, units, recipe), per level the map of the
interaction energy with its minimum and minimum-energy path (two axes) or the curve
along the axis (one axis), the lowest grid point of every level, the energy table, failed
points, and the provenance.
"""

from __future__ import annotations

import json
import os
from datetime import datetime, timezone

import numpy as np
import xarray as xr

from ..data.grid import check_grid, grid_of, open_grid
from ..errors import InputError
from ..fileio import existing_folder
from .report import STYLE, _e, _figure, _num, _table

#: larger grids get no full energy table in the report (the CSV export has every value)
TABLE_LIMIT = 400


def _variable(ds: xr.Dataset) -> tuple[str, str]:
    if ds.attrs.get("counterpoise", "") == "none":
        return "e_int_nocp", "uncorrected (no counterpoise correction)"
    return "e_int", "counterpoise-corrected"


def _axis_head(ds: xr.Dataset, name: str) -> str:
    units = str(ds[name].attrs.get("units", "1"))
    return f"{name} / {units}" if units != "1" else name


def _scheme(ds: xr.Dataset) -> str | None:
    return str(ds["dispersion"].values[0]) if "dispersion" in ds.dims else None


def _figures(ds: xr.Dataset, unit: str) -> str:
    from ..plot.maps import plot_grid_line, plot_map

    names = grid_of(ds).names
    variable, kind = _variable(ds)
    scheme = _scheme(ds)
    if scheme is not None:
        kind += f", dispersion scheme {scheme} (the first of the file's schemes)"
    if len(names) == 1:
        return _figure(lambda ax: plot_grid_line(ds, variable, ax=ax, unit=unit, dispersion=scheme),
                       f"Interaction energy ({kind}) along {names[0]}; stars mark the lowest point of each level.",
                       f"interaction energy along {names[0]}")
    parts = []
    for level in (str(x) for x in ds["level"].values):
        if not np.isfinite(ds[variable].sel(level=level).values).any():
            parts.append(f'<p class="note">{_e(level)}: no point has a number (all failed); no map.</p>')
            continue
        parts.append(_figure(lambda ax, lv=level: plot_map(ds, lv, variable, ax=ax, unit=unit, dispersion=scheme),
                             f"{level}: interaction energy ({kind}) over {names[0]} (x) and {names[1]} (y); "
                             f"the star marks the lowest grid point, the line the lowest {names[1]} at each "
                             f"{names[0]} (minimum-energy path). Blank cells failed.",
                             f"map of the interaction energy, {level}"))
    return "".join(parts)


def _minimum_section(ds: xr.Dataset, unit: str) -> str:
    from ..analysis.grid_minima import grid_minimum
    from ..units import convert_energy

    names = grid_of(ds).names
    variable, _ = _variable(ds)
    rows = []
    for level in (str(x) for x in ds["level"].values):
        try:
            low = grid_minimum(ds, level, variable, _scheme(ds))
        except InputError:
            rows.append([level] + ["–"] * (len(names) + 1) + ["no point has a number"])
            continue
        rows.append([level] + [_num(low[n], ".4g") for n in names]
                    + [_num(convert_energy(low["energy_kcal_per_mol"], "kcal/mol", unit)), f"point {low['point']}"])
    return ("<h2>Lowest grid point</h2>"
            '<p class="note">The computed grid point with the lowest interaction energy (not an interpolated '
            "minimum: its position is known to the grid spacing)"
            + (f"; dispersion scheme {_e(_scheme(ds))}" if _scheme(ds) else "") + ".</p>"
            + _table(["level"] + [_axis_head(ds, n) for n in names] + [f"E_int / {unit}", "note"], rows,
                     text=(0, len(names) + 2)))


def _energy_section(ds: xr.Dataset, unit: str) -> str:
    from ..units import convert_energy

    names = grid_of(ds).names
    variable, kind = _variable(ds)
    n = int(np.prod([ds.sizes[a] for a in names]))
    if n * ds.sizes["level"] > TABLE_LIMIT:
        return (f'<h2>Energies</h2><p class="note">{n} grid points: the full table is in the CSV export '
                "(<code>interkit export FILE.nc -o table.csv</code>).</p>")
    scheme = _scheme(ds)
    levels = [str(x) for x in ds["level"].values]
    rows = []
    point = ds["point"].transpose(*names).values
    for idx in np.ndindex(*point.shape):
        row = [_num(ds[a].values[k], ".4g") for a, k in zip(names, idx)]
        for lv in levels:
            e = ds[variable].sel(level=lv)
            st = ds["status"].sel(level=lv)
            if scheme is not None and "dispersion" in e.dims:
                e = e.sel(dispersion=scheme)
            sel = dict(zip(names, idx))
            if str(st.transpose(*names).values[idx]) == "failed":
                row.append(("failed", "failed"))
            else:
                row.append(_num(convert_energy(float(e.isel(sel).values), "kcal/mol", unit)))
        rows.append(row)
    return (f"<h2>Energies</h2><p class=\"note\">Interaction energy, {_e(kind)}, {_e(unit)} (negative = bound)"
            + (f", dispersion scheme {_e(scheme)}" if scheme else "") + ".</p>"
            + _table([_axis_head(ds, a) for a in names] + levels, rows, text=()))


def _status_section(ds: xr.Dataset) -> str:
    from ..data.grid import cell_labels

    labels = cell_labels(ds)
    names = grid_of(ds).names
    rows = []
    for level in (str(x) for x in ds["level"].values):
        st = ds["status"].sel(level=level).transpose(*names).values.ravel()
        detail = (ds["status_detail"].sel(level=level).transpose(*names).values.ravel()
                  if "status_detail" in ds.variables else [""] * st.size)
        point = ds["point"].transpose(*names).values.ravel()
        for s, d, p in zip(st, detail, point):
            if str(s) != "ok":
                rows.append([level, labels[int(p)], str(s), str(d)])
    if not rows:
        return "<h2>Point status</h2><p>Every calculation converged at the first attempt.</p>"
    return ('<h2>Point status</h2><p class="note">Failed points are NaN in the data (never a silent number).</p>'
            + _table(["level", "grid point", "status", "detail"], rows, text=(0, 1, 2, 3)))


def _provenance_section(ds: xr.Dataset) -> str:
    from .provenance import provenance_summary

    prov = provenance_summary(ds)
    spec = prov["spec"]
    rows = [["created (UTC)", prov["created_utc"]], ["schema", prov["schema"]],
            ["physical constants", prov["codata"]], ["counterpoise", prov["counterpoise"]],
            ["SCF energy threshold / hartree", spec.get("scf_threshold_hartree", "")],
            ["calculations with a store key", prov["n_store_keys"]]]
    for key, label in (("calculations_computed", "calculations computed in the run"),
                       ("calculations_from_store", "calculations taken from the store")):
        if key in prov:
            rows.append([label, prov[key]])
    versions = [[name, version] for name, version in prov["versions"].items()]
    recipe = json.dumps(json.loads(ds.attrs["grid_json"]), indent=1, sort_keys=True)
    options = {k: v for k, v in spec.items() if k not in ("coordinate", "dimer")}
    return ("<h2>Provenance</h2>" + _table(["item", "value"], rows, text=(0, 1))
            + "<p>Library versions:</p>" + _table(["library", "version"], versions, text=(0, 1))
            + '<p class="note">Recompute sampled grid points with <code>interkit verify</code> on the netCDF '
            "file, or every point with <code>interkit rerun</code> (in Python: <code>interkit.verify_grid</code>, "
            "<code>interkit.rerun_grid</code>).</p>"
            + f"<details><summary>Grid recipe (JSON)</summary><pre>{_e(recipe)}</pre></details>"
            + f"<details><summary>Calculation options (JSON)</summary><pre>{_e(json.dumps(options, indent=1, sort_keys=True))}"
            "</pre></details>")


def render_grid_report(ds: xr.Dataset, unit: str = "kcal/mol") -> str:
    """The HTML text of the report of an orientation-grid Dataset.

    Parameters
    ----------
    ds : xarray.Dataset
        A grid Dataset (e.g. from :func:`interkit.open_grid`).
    unit : str
        Energy unit of the figures and tables (kcal/mol, kJ/mol, eV, cm-1, hartree).

    Returns
    -------
    str
        A complete HTML document without scripts or external resources.
    """
    from ..data.schema import CAUTION
    from ..units import ENERGY_UNITS
    from ..version import __version__

    if unit not in ENERGY_UNITS:
        raise InputError(f"unit: {unit!r} is not one of {', '.join(ENERGY_UNITS)}")
    check_grid(ds)
    grid = grid_of(ds)
    title = str(ds.attrs.get("title", "orientation scan"))
    caution = str(ds.attrs.get("caution", "")) or CAUTION
    if caution != CAUTION:
        caution = f"{caution} {CAUTION}"
    axes_rows = [[ax.name, ax.units, ax.describe(), len(ax.values),
                  f"{min(ax.values):g} to {max(ax.values):g}"] for ax in grid.axes]
    sections = [
        f"<h1>{_e(title)}</h1>",
        f'<p class="subtitle">{_e(grid.describe())} · {len(grid.dimers())} grid points · '
        f"{ds.sizes['level']} level(s): {_e(', '.join(str(x) for x in ds['level'].values))}</p>",
        f'<div class="caution"><b>Caution.</b> {_e(caution)}</div>',
        "<h2>The grid</h2>" + _table(["axis", "units", "what moves", "values", "range"], axes_rows, text=(0, 1, 2))
        + f'<p class="note">{_e(ds.attrs.get("grid_order", ""))}. Fragment A never moves; both monomers stay '
        "rigid.</p>",
        "<h2>Interaction energy over the grid</h2>" + _figures(ds, unit),
        _minimum_section(ds, unit),
        _energy_section(ds, unit),
        _status_section(ds),
        _provenance_section(ds),
    ]
    made = datetime.now(timezone.utc).isoformat(timespec="seconds")
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<title>{_e(title)} – interkit report</title>"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            f"<style>{STYLE}</style></head><body>" + "\n".join(sections)
            + f"<footer>Report written by interkit {_e(__version__)} on {_e(made)} from the saved Dataset; "
            "no number in it was recomputed.</footer></body></html>\n")


def write_grid_report(ds, path: str | os.PathLike, unit: str = "kcal/mol") -> str:
    """Write the self-contained HTML report of an orientation grid (:func:`render_grid_report`).

    Parameters
    ----------
    ds : xarray.Dataset or path-like
        A grid Dataset, or the ``.nc`` file written by :func:`interkit.save_grid`.
    path : path-like
        HTML file to write (atomically); its folder must exist.
    unit : str
        Energy unit of the figures and tables.

    Returns
    -------
    str
        The path written.
    """
    from ..fileio import atomic_write_text

    path = os.fspath(path)
    existing_folder(path, "path")
    if not isinstance(ds, xr.Dataset):
        ds = open_grid(ds)
    return atomic_write_text(path, render_grid_report(ds, unit))
