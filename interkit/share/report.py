"""A self-contained static HTML report of a scan Dataset.

One file, no scripts, no network: the figures are inline PNG images (base64 ``data:``
URIs) drawn with :mod:`interkit.plot.curves` and :mod:`interkit.plot.components`, the
style sheet is inline, and every text that comes from the Dataset (system name, level
labels, status details, the spec) is HTML-escaped, so a label such as
``<script>...</script>`` shows as text.

Sections: the caution about model results, the curves and the energy table, minima
and well depths, forces (if computed), SAPT0 components (if computed), a ranking of the
levels against a reference level (when there is more than one level), failed points,
and the provenance (spec, versions, creation time, store keys, CODATA edition).
"""

from __future__ import annotations

import base64
import html
import io
import json
import os
from datetime import datetime, timezone

import numpy as np
import xarray as xr

from ..errors import InputError
from ..fileio import existing_folder

STYLE = """
body { font-family: system-ui, -apple-system, "Segoe UI", sans-serif; color: #1e2328;
       margin: 0 auto; max-width: 1040px; padding: 1.2em 1.6em 3em; line-height: 1.45; }
h1 { font-size: 1.45em; margin-bottom: 0.2em; }
h2 { font-size: 1.15em; margin-top: 2em; border-bottom: 2px solid #1b6f8a; padding-bottom: 0.2em; }
.subtitle { color: #56606b; margin-top: 0; }
.caution { background: #fff6e5; border-left: 5px solid #c4581b; padding: 0.7em 1em; margin: 1em 0; }
table { border-collapse: collapse; margin: 0.6em 0; font-size: 0.9em; }
th, td { border: 1px solid #d3d9e0; padding: 0.25em 0.6em; text-align: right; }
th { background: #eef2f6; }
td.text, th.text { text-align: left; }
td.failed { color: #a8324a; font-style: italic; }
figure { margin: 1em 0; }
figure img { max-width: 100%; height: auto; border: 1px solid #e3e7ec; }
figcaption { color: #56606b; font-size: 0.88em; }
pre { background: #f4f6f9; padding: 0.8em; overflow-x: auto; font-size: 0.8em; }
.note { color: #56606b; font-size: 0.9em; }
footer { margin-top: 3em; color: #56606b; font-size: 0.85em; }
"""


def _e(value) -> str:
    """HTML-escaped text of any value."""
    return html.escape(str(value), quote=True)


def _num(x, fmt: str = ".3f") -> str:
    try:
        v = float(x)
    except (TypeError, ValueError):
        return _e(x)
    return format(v, fmt) if np.isfinite(v) else "–"


# ---------------------------------------------------------------------- data views
def levels_view(ds: xr.Dataset) -> xr.Dataset:
    """``ds`` with any ``dispersion`` dimension folded into the level axis, so every
    curve is one (level, distance) row (via :func:`interkit.data.dispersion.flatten_dispersion`)."""
    from ..data.dispersion import flatten_dispersion

    return flatten_dispersion(ds)


def choose_reference(ds: xr.Dataset, reference: str | None = None) -> str | None:
    """The reference curve of the comparison: ``reference`` if given (checked), else the one
    rule of the report, ``interkit compare`` and the comparison widget,
    :func:`interkit.model.levels.default_reference` (the most accurate wavefunction level,
    else the first curve); None with fewer than two curves. ``ds`` may have a
    ``dispersion`` dimension: curves are named by their folded labels."""
    from ..analysis.comparison import curve_pairs
    from ..model.levels import default_reference

    labels = list(curve_pairs(ds))
    if reference is not None:
        if reference not in labels:
            raise InputError(f"--reference: {reference!r} is not a curve of the scan ({', '.join(labels)})")
        return reference
    if len(labels) < 2:
        return None
    return default_reference(labels)


# ---------------------------------------------------------------------- pieces
def _figure_png(draw, width: float = 6.6, height: float = 4.3) -> str:
    """Base64 PNG of a figure drawn by ``draw(ax)`` (no pyplot state involved)."""
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), dpi=110)
    ax = fig.subplots()
    draw(ax)
    fig.tight_layout()
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    return base64.b64encode(buf.getvalue()).decode("ascii")


