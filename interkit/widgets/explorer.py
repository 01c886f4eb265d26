"""ScanExplorer: a scan Dataset beside its 3D geometry, point by point.

The explorer reads the Dataset only (a scan reopened from a ``.nc`` file is enough)
and never computes anything.
"""

from __future__ import annotations

import html
import os

import ipywidgets as widgets
import numpy as np
import traitlets
import xarray as xr

from ..analysis.minima import headline_table
from ..data.dispersion import flatten_dispersion
from ..data.schema import open_scan, validate
from ..errors import InterkitError
from ..model.level_names import display_label
from ..plot.style import level_colour
from ..units import FORCE_UNITS, MATCHING_FORCE_UNIT, convert_energy, convert_force, unit_text
from .curves import CurvePanel, component_figure
from .density_panel import DensityPanel
from .exports import EXPORT_SUFFIXES, write_csv, write_netcdf, write_report_file, write_shared
from .forces_panel import ForcePanel, force_arrows, scale_legend
from .headline import headline_html
from .style import DISPLAY_UNITS, FRAGMENT_COLOURS, SCAN_LINE_COLOUR, error_html, note_html
from .viewer3d import Molecule3D, scene_from_arrays

ALL_LEVELS = "all levels"
COMPONENTS = ("e_elst", "e_exch", "e_ind", "e_disp")
COMPONENT_LABELS = {"e_elst": "electrostatics", "e_exch": "exchange", "e_ind": "induction",
                    "e_disp": "dispersion"}


def _fmt(value: float, unit: str) -> str:
    if not np.isfinite(value):
        return "—"
    digits = 1 if unit == "cm-1" else (4 if unit == "eV" else 3)
    return f"{value:.{digits}f} {unit}"


def curve_variable_options(ds: xr.Dataset) -> list[tuple[str, str]]:
    """(label, variable) of the curves the explorer can draw: the default (``''``, the
    counterpoise-corrected curve or the uncorrected one of a scan without counterpoise),
    and with counterpoise the half-counterpoise and uncorrected curves it has."""
    from ..analysis.basis_uncertainty import CURVE_VARIABLES

    if ds.attrs.get("counterpoise", "") == "none":
        return [("uncorrected", "")]
    out = [("counterpoise-corrected", "")]
    for name in ("e_int_halfcp", "e_int_nocp"):
        if name in ds.variables:
            out.append((CURVE_VARIABLES[name], name))
    return out


