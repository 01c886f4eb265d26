"""CorrectionComparison: which functional and dispersion correction follows a reference?

Pick the reference (a curve of the same scan, e.g. MP2 or CCSD(T), or an external curve
from CSV), choose the curves to show, and read the overlay, the error curves and the
ranking by RMSE; the ranking table can be written to CSV. The table, its default
reference and its region and relative-error choices are those of the report and
``interkit compare`` (:func:`interkit.analysis.comparison.comparison_table`).
"""

from __future__ import annotations

import csv
import dataclasses
import html
import io
import os

import ipywidgets as widgets
import numpy as np
import xarray as xr
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from ..analysis.comparison import (
    ComparisonTable,
    ReferenceCurve,
    comparison_table,
    curve_pairs,
    default_reference,
    reference_from_file,
)
from ..analysis.error_statistics import DEFAULT_WINDOW_ANGSTROM, REGIONS, statistics_columns
from ..data.dispersion import flatten_dispersion
from ..data.schema import open_scan, validate
from ..errors import InputError, InterkitError
from ..plot.comparison import compared_curves, plot_comparison
from ..units import convert_energy
from .style import DISPLAY_UNITS, error_html, note_html

#: ranking columns of kcal/mol errors: (row key, header, is an energy); the same as the
#: report's and ``interkit compare``'s (:func:`~interkit.analysis.error_statistics.statistics_columns`)
TABLE_COLUMNS = tuple((key, header, unit == "kcal/mol") for key, header, unit in statistics_columns(False))
EXTERNAL_PREFIX = "external: "