def _figure(draw, caption: str, alt: str) -> str:
    data = _figure_png(draw)
    return (f'<figure><img src="data:image/png;base64,{data}" alt="{_e(alt)}">'
            f"<figcaption>{_e(caption)}</figcaption></figure>")


def _table(header: list[str], rows: list[list], text: tuple[int, ...] = (0,)) -> str:
    """A table; ``rows`` hold formatted cells (escaped here), or ``(cell, css class)``;
    the columns ``text`` are left-aligned, the others (numbers) right-aligned."""
    head = "".join(f'<th class="text">{_e(h)}</th>' if k in text else f"<th>{_e(h)}</th>"
                   for k, h in enumerate(header))
    body = []
    for row in rows:
        cells = []
        for k, cell in enumerate(row):
            css = "text" if k in text else ""
            if isinstance(cell, tuple):
                cell, extra = cell
                css = f"{css} {extra}".strip()
            cells.append(f'<td class="{css}">{_e(cell)}</td>' if css else f"<td>{_e(cell)}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def _energy_section(ds: xr.Dataset, unit: str = "kcal/mol") -> str:
    from ..analysis.basis_uncertainty import basis_uncertainty
    from ..model.level_names import display_label
    from ..plot.curves import plot_curves
    from ..units import convert_energy

    levels = [str(x) for x in ds["level"].values]
    cp = ds.attrs.get("counterpoise", "") != "none"
    banded = any(basis_uncertainty(ds, lv, "e_int") is not None for lv in levels)
    parts = ["<h2>Interaction-energy curves</h2>",
             _figure(lambda ax: plot_curves(ds, ax=ax, show_uncorrected=cp, unit=unit),
                     "Counterpoise-corrected interaction energy (solid) and uncorrected (dashed) against "
                     "the scan coordinate; shaded bands mark failed points"
                     + ("; a shaded band along a curve is its basis-set uncertainty" if banded else "") + "."
                     if cp else
                     "Interaction energy (no counterpoise correction) against the scan coordinate.",
                     "interaction-energy curves")]
    variable = "e_int" if cp else "e_int_nocp"
    rows = []
    factor = ds["factor"].values if "factor" in ds.coords else [np.nan] * ds.sizes["distance"]
    for i, r in enumerate(ds["distance"].values):
        row = [_num(r), _num(factor[i])]
        for lv in levels:
            st = str(ds["status"].sel(level=lv).values[i])
            row.append(("failed", "failed") if st == "failed" else
                       _num(convert_energy(float(ds[variable].sel(level=lv).values[i]), "kcal/mol", unit)))
        rows.append(row)
    title = "counterpoise-corrected" if cp else "uncorrected"
    parts.append(f'<p class="note">Interaction energy, {title}, {_e(unit)} (negative = bound).</p>')
    parts.append(_table(["distance / Å", "factor"] + [display_label(lv) for lv in levels], rows, text=()))
    return "".join(parts)


def _minimum_section(ds: xr.Dataset, unit: str = "kcal/mol") -> str:
    from ..analysis.minima import minimum_table
    from ..model.level_names import display_label
    from ..units import convert_energy

    variable = "e_int" if ds.attrs.get("counterpoise", "") != "none" else "e_int_nocp"
    rows = []
    for row in minimum_table(ds, variable):
        note = [] if row["interior"] else ["minimum at the edge of the grid"]
        if row["failed_points"]:
            note.append(f"{row['failed_points']} failed point(s)")
        rows.append([display_label(row["level"]), _num(row["r_min_angstrom"]),
                     _num(convert_energy(row["e_min_kcal_per_mol"], "kcal/mol", unit)),
                     _num(convert_energy(row["well_depth_kcal_per_mol"], "kcal/mol", unit)),
                     _num(convert_energy(row["force_constant_kcal_per_mol_per_angstrom2"], "kcal/mol", unit), ".2f"),
                     row["n_points"], "; ".join(note)])
    return ("<h2>Minimum and well depth</h2>"
            '<p class="note">Natural cubic spline through the finite points; the force constant is its '
            "curvature at the minimum.</p>"
            + _table(["level", "R_min / Å", f"E_min / {unit}", f"well depth / {unit}",
                      f"force constant / {unit}/Å²", "points", "note"], rows, text=(0, 6)))


def _force_section(ds: xr.Dataset, level: str | None, force_unit: str = "kcal/mol/angstrom") -> str:
    if "force_along" not in ds.variables:
        return ""
    from ..analysis.minima import force_zero_crossing
    from ..model.level_names import display_label
    from ..plot.curves import plot_forces

    rows = []
    for lv in ds["level"].values:
        r0 = force_zero_crossing(ds["distance"].values, ds["force_along"].sel(level=lv).values)
        method = str(ds["force_method"].sel(level=lv).values) if "force_method" in ds.variables else ""
        rows.append([display_label(str(lv)), _num(r0) if np.isfinite(r0) else "no sign change", method])
    parts = ["<h2>Forces between the fragments</h2>",
             _figure(lambda ax: plot_forces(ds, ax=ax, force_unit=force_unit),
                     "Net counterpoise-corrected force on fragment B along the coordinate (positive = "
                     "repulsive); dashed: −dE/dR of a spline through the energies, which should lie on it.",
                     "force curves"),
             _table(["level", "force zero / Å", "forces from"], rows, text=(0, 2)),
             '<p class="note">The force zero is where the force changes sign from repulsive to attractive '
             "(spline through the sampled forces); it lies at the minimum of the energy curve.</p>"]
    split_level = level if level is not None else str(ds["level"].values[0])
    if "force_hf_along" in ds.variables and bool(np.isfinite(ds["force_hf_along"].sel(level=split_level)).any()):
        parts.append(_figure(
            lambda ax: plot_forces(ds, ax=ax, levels=[split_level], show_fit=False, show_split=True,
                                   force_unit=force_unit),
            f"{display_label(split_level)}: the net force (solid) as the electrostatic (Hellmann–Feynman) force of nuclei "
            "and electron density (dotted) plus the Pulay remainder of the atom-centred basis (dash-dotted).",
            "force split"))
    return "".join(parts)


def _decomposition_section(ds: xr.Dataset, level: str | None) -> str:
    from ..data.sapt0 import COMPONENT_NAMES, COMPONENTS, has_decomposition

    if not has_decomposition(ds) or "level" in ds["e_elst"].dims:
        return ""
    from ..plot.components import plot_components

    basis = ds.attrs.get("decomposition_basis", "")
    names = list(COMPONENTS) + (["e_sapt0"] if "e_sapt0" in ds.variables else [])
    rows = []
    status = ds["sapt_status"].values if "sapt_status" in ds.variables else None
    for i, r in enumerate(ds["distance"].values):
        if status is not None and str(status[i]) == "failed":
            rows.append([_num(r)] + [("failed", "failed")] * len(names))
        else:
            rows.append([_num(r)] + [_num(ds[n].values[i]) for n in names])
    header = ["distance / Å"] + [COMPONENT_NAMES.get(n, "SAPT0 total") for n in names]
    return ("<h2>SAPT0 components</h2>"
            + _figure(lambda ax: plot_components(ds, ax=ax, level=level),
                      f"SAPT0/{basis} electrostatics, exchange, induction (with δHF) and dispersion (with "
                      "exchange-dispersion) along the scan" + (f"; dashed grey: {level} (CP)." if level else "."),
                      "SAPT0 components")
            + '<p class="note">kcal/mol; negative = attractive.</p>'
            + _table(header, rows, text=()))


def _comparison_section(ds: xr.Dataset, reference: str | None, explicit: bool, options: dict) -> str:
    """The statistics table of :func:`interkit.analysis.comparison.comparison_table` (the
    one ``interkit compare`` prints) for the original ``ds`` (not the flattened view)."""
    if reference is None:
        return ""
    from ..analysis.comparison import comparison_table

    table = comparison_table(ds, reference=reference, **options)
    from ..model.level_names import display_label

    rows = [[row["rank"], display_label(row["curve"]), *(_num(row[k]) for k, _, _ in table.columns), row["n_compared"],
             "" if row["status"] == "ok" else row["status"]] for row in table.rows]
    how = "chosen with --reference" if explicit else (
        "chosen by the default rule: the most accurate wavefunction level in the scan, else its first curve; "
        "pass another with --reference")
    unit = "per cent of |reference|" if table.relative else "kcal/mol"
    header = ["rank", "curve"] + [f"{h} / {u}" for _, h, u in table.columns] + ["points", "note"]
    return ("<h2>Levels against a reference</h2>"
            f'<p class="note">Reference: <b>{_e(display_label(table.reference))}</b> '
            f"({_e(how)}). Region: {_e(table.region_text)}. Errors are curve minus reference, {_e(unit)}; "
            "a positive well-depth error ΔDe means a deeper well. The reference is itself a model result"
            + (f"; {_e(table.uncertainty_text())}" if table.has_reference_uncertainty else "") + ".</p>"
            + _table(header, rows, text=(1, len(header) - 1)).replace("<table", '<table class="statistics"', 1))


def _status_section(ds: xr.Dataset) -> str:
    rows = []
    for level in ds["level"].values:
        st = ds["status"].sel(level=level).values
        detail = ds["status_detail"].sel(level=level).values if "status_detail" in ds.variables else None
        for i, r in enumerate(ds["distance"].values):
            if str(st[i]) != "ok":
                rows.append([str(level), _num(r), str(st[i]), str(detail[i]) if detail is not None else ""])
    if not rows:
        return ("<h2>Point status</h2><p>Every calculation converged at the first attempt.</p>")
    return ("<h2>Point status</h2><p class=\"note\">Failed points are NaN in the data (never a silent "
            "number); retried points converged with the named fallback.</p>"
            + _table(["level", "distance / Å", "status", "detail"], rows, text=(0, 2, 3)))


def _provenance_section(ds: xr.Dataset) -> str:
    from .provenance import provenance_summary

    prov = provenance_summary(ds)
    spec = prov["spec"]
    rows = [["created (UTC)", prov["created_utc"]],
            ["schema", prov["schema"]],
            ["physical constants", prov["codata"]],
            ["counterpoise", prov["counterpoise"]],
            ["SCF energy threshold / hartree", spec.get("scf_threshold_hartree", "")],
            ["calculations with a store key", prov["n_store_keys"]]]
    for key, label in (("executor", "executor"), ("workers", "workers"),
                       ("calculations_computed", "calculations computed in the run"),
                       ("calculations_from_store", "calculations taken from the store"),
                       ("run_wall_time_s", "wall time of the run / s")):
        if key in prov:
            value = prov[key]
            rows.append([label, f"{value:.1f}" if isinstance(value, float) else value])
    versions = [[name, version] for name, version in prov["versions"].items()]
    spec_text = json.dumps(spec, indent=1, sort_keys=True)
    return ("<h2>Provenance</h2>"
            + _table(["item", "value"], rows, text=(0, 1))
            + "<p>Library versions:</p>" + _table(["library", "version"], versions, text=(0, 1))
            + '<p class="note">Reproduce the scan with <code>interkit rerun</code> on the netCDF file, or '
            "recompute sampled points with <code>interkit verify</code> (in Python: "
            "<code>interkit.rerun_scan</code>, <code>interkit.verify_scan</code>).</p>"
            + f"<details><summary>Full spec (JSON)</summary><pre>{_e(spec_text)}</pre></details>")


# ---------------------------------------------------------------------- the document
def render_report(ds: xr.Dataset, reference: str | None = None, region: str = "all",
                  window_angstrom: float | None = None, relative: bool = False, unit: str = "kcal/mol",
                  force_unit: str | None = None) -> str:
    """The HTML text of the report of a scan Dataset.

    Parameters
    ----------
    ds : xarray.Dataset
        A scan Dataset (e.g. from :func:`interkit.open_scan`).
    reference : str, optional
        Curve used as reference in the comparison (folded label); default: the one rule
        :func:`interkit.model.levels.default_reference`, when there are several curves.
    region, window_angstrom, relative :
        Points and kind of error of the statistics table (see
        :mod:`interkit.analysis.error_statistics`); as ``interkit compare``.
    unit, force_unit : str
        Units of the energy curves, tables and force curves (default kcal/mol and the
        force unit matching ``unit``); the statistics table of the comparison stays in
        kcal/mol (or per cent), as its column names say.

    Returns
    -------
    str
        A complete HTML document without scripts or external resources.
    """
    from ..data.schema import CAUTION, validate
    from ..model.level_names import display_label
    from ..units import ENERGY_UNITS, FORCE_UNITS, MATCHING_FORCE_UNIT
    from ..version import __version__

    if unit not in ENERGY_UNITS:
        raise InputError(f"unit: {unit!r} is not one of {', '.join(ENERGY_UNITS)}")
    force_unit = force_unit or MATCHING_FORCE_UNIT[unit]
    if force_unit not in FORCE_UNITS:
        raise InputError(f"force_unit: {force_unit!r} is not one of {', '.join(FORCE_UNITS)}")
    validate(ds)
    view = levels_view(ds)
    ref = choose_reference(ds, reference)
    options = {"region": region, "window_angstrom": window_angstrom, "relative": relative}
    try:
        name = json.loads(ds.attrs["spec_json"]).get("name", "")
    except (KeyError, ValueError):
        name = ""
    title = str(ds.attrs.get("title", "interaction-energy scan"))
    levels = [str(x) for x in view["level"].values]
    caution = str(ds.attrs.get("caution", "")) or CAUTION
    if caution != CAUTION:
        caution = f"{caution} {CAUTION}"
    sections = [
        f"<h1>{_e(name or title)}</h1>",
        f'<p class="subtitle">{_e(title)} · coordinate: {_e(view["distance"].attrs.get("long_name", ""))} · '
        f"{len(levels)} level(s): {_e(', '.join(display_label(lv) for lv in levels))} · "
        f"{view.sizes['distance']} points</p>",
        f'<div class="caution"><b>Caution.</b> {_e(caution)}</div>',
        _energy_section(view, unit),
        _minimum_section(view, unit),
        _force_section(view, ref, force_unit),
        _decomposition_section(view, ref or (levels[0] if levels else None)),
        _comparison_section(ds, ref, reference is not None, options),
        _status_section(view),
        _provenance_section(ds),
    ]
    made = datetime.now(timezone.utc).isoformat(timespec="seconds")
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<title>{_e(name or title)} – interkit report</title>"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            f"<style>{STYLE}</style></head><body>"
            + "\n".join(s for s in sections if s)
            + f"<footer>Report written by interkit {_e(__version__)} on {_e(made)} from the saved Dataset; "
            "no number in it was recomputed.</footer></body></html>\n")