class ScanExplorer(widgets.VBox):
    """Explore a counterpoise-corrected interaction-energy scan.

    Parameters
    ----------
    ds : xarray.Dataset or path-like
        A scan Dataset (see :mod:`interkit.data.schema`) or the path of a ``.nc`` file
        written by :func:`interkit.save_scan`.
    unit : str
        Initial display unit (kcal/mol, kJ/mol, eV or cm-1).
    export_dir : path-like, optional
        Folder the export buttons write to (default: the working directory).
    cache : path-like, optional
        Result store with the scan's density matrices, for the deformation-density panel
        (:mod:`interkit.widgets.density_panel`; default ``.interkit-cache`` if present).

    Attributes
    ----------
    index : int
        Selected scan point (0-based, increasing distance).
    level : str
        ``"all levels"`` or one level label.
    unit : str
        Display unit of every energy shown.
    force_unit : str
        Display unit of every force shown (a key of :data:`interkit.units.FORCE_UNITS`);
        a change of ``unit`` sets the matching force unit.
    y_range : (float, float)
        Energy-axis range of the curve panel, in the display unit.
    show_uncorrected, show_bsse : bool
        Draw the uncorrected curve / the BSSE as well.
    variable : str
        The energy of the curve panel: ``'e_int'`` (counterpoise-corrected), or
        ``'e_int_halfcp'`` (half-counterpoise) / ``'e_int_nocp'`` (uncorrected) when the
        scan has them (control "curve"); ``''`` = the default of
        :func:`interkit.plot.curves.plot_curves`.
    """

    index = traitlets.Int(0)
    level = traitlets.Unicode(ALL_LEVELS)
    unit = traitlets.Unicode("kcal/mol")
    force_unit = traitlets.Unicode("kcal/mol/angstrom")
    show_uncorrected = traitlets.Bool(False)
    show_bsse = traitlets.Bool(False)
    variable = traitlets.Unicode("")

    def __init__(self, ds: xr.Dataset | str | os.PathLike, unit: str = "kcal/mol",
                 export_dir: str | os.PathLike | None = None, cache: str | os.PathLike | None = None):
        if isinstance(ds, (str, os.PathLike)):
            ds = open_scan(ds)
        validate(ds)
        #: the Dataset as given: the netCDF, report and JSON/tidy CSV exports write it whole
        self.source = ds
        # the explorer draws one curve per level: schemes of a dispersion comparison
        # become levels of their own (see CorrectionComparison for the comparison view)
        ds = flatten_dispersion(ds)
        self.ds = ds
        self.distances = ds["distance"].values
        self.levels = [str(x) for x in ds["level"].values]
        n = self.distances.size
        # ---------------------------------------------------------------- controls
        self.slider = widgets.IntSlider(value=0, min=0, max=max(n - 1, 0), step=1, description="point",
                                        readout=False, continuous_update=True,
                                        layout=widgets.Layout(width="340px"))
        self.slider.add_class("interkit-point-slider")
        self.point_label = widgets.HTML()
        self.point_label.add_class("interkit-point-label")
        self.level_select = widgets.Dropdown(options=[ALL_LEVELS] + self.levels, value=ALL_LEVELS,
                                             description="level", layout=widgets.Layout(width="300px"))
        self.unit_select = widgets.ToggleButtons(options=list(DISPLAY_UNITS), value="kcal/mol",
                                                 description="unit",
                                                 style={"button_width": "72px"})
        self.uncorrected_box = widgets.Checkbox(value=False, description="uncorrected curve", indent=False)
        self.bsse_box = widgets.Checkbox(value=False, description="BSSE", indent=False)
        if ds.attrs.get("counterpoise") == "none":
            self.bsse_box.disabled = True
            self.bsse_box.tooltip = "no counterpoise calculations in this scan"
        self.variable_select = widgets.Dropdown(options=curve_variable_options(ds), value="",
                                                description="curve", layout=widgets.Layout(width="300px"),
                                                tooltip="the interaction energy drawn")
        self.variable_select.add_class("interkit-curve-variable")
        self.variable_select.layout.display = None if len(self.variable_select.options) > 1 else "none"
        self.force_unit_select = widgets.Dropdown(options=list(FORCE_UNITS), value="kcal/mol/angstrom",
                                                  description="force unit", layout=widgets.Layout(width="260px"))
        self.force_unit_select.add_class("interkit-force-unit")
        self.level_select.options = [(ALL_LEVELS, ALL_LEVELS)] + [(display_label(lv), lv) for lv in self.levels]
        for name, control in (("index", self.slider), ("level", self.level_select),
                              ("unit", self.unit_select), ("show_uncorrected", self.uncorrected_box),
                              ("show_bsse", self.bsse_box), ("force_unit", self.force_unit_select),
                              ("variable", self.variable_select)):
            widgets.link((self, name), (control, "value"))
        # y range of the energy panel: the well by default, the repulsive wall on request
        self.wall_box = widgets.Checkbox(value=False, description="show repulsive wall", indent=False)
        self.wall_box.add_class("interkit-wall")
        self.y_range = widgets.FloatRangeSlider(value=(-1.0, 1.0), min=-1.0, max=1.0, step=0.01,
                                                description="y range", continuous_update=False,
                                                readout_format=".3g", layout=widgets.Layout(width="420px"))
        self.y_range.add_class("interkit-y-range")
        self.headline = widgets.HTML()
        self.headline.add_class("interkit-headline")
        self._headline_rows = headline_table(ds)
        # ---------------------------------------------------------------- views
        self.curves = CurvePanel(ds)
        self._syncing_range = False
        self.has_forces = "forces" in ds.variables and "force_along" in ds.variables
        self.arrow_mode = widgets.ToggleButtons(options=["atoms", "fragments", "off"], value="atoms",
                                                description="arrows", style={"button_width": "80px"},
                                                tooltip="force arrows in the 3D view")
        self.arrow_legend = widgets.HTML()
        self.force_panel = ForcePanel(ds, height=3.3) if self.has_forces else None
        self.view3d = Molecule3D(self.scenes(), frame=0)
        self.readout = widgets.HTML()
        self.readout.add_class("interkit-readout")
        self.components = widgets.VBox()   # slot: energy components (e_elst, e_exch, ...)
        self.components.add_class("interkit-components")
        self._component_image = widgets.Image(format="png")
        self._component_note = widgets.HTML(note_html(
            "Energy components (electrostatics, exchange, induction, dispersion): not part of this scan."))
        # plain arrays for fast point updates (level, distance), kcal/mol
        self._kcal = {name: np.asarray(ds[name].transpose("level", "distance").values, dtype=float)
                      for name in ("e_int", "e_int_nocp", "bsse")}
        self._status = np.asarray(ds["status"].transpose("level", "distance").values).astype(str)
        self._detail = (np.asarray(ds["status_detail"].transpose("level", "distance").values).astype(str)
                        if "status_detail" in ds.variables else np.full(self._status.shape, ""))
        # ---------------------------------------------------------------- export
        self.export_dir = widgets.Text(value=os.fspath(export_dir) if export_dir else os.getcwd(),
                                       description="folder", layout=widgets.Layout(width="360px"))
        self.export_stem = widgets.Text(value=self._default_stem(), description="name",
                                        layout=widgets.Layout(width="240px"))
        self.export_buttons = {}
        for kind, tip in (("netCDF", "the whole Dataset (.nc), reopen with interkit.open_scan"),
                          ("CSV", "energies and forces in the selected units (.csv)"),
                          ("PNG", "the curve plot (.png)"), ("SVG", "the curve plot (.svg)"),
                          ("report", "self-contained HTML report (.html): figures inline, opens offline"),
                          ("JSON", "every variable and one QCSchema molecule per point (.json)"),
                          ("tidy CSV", "one row per value, energies in the selected unit (-tidy.csv)")):
            b = widgets.Button(description=f"save {kind}", tooltip=tip, layout=widgets.Layout(width="120px"))
            b.add_class("interkit-export-" + kind.lower().replace(" ", "-"))
            b.on_click(lambda _b, kind=kind: self._export_clicked(kind))
            self.export_buttons[kind] = b
        self.export_status = widgets.HTML()
        # ---------------------------------------------------------------- layout
        legend = (f'<span style="color:{FRAGMENT_COLOURS["A"]}">■ fragment A</span> &nbsp; '
                  f'<span style="color:{FRAGMENT_COLOURS["B"]}">■ fragment B</span> &nbsp; '
                  f'<span style="color:{SCAN_LINE_COLOUR}">┄ {html.escape(self._coordinate_name())}</span>')
        header = widgets.HTML(self._header_html())
        left_parts = [self.view3d, widgets.HTML(f'<div style="font-size:90%">{legend}</div>')]
        right_parts = [self.curves.widget, self.curves.limits, widgets.HBox([self.y_range, self.wall_box])]
        if self.has_forces:
            self.arrow_mode.observe(self._on_arrow_mode, names="value")
            self._show_arrow_legend()
            left_parts += [self.arrow_mode, self.arrow_legend]
            right_parts.append(self.force_panel.widget)   # force slot: net force on B along the scan
        self.density = DensityPanel(self, cache)   # deformation density of the point (on demand)
        left_parts.append(self.density)
        right = widgets.VBox(right_parts + [self.components])
        left = widgets.VBox(left_parts)
        controls = widgets.VBox([
            widgets.HBox([self.slider, self.point_label]),
            widgets.HBox([self.level_select, self.uncorrected_box, self.bsse_box]),
            widgets.HBox([self.variable_select]),
            widgets.HBox([self.unit_select] + ([self.force_unit_select] if self.has_forces else [])),
        ])
        export_row = widgets.VBox([
            widgets.HBox([self.export_dir, self.export_stem]),
            widgets.HBox(list(self.export_buttons.values()), layout=widgets.Layout(flex_flow="row wrap")),
            self.export_status,
        ])
        caution = widgets.HTML(
            '<div class="interkit-caution" style="font-size:88%;color:#5a4a00;background:#fffae6;'
            'padding:5px 9px;border-radius:3px">Caution: '
            f'{html.escape(ds.attrs.get("caution", ""))}</div>')
        super().__init__(children=[header, self.headline, widgets.HBox([left, right]), controls, self.readout,
                                   export_row, caution])
        self.add_class("interkit-explorer")
        self.y_range.observe(self._on_y_range, names="value")
        self.wall_box.observe(lambda _c: self._reset_y_range(), names="value")
        self._redraw_curves()
        self._reset_y_range()
        self._update_point()
        self._update_components()

    # ------------------------------------------------------------------ data views
    def _coordinate_name(self) -> str:
        return str(self.ds["distance"].attrs.get("long_name", "scan coordinate"))

    def _default_stem(self) -> str:
        title = str(self.ds.attrs.get("title", "scan")).split(":")[-1].strip() or "scan"
        return "".join(c if c.isalnum() or c in "-_" else "-" for c in title)[:60] or "scan"

    def _header_html(self) -> str:
        ds = self.ds
        r = self.distances
        span = f"{r.min():.3f}–{r.max():.3f} Å" if r.size else "no points"
        return (f'<div style="font-weight:600">{html.escape(str(ds.attrs.get("title", "scan")))}</div>'
                f'<div style="font-size:90%;color:#444">{len(self.levels)} level(s) · {r.size} points, '
                f'{html.escape(self._coordinate_name())} {span} · counterpoise: '
                f'{html.escape(str(ds.attrs.get("counterpoise", "?")))}</div>')

    @property
    def shown_levels(self) -> list[str]:
        """Levels drawn in the curve panel."""
        return list(self.levels) if self.level == ALL_LEVELS else [self.level]

    @property
    def selected_distance(self) -> float:
        """Scan coordinate value (angstrom) of the selected point."""
        return float(self.distances[self.index])

    @property
    def marker_positions(self) -> dict[str, tuple[float, float]]:
        """Level -> (distance in angstrom, energy in the display unit) of each marker."""
        return dict(self.curves.marker_xy)

    def energies(self, level: str, index: int | None = None) -> dict[str, float]:
        """e_int, e_int_nocp and bsse of one level at a point, in the display unit."""
        i = self.index if index is None else index
        li = self.levels.index(level)
        return {name: float(convert_energy(float(arr[li, i]), "kcal/mol", self.unit))
                for name, arr in self._kcal.items()}

    def _force_level(self) -> str:
        return self.levels[0] if self.level == ALL_LEVELS else self.level

    def scenes(self) -> list[dict]:
        """One 3D scene per scan point (force arrows of the selected level, if any)."""
        return [self.scene(i) for i in range(self.distances.size)]

    def scene(self, index: int) -> dict:
        """The 3D scene of point ``index`` (fragments, scan line, force arrows if any)."""
        ds = self.ds
        coords = ds["coordinates"].values[index]
        anchors = ds["anchors"].values[index] if "anchors" in ds.variables else None
        arrows = None
        if getattr(self, "has_forces", False):
            arrows = force_arrows(ds, self._force_level(), index, self.arrow_mode.value)
        label = f"{self.distances[index]:.3f} Å"
        return scene_from_arrays(ds["symbol"].values, ds["fragment"].values, coords, anchors, arrows, label)

    # ------------------------------------------------------------------ observers
    @traitlets.observe("index")
    def _on_index(self, change) -> None:
        if not hasattr(self, "curves"):
            return
        self.view3d.show_frame(self.index)      # first: the page draws while the kernel goes on
        self._update_point()
        self.curves.move_marker(self.index)
        if self.force_panel is not None:
            self.force_panel.move_marker(self.index)
        self._update_components()

    @traitlets.observe("level", "unit", "show_uncorrected", "show_bsse", "force_unit", "variable")
    def _on_view_change(self, change) -> None:
        if not hasattr(self, "curves"):
            return
        if change["name"] == "unit" and change["new"] not in DISPLAY_UNITS:
            raise traitlets.TraitError(f"unit: {change['new']!r} is not one of {', '.join(DISPLAY_UNITS)}")
        if change["name"] == "variable" and change["new"] not in dict(curve_variable_options(self.ds)).values():
            raise traitlets.TraitError(f"variable: {change['new']!r} is not a curve of this scan")
        if change["name"] == "force_unit" and change["new"] not in FORCE_UNITS:
            raise traitlets.TraitError(f"force_unit: {change['new']!r} is not one of {', '.join(FORCE_UNITS)}")
        if change["name"] == "unit" and self.force_unit != MATCHING_FORCE_UNIT[self.unit]:
            self.force_unit = MATCHING_FORCE_UNIT[self.unit]   # redraws the force panel
        if change["name"] == "force_unit":
            if self.force_panel is not None:
                self.force_panel.redraw(self.shown_levels, self.force_unit, False, False, self.index)
                self._show_arrow_legend()
            self._update_point()
            return
        self._redraw_curves()
        self._reset_y_range()
        self._update_point()
        self._update_components()
        if change["name"] == "level" and "forces" in self.ds.variables:
            self._show_arrow_legend()
            self.view3d.set_frames(self.scenes(), self.index)

    def _redraw_curves(self) -> None:
        self.curves.redraw(self.shown_levels, self.unit, self.show_uncorrected, self.show_bsse, self.index,
                           variable=self.variable or None)
        if self.force_panel is not None:
            self.force_panel.redraw(self.shown_levels, self.force_unit, False, False, self.index)
        self.headline.value = headline_html(self._headline_rows, self.unit, self.levels, self.shown_levels)

    def _reset_y_range(self) -> None:
        """Bounds of the y-range control from the drawn values; its value: the well, or
        every value with "show repulsive wall"."""
        full = self.curves.value_range()
        well = tuple(self.curves.ax.get_ylim()) if self.curves.ylim is None else None
        if full is None:
            return
        lo = min(full[0], well[0]) if well else full[0]
        hi = max(full[1], well[1]) if well else full[1]
        self._syncing_range = True
        try:
            self.y_range.min, self.y_range.max = -1e300, 1e300   # widen first: min must stay <= max
            self.y_range.min, self.y_range.max = lo, hi
            self.y_range.step = (hi - lo) / 500
            self.y_range.value = full if (self.wall_box.value or well is None) else well
        finally:
            self._syncing_range = False
        self.curves.set_ylim(*self.y_range.value)

    def _on_y_range(self, change) -> None:
        if not self._syncing_range:
            self.curves.set_ylim(*change["new"])

    def _show_arrow_legend(self) -> None:
        text = scale_legend(self.arrow_mode.value, self._force_level(), self.force_unit)
        if self.level == ALL_LEVELS and len(self.levels) > 1 and self.arrow_mode.value != "off":
            text += " (pick a level to see its arrows)"
        self.arrow_legend.value = f'<div class="interkit-arrow-legend" style="font-size:85%;color:#444">' \
                                  f"{html.escape(text)}</div>"

    def _on_arrow_mode(self, change) -> None:
        self._show_arrow_legend()
        self.view3d.set_frames(self.scenes(), self.index)

    def _update_point(self) -> None:
        i, ds = self.index, self.ds
        factor = float(ds["factor"].values[i]) if "factor" in ds.coords else float("nan")
        self.point_label.value = (f'<span data-index="{i}">{self.distances[i]:.3f} Å'
                                  + (f" (× {factor:.3f} of the start)" if np.isfinite(factor) else "")
                                  + f" · point {i} (numbered from 0, of 0–{self.distances.size - 1})</span>")
        has_force = "force_along" in ds.variables
        head = ["level", "interaction energy", "uncorrected", "BSSE"] + (
            [f"force along / {html.escape(unit_text(self.force_unit))}"] if has_force else [])
        head.append("status")
        rows = []
        for k, level in enumerate(self.levels):
            if level not in self.shown_levels:
                continue
            e = self.energies(level)
            status, detail = str(self._status[k, i]), str(self._detail[k, i])
            cells = [f'<span style="color:{level_colour(k)};font-weight:600">{html.escape(display_label(level))}</span>',
                     _fmt(e["e_int"], self.unit), _fmt(e["e_int_nocp"], self.unit), _fmt(e["bsse"], self.unit)]
            if has_force:
                fa = convert_force(float(ds["force_along"].sel(level=level).values[i]),
                                   ds["force_along"].attrs.get("units", "kcal/mol/angstrom"), self.force_unit)
                cells.append(f'<span class="interkit-force-value">{_fmt(fa, unit_text(self.force_unit))}</span>')
            cells.append(html.escape(status + (f": {detail}" if detail and status != "ok" else "")))
            rows.append("<tr>" + "".join(f'<td style="padding:1px 10px">{c}</td>' for c in cells) + "</tr>")
        th = "".join(f'<th style="text-align:left;padding:1px 10px">{h}</th>' for h in head)
        self.readout.value = (f'<table style="font-size:92%"><tr>{th}</tr>{"".join(rows)}</table>'
                              f'<div style="font-size:85%;color:#555">at {self.distances[i]:.3f} Å; '
                              "negative = bound</div>")

    def _update_components(self) -> None:
        """Stacked bars of the energy components at the selected point, when the
        Dataset has them (SAPT0: one set per point, shared by every level)."""
        ds = self.ds
        if not all(name in ds.variables for name in COMPONENTS):
            if self.components.children != (self._component_note,):
                self.components.children = [self._component_note]
            return
        level = self._force_level()
        values, total = {}, None
        for name in COMPONENTS + ("e_sapt0",):
            if name not in ds.variables:
                continue
            var = ds[name].sel(level=level) if "level" in ds[name].dims else ds[name]
            v = float(convert_energy(float(var.values[self.index]), "kcal/mol", self.unit))
            if name == "e_sapt0":
                total = v
            else:
                values[COMPONENT_LABELS[name]] = v
        shared = "level" not in ds[COMPONENTS[0]].dims
        where = (f"SAPT0/{ds.attrs.get('decomposition_basis', '?')}" if shared else level)
        self._component_image.value = component_figure(
            values, self.unit, f"{where}, {self.distances[self.index]:.3f} Å", total=total)
        self.components.children = [self._component_image]

    # ------------------------------------------------------------------ exports
    def export_netcdf(self, path: str | os.PathLike) -> str:
        """Write the Dataset to ``path`` (netCDF); return the path."""
        return write_netcdf(self.source, path)

    def export_csv(self, path: str | os.PathLike) -> str:
        """Write the curves in the display units (energy and force) to ``path`` (CSV); return the path."""
        return write_csv(self.ds, path, unit=self.unit, force_unit=self.force_unit)

    def export_figure(self, path: str | os.PathLike) -> str:
        """Write the curve plot as shown (PNG or SVG by extension); return the path."""
        path = os.fspath(path)
        if os.path.splitext(path)[1].lower() not in (".png", ".svg"):
            raise InterkitError(f"export: {path!r} must end in .png or .svg")
        self.curves.save(path)
        return path

    def export_report(self, path: str | os.PathLike) -> str:
        """Write the self-contained HTML report (:func:`interkit.write_report`); return the path."""
        return write_report_file(self.source, path, self.unit, self.force_unit)

    def export_json(self, path: str | os.PathLike) -> str:
        """Write the JSON export with QCSchema molecules (energies in kcal/mol); return the path."""
        return write_shared(self.source, path, "json")

    def export_tidy_csv(self, path: str | os.PathLike) -> str:
        """Write the tidy CSV (one row per value, energies in the display unit); return the path."""
        return write_shared(self.source, path, "csv", unit=self.unit, force_unit=self.force_unit)

    def _export_clicked(self, kind: str) -> None:
        stem = os.path.join(self.export_dir.value.strip() or ".", self.export_stem.value.strip() or "scan")
        path = stem + EXPORT_SUFFIXES[kind]
        writer = {"netCDF": self.export_netcdf, "CSV": self.export_csv, "report": self.export_report,
                  "JSON": self.export_json, "tidy CSV": self.export_tidy_csv}.get(kind, self.export_figure)
        self.export_status.value = note_html(f"writing {kind}...")
        try:
            written = writer(path)
        except (InterkitError, OSError) as exc:
            self.export_status.value = error_html(f"{kind} not written: {exc}")
            return
        except Exception as exc:  # a button must not raise into the notebook: show it
            self.export_status.value = error_html(f"{kind} not written: {type(exc).__name__}: {exc}")
            return
        size = os.path.getsize(written)
        self.export_status.value = note_html(f"wrote {os.path.abspath(written)} ({size / 1024:.1f} KiB)")
