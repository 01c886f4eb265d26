"""StudyExplorer: the ranking of a study's methods and its method x system error map.

Pick the reference, the points (every point or the equilibrium point) and the region;
read the ranking and the error map. Each row of the map is a system: click its name
(or any of its cells) to open today's :class:`~interkit.widgets.explorer.ScanExplorer`
on that system below the map. The widget computes nothing: it reads the study tree.
"""

from __future__ import annotations

import html
import os

import ipywidgets as widgets
import numpy as np
import xarray as xr

from ..analysis.study_stats import (
    POINTS,
    REGIONS,
    STORED,
    error_matrix,
    rank_methods,
    resolve_study_reference,
)
from ..data.study_tree import open_study, system_datasets, validate_study
from ..errors import InterkitError
from .style import error_html

_CELL = widgets.Layout(width="96px", height="28px")
_NAME = widgets.Layout(width="260px", height="28px")


def error_colour(value: float, limit: float) -> str:
    """Background colour of a map cell: blue when the method underbinds (error > 0), red
    when it overbinds (error < 0), white at zero, grey when nothing was compared."""
    if not np.isfinite(value) or limit <= 0:
        return "#e9ecef"
    t = min(1.0, abs(value) / limit)
    base = (33, 102, 172) if value > 0 else (178, 24, 43)
    r, g, b = (round(255 + t * (c - 255)) for c in base)
    return f"#{r:02x}{g:02x}{b:02x}"


class StudyExplorer(widgets.VBox):
    """Ranking and error map of a study; a click on a system opens its scan explorer.

    Parameters
    ----------
    tree : xarray.DataTree or path
        A study (:func:`interkit.run_study`) or its ``.nc`` file.
    reference : str, optional
        ``'stored'``, a level of the study, or a CSV file (default: the stored
        reference values if any, else the most accurate level).
    """

    def __init__(self, tree: xr.DataTree | str | os.PathLike, reference: str | None = None):
        if isinstance(tree, (str, os.PathLike)):
            tree = open_study(tree)
        validate_study(tree)
        self.tree = tree
        self.datasets = system_datasets(tree)
        curves = [str(c) for c in tree["curve"].values]
        options = ([STORED] if "reference_e_int" in tree.variables else []) + curves
        try:
            chosen = resolve_study_reference(tree, reference)
        except InterkitError:
            chosen = options[0] if reference is None else str(reference)
        if chosen not in options:
            options.append(chosen)
        self.reference_select = widgets.Dropdown(options=options, description="reference", value=chosen,
                                                 layout=widgets.Layout(width="360px"))
        self.points_select = widgets.ToggleButtons(options=list(POINTS), value="equilibrium", description="points")
        self.region_select = widgets.Dropdown(options=list(REGIONS), value="all", description="region",
                                              layout=widgets.Layout(width="220px"))
        self.message = widgets.HTML()
        self.ranking = widgets.HTML()
        self.ranking.add_class("interkit-study-ranking")
        self.error_map = widgets.GridBox()
        self.error_map.add_class("interkit-study-map")
        self.detail = widgets.VBox()
        self.opened: str | None = None
        self.system_buttons: dict[str, widgets.Button] = {}
        for control in (self.reference_select, self.points_select, self.region_select):
            control.observe(lambda _change: self.refresh(), names="value")
        super().__init__([widgets.HBox([self.reference_select, self.region_select]), self.points_select,
                          self.message, self.ranking, self.error_map, self.detail])
        self.refresh()

    def refresh(self) -> None:
        """Recompute the ranking and the map from the tree for the chosen settings."""
        ref, points, region = self.reference_select.value, self.points_select.value, self.region_select.value
        try:
            ranking = rank_methods(self.tree, ref, region, points)
            matrix = error_matrix(self.tree, ref, region, points)
        except InterkitError as exc:
            self.message.value = error_html(str(exc))
            self.ranking.value = ""
            self.error_map.children = ()
            return
        self.message.value = ""
        self.ranking.value = _ranking_html(ranking)
        self._draw_map(matrix)

    def _draw_map(self, matrix) -> None:
        values = matrix.to_numpy(dtype=float)
        limit = float(np.nanmax(np.abs(values))) if np.isfinite(values).any() else 1.0
        cells: list[widgets.Widget] = [widgets.HTML("<b>system</b>", layout=_NAME)]
        cells += [widgets.HTML(f"<b>{html.escape(str(c))}</b>", layout=_CELL) for c in matrix.columns]
        self.system_buttons = {}
        for i, name in enumerate(matrix.index):
            button = widgets.Button(description=str(name), tooltip=f"open the scan explorer on {name}", layout=_NAME)
            button.on_click(lambda _b, n=str(name): self.open_system(n))
            self.system_buttons[str(name)] = button
            cells.append(button)
            for j, curve in enumerate(matrix.columns):
                v = values[i, j]
                cell = widgets.Button(description=f"{v:+.2f}" if np.isfinite(v) else "–", layout=_CELL,
                                      tooltip=f"{name}, {curve}: error {v:+.3f} kcal/mol" if np.isfinite(v) else "")
                cell.style.button_color = error_colour(v, limit)
                cell.on_click(lambda _b, n=str(name): self.open_system(n))
                cells.append(cell)
        self.error_map.layout = widgets.Layout(grid_template_columns=f"260px repeat({len(matrix.columns)}, 96px)",
                                               grid_gap="2px")
        self.error_map.children = tuple(cells)

    def open_system(self, name: str) -> None:
        """Show the :class:`~interkit.widgets.explorer.ScanExplorer` of system ``name``."""
        from .explorer import ScanExplorer

        if name not in self.datasets:
            self.message.value = error_html(f"system: {name!r} has no results in this study")
            return
        self.opened = name
        self.detail.children = (widgets.HTML(f"<h4>{html.escape(name)}</h4>"), ScanExplorer(self.datasets[name]))


def _ranking_html(table) -> str:
    ref = table.attrs.get("reference", "")
    rows = "".join(
        f"<tr><td>{r['rank']}</td><td style='text-align:left'>{html.escape(str(r['curve']))}</td>"
        f"<td>{r['n_points']}</td><td>{r['mae_kcal_per_mol']:.3f}</td>"
        f"<td>{r['mean_signed_error_kcal_per_mol']:+.3f}</td><td>{r['rmse_kcal_per_mol']:.3f}</td>"
        f"<td>{r['max_error_kcal_per_mol']:+.3f}</td>"
        f"<td style='text-align:left'>{html.escape(str(r['max_error_system']))}</td></tr>"
        for _, r in table.iterrows())
    ref_text = "the stored reference values" if ref == STORED else html.escape(str(ref))
    return (f"<p>Ranking against {ref_text} (errors in kcal/mol, method − reference; negative = overbinds)</p>"
            "<table style='border-collapse:collapse'><thead><tr><th>#</th><th>method</th><th>n</th><th>MAE</th>"
            "<th>signed</th><th>RMSE</th><th>largest</th><th>where</th></tr></thead>"
            f"<tbody>{rows}</tbody></table>")