def write_report(ds, path: str | os.PathLike, reference: str | None = None, region: str = "all",
                 window_angstrom: float | None = None, relative: bool = False, unit: str = "kcal/mol",
                 force_unit: str | None = None) -> str:
    """Write the HTML report of a scan (see :func:`render_report`) to one file.

    The file is self-contained: figures are inline PNG images, the style sheet is
    inline, and there are no scripts and no links to other resources, so it opens in a
    browser without a network and can be sent by mail or archived beside the data.

    Parameters
    ----------
    ds : xarray.Dataset or path-like
        A scan Dataset, or the ``.nc`` file written by :func:`interkit.save_scan`.
    path : path-like
        HTML file to write (atomically: a temporary file in the same folder, then a
        rename); its folder must exist.
    reference : str, optional
        Curve used as reference in the comparison (default: the one rule
        :func:`interkit.model.levels.default_reference`).
    region, window_angstrom, relative :
        As in :func:`render_report`.
    unit, force_unit : str
        Units of the energies and forces shown (see :func:`render_report`).

    Returns
    -------
    str
        The path written.
    """
    path = os.fspath(path)
    existing_folder(path, "path")
    if not isinstance(ds, xr.Dataset):
        from .provenance import load_saved

        ds = load_saved(ds)[0]
    text = render_report(ds, reference, region, window_angstrom, relative, unit, force_unit)
    from ..fileio import atomic_write_text

    return atomic_write_text(path, text)