class CorrectionComparison(widgets.VBox):
    """Compare curves (functionals x dispersion schemes) against a reference curve.

    Parameters
    ----------
    ds : xarray.Dataset or path
        A scan, usually with a ``dispersion`` dimension.
    reference : str, optional
        Folded label of the reference curve (e.g. ``'mp2/def2-svp'``); by default the
        most accurate wavefunction level in the scan.
    external : ReferenceCurve or path, optional
        An external reference curve (CSV with ``distance_angstrom`` and
        ``e_int_kcal_per_mol``, or a saved scan ``.nc`` whose most accurate
        wavefunction level is taken), offered as a reference.
    export_dir : path, optional
        Folder for the exported ranking table (default: the working folder).
    """

    def __init__(self, ds: xr.Dataset | str | os.PathLike, reference: str | None = None,
                 external: ReferenceCurve | str | os.PathLike | None = None,
                 export_dir: str | os.PathLike | None = None):
        if isinstance(ds, (str, os.PathLike)):
            ds = open_scan(ds)
        validate(ds)
        self.ds = ds
        self.pairs = curve_pairs(ds)
        if not self.pairs:
            raise InputError("dataset: no curve has values to compare")
        self.externals: dict[str, ReferenceCurve] = {}
        if external is not None:
            self._add_external(external if isinstance(external, ReferenceCurve) else reference_from_file(external))
        labels = list(self.pairs)
        options = labels + list(self.externals)
        if reference is not None and reference not in options:
            raise InputError(f"reference: {reference!r} is not one of {options}")
        if reference is None:
            reference = next(iter(self.externals), None) or default_reference(labels)
        self.export_dir = os.fspath(export_dir) if export_dir is not None else os.getcwd()
        self.rows: list[dict] = []

        self.reference_select = widgets.Dropdown(options=options, value=reference, description="reference",
                                                 layout=widgets.Layout(width="360px"))
        self.reference_select.add_class("interkit-reference")
        self.curve_select = widgets.SelectMultiple(options=labels, value=tuple(labels), rows=min(8, len(labels)),
                                                   description="curves", layout=widgets.Layout(width="360px"))
        self.region_select = widgets.Dropdown(options=list(REGIONS), value="all", description="region",
                                              tooltip="all points, bound region (reference E_int < 0), or a "
                                                      "window around the reference minimum",
                                              layout=widgets.Layout(width="200px"))
        self.window = widgets.BoundedFloatText(value=DEFAULT_WINDOW_ANGSTROM, min=0.01, max=100.0, step=0.1,
                                               description="± Å", layout=widgets.Layout(width="150px"))
        self.relative = widgets.Checkbox(value=False, description="relative errors (% of |reference|)")
        self.table_data: ComparisonTable | None = None
        self.unit_select = widgets.ToggleButtons(options=list(DISPLAY_UNITS), value="kcal/mol", description="unit",
                                                 style={"button_width": "72px"})
        self.csv_path = widgets.Text(placeholder="reference curve: CSV (distance_angstrom, e_int_kcal_per_mol) or saved scan .nc",
                                     layout=widgets.Layout(width="420px"))
        self.load_button = widgets.Button(description="add reference curve", icon="plus")
        self.export_button = widgets.Button(description="save ranking CSV", icon="download")
        self.export_button.add_class("interkit-export-ranking")
        self.message = widgets.HTML()
        self.figure = Figure(figsize=(10.5, 3.9), dpi=90, layout="constrained")
        self.canvas = FigureCanvasAgg(self.figure)
        self.image = widgets.Image(format="png", layout=widgets.Layout(width="945px"))
        self.image.add_class("interkit-comparison-figure")
        self.table = widgets.HTML()
        self.table.add_class("interkit-ranking")
        self.unavailable = widgets.HTML(unavailable_html(ds))
        self.unavailable.add_class("interkit-unavailable")

        for control in (self.reference_select, self.curve_select, self.unit_select, self.region_select,
                        self.window, self.relative):
            control.observe(lambda _change: self.refresh(), names="value")
        self.load_button.on_click(lambda _b: self._load_csv())
        self.export_button.on_click(lambda _b: self.export())
        super().__init__([
            widgets.HBox([self.reference_select, self.unit_select]),
            widgets.HBox([self.region_select, self.window, self.relative]),
            widgets.HBox([self.curve_select,
                          widgets.VBox([widgets.HBox([self.csv_path, self.load_button]), self.export_button,
                                        self.message])]),
            self.image, self.table, self.unavailable,
            widgets.HTML(note_html(self.ds.attrs.get("caution", ""))),
        ])
        self.add_class("interkit-correction-comparison")
        self.refresh()

    # ------------------------------------------------------------------ reference
    def _add_external(self, curve: ReferenceCurve) -> str:
        label = EXTERNAL_PREFIX + os.path.basename(curve.source or "curve")
        self.externals[label] = curve
        return label

    def _table_args(self) -> dict:
        """Arguments of :func:`comparison_table` for the current choices."""
        choice = self.reference_select.value
        args = {"external": self.externals[choice]} if choice in self.externals else {"reference": choice}
        region = self.region_select.value
        return dict(args, region=region, window_angstrom=float(self.window.value) if region == "window" else None,
                    relative=bool(self.relative.value))

    def _reference_args(self) -> dict:
        choice = self.reference_select.value
        if choice in self.externals:
            return {"reference": self.externals[choice]}
        level, scheme = self.pairs[choice]
        return {"reference_level": level, "reference_dispersion": scheme}

    def _load_csv(self) -> None:
        try:
            curve = reference_from_file(self.csv_path.value.strip())
        except InterkitError as exc:
            self.message.value = error_html(str(exc))
            return
        label = self._add_external(curve)
        self.reference_select.options = list(self.pairs) + list(self.externals)
        self.reference_select.value = label
        self.message.value = note_html(f"reference curve added: {label}")

    # ------------------------------------------------------------------ views
    def refresh(self) -> None:
        """Redraw the overlay and error plots and the ranking for the current choices."""
        args = self._reference_args()
        unit = self.unit_select.value
        try:
            self.table_data = comparison_table(self.ds, **self._table_args())
        except InterkitError as exc:
            self.message.value = error_html(str(exc))
            return
        self.message.value = ""
        self.rows = [dict(row) for row in self.table_data.rows]
        shown = set(self.curve_select.value)
        self.rows = [row for row in self.rows if row["curve"] in shown]
        for k, row in enumerate(self.rows):
            row["rank"] = k + 1
        self.figure.clear()
        axes = self.figure.subplots(1, 2)
        plot_comparison(self.ds, unit=unit, curves=list(shown), axes=axes, **args)
        buf = io.BytesIO()
        self.figure.savefig(buf, format="png")
        self.image.value = buf.getvalue()
        self.table.value = self._table_html(unit)

    def _table_html(self, unit: str) -> str:
        table = self.table_data
        columns = [(k, h, u) for k, h, u in table.columns]
        shown_units = [unit if u == "kcal/mol" else u for _, _, u in columns]   # energies in the chosen unit
        head = "".join(f"<th>{html.escape(h + ' / ' + su)}</th>" for (_, h, _), su in zip(columns, shown_units))
        body = []
        for row in self.rows:
            cells = []
            for key, _, u in columns:
                v = row.get(key, float("nan"))
                v = convert_energy(v, "kcal/mol", unit) if u == "kcal/mol" else v
                cells.append(f"<td>{v:.3f}</td>" if np.isfinite(v) else "<td>–</td>")
            body.append(f"<tr><td>{row['rank']}</td><td>{html.escape(row['curve'])}</td>{''.join(cells)}"
                        f"<td>{row['n_compared']}</td></tr>")
        note = f"; {html.escape(table.uncertainty_text(unit))}" if table.has_reference_uncertainty else ""
        return (f'<div style="font-size:85%">reference: {html.escape(table.reference)} ({table.chosen_by}); '
                f"region: {html.escape(table.region_text)}{note}</div>"
                '<table class="interkit-ranking-table" style="border-collapse:collapse;font-size:90%">'
                f"<thead><tr><th>rank</th><th>curve</th>{head}<th>points</th></tr></thead>"
                f"<tbody>{''.join(body)}</tbody></table>")

    def export(self, path: str | os.PathLike | None = None) -> str:
        """Write the ranking table (kcal/mol, angstrom) to CSV; return the path."""
        path = os.fspath(path) if path is not None else os.path.join(self.export_dir, "ranking.csv")
        folder = os.path.dirname(os.path.abspath(path))
        if not os.path.isdir(folder):
            self.message.value = error_html(f"export: folder {folder!r} does not exist")
            raise InputError(f"export: folder {folder!r} does not exist")
        shown = dataclasses.replace(self.table_data, rows=self.rows)   # the curves shown, in kcal/mol
        with open(path, "w", newline="", encoding="utf-8") as fh:
            csv.writer(fh).writerows(shown.csv_rows())
        self.message.value = note_html(f"wrote {path}")
        return path

    def shown_curves(self) -> list[str]:
        """Folded labels of the curves currently drawn (reference excluded)."""
        shown = set(self.curve_select.value)
        return [label for label, _ in compared_curves(flatten_dispersion(self.ds)) if label in shown]


