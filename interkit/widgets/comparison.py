"""CorrectionComparison: which functional and dispersion correction follows a reference?

Pick the reference (a curve of the same scan, e.g. MP2 or CCSD(T), or an external curve
from CSV), choose the curves to show, and read the overlay, the error curves and the
ranking by RMSE; the ranking table can be written to CSV.
"""

from __future__ import annotations

import csv
import html
import io
import os

import ipywidgets as widgets
import numpy as np
import xarray as xr
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from ..analysis.comparison import (
    ReferenceCurve,
    curve_pairs,
    default_reference,
    ranking_table,
    reference_from_file,
)
from ..data.dispersion import flatten_dispersion, scheme_label
from ..data.schema import open_scan, validate
from ..errors import InputError, InterkitError
from ..model.levels import parse_level
from ..plot.comparison import compared_curves, plot_comparison
from ..units import convert_energy
from .style import DISPLAY_UNITS, error_html, note_html

#: ranking columns: (row key, header, is an energy)
TABLE_COLUMNS = (
    ("rmse_kcal_per_mol", "RMSE", True),
    ("mae_kcal_per_mol", "MAE", True),
    ("max_abs_error_kcal_per_mol", "max |error|", True),
    ("error_at_reference_minimum_kcal_per_mol", "error at ref. minimum", True),
    ("minimum_shift_angstrom", "minimum shift / Å", False),
    ("well_depth_error_kcal_per_mol", "well-depth error", True),
)
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

        for control in (self.reference_select, self.curve_select, self.unit_select):
            control.observe(lambda _change: self.refresh(), names="value")
        self.load_button.on_click(lambda _b: self._load_csv())
        self.export_button.on_click(lambda _b: self.export())
        super().__init__([
            widgets.HBox([self.reference_select, self.unit_select]),
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
            rows = ranking_table(self.ds, **args)
        except InterkitError as exc:
            self.message.value = error_html(str(exc))
            return
        self.rows = [dict(row, curve=self._row_label(row)) for row in rows]
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

    def _row_label(self, row: dict) -> str:
        scheme = row.get("dispersion")
        return scheme_label(parse_level(row["level"]), scheme) if scheme else row["level"]

    def _table_html(self, unit: str) -> str:
        head = "".join(f"<th>{html.escape(h if not energy else f'{h} / {unit}')}</th>"
                       for _, h, energy in TABLE_COLUMNS)
        body = []
        for row in self.rows:
            cells = []
            for key, _, energy in TABLE_COLUMNS:
                v = row.get(key, float("nan"))
                v = convert_energy(v, "kcal/mol", unit) if energy else v
                cells.append(f"<td>{v:.3f}</td>" if np.isfinite(v) else "<td>–</td>")
            body.append(f"<tr><td>{row['rank']}</td><td>{html.escape(row['curve'])}</td>{''.join(cells)}</tr>")
        return ('<table class="interkit-ranking-table" style="border-collapse:collapse;font-size:90%">'
                f"<thead><tr><th>rank</th><th>curve</th>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>")

    def export(self, path: str | os.PathLike | None = None) -> str:
        """Write the ranking table (kcal/mol, angstrom) to CSV; return the path."""
        path = os.fspath(path) if path is not None else os.path.join(self.export_dir, "ranking.csv")
        folder = os.path.dirname(os.path.abspath(path))
        if not os.path.isdir(folder):
            self.message.value = error_html(f"export: folder {folder!r} does not exist")
            raise InputError(f"export: folder {folder!r} does not exist")
        keys = ["rank", "curve", "level", "dispersion"] + [k for k, _, _ in TABLE_COLUMNS] + ["n_compared", "status"]
        with open(path, "w", newline="", encoding="utf-8") as fh:
            out = csv.writer(fh)
            out.writerow([f"# reference: {self.reference_select.value}"])
            out.writerow(keys)
            for row in self.rows:
                out.writerow([row.get(k, "") for k in keys])
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