def unavailable_pairs(ds: xr.Dataset) -> list[tuple[str, str, str]]:
    """(level, scheme, reason) of every pair of a dispersion comparison that has no
    values because the scheme is unavailable for the functional (``dispersion_status``)."""
    if "dispersion_status" not in ds.variables:
        return []
    out = []
    for level in ds["level"].values:
        for scheme in ds["dispersion"].values:
            status = str(ds["dispersion_status"].sel(level=level, dispersion=scheme).values)
            if status.startswith("unavailable"):
                out.append((str(level), str(scheme), status.partition(":")[2].strip() or status))
    return out


def unavailable_html(ds: xr.Dataset) -> str:
    """A short list of the pairs missing from the comparison, and why ('' when none)."""
    from ..model.level_names import DISPERSION_LABELS, display_label

    pairs = unavailable_pairs(ds)
    if not pairs:
        return ""
    items = "".join(f'<li data-level="{html.escape(lv)}" data-dispersion="{html.escape(sc)}">'
                    f"{html.escape(display_label(lv))} with {html.escape(DISPERSION_LABELS.get(sc, sc))}: "
                    f"{html.escape(why)}</li>" for lv, sc, why in pairs)
    return (f'<div style="font-size:88%;color:#5a4a00"><b>Not in the comparison</b> ({len(pairs)} '
            f'pair(s) without values):<ul style="margin:2px 0">{items}</ul></div>')
