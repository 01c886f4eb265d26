"""MapExplorer: the map of a two-axis orientation scan beside the 3D geometry of a cell.

Click a cell of the map (with ipympl) or choose the two axis values in the drop-downs:
the 3D view shows that cell's geometry (frame = the flat point number) and the readout
its numbers. The widget reads the Dataset only (a file from :func:`interkit.save_grid`
is enough) and computes nothing.
"""

from __future__ import annotations

import html
import os

import ipywidgets as widgets
import numpy as np
import xarray as xr
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from ..analysis.grid_minima import axis_names, grid_minimum
from ..data.grid import check_grid, open_grid
from ..errors import InputError
from ..plot.maps import plot_map
from .curves import ipympl_available
from .viewer3d import Molecule3D, scene_from_arrays

SELECTED_GID = "selected-cell"


class MapExplorer(widgets.VBox):
    """A two-axis orientation scan: heat map, selected cell, its geometry and numbers.

    Parameters
    ----------
    ds : xarray.Dataset or path
        An orientation-grid Dataset with two axes (or its netCDF file).
    level : str, optional
        Level shown (may be omitted with one level).
    interactive : bool, optional
        An ipympl canvas that answers clicks (default: when ipympl is installed), else
        a PNG image and the drop-downs only.

    Attributes
    ----------
    cell : tuple of int
        Indices ``(i, j)`` of the selected cell along the first and second axis.
    """

    def __init__(self, ds: xr.Dataset | str | os.PathLike, level: str | None = None,
                 interactive: bool | None = None):
        if isinstance(ds, (str, os.PathLike)):
            ds = open_grid(ds)
        check_grid(ds)
        self.names = axis_names(ds)
        if len(self.names) != 2:
            raise InputError(f"grid: the map explorer needs two axes, the Dataset has {len(self.names)}")
        self.ds = ds
        levels = [str(x) for x in ds["level"].values]
        self.level = level if level is not None else levels[0]
        if self.level not in levels:
            raise InputError(f"level: {self.level!r} is not one of {', '.join(levels)}")
        self.values = [ds[name].values for name in self.names]
        self.units = [ds[name].attrs.get("units", "") for name in self.names]
        self.interactive = ipympl_available() if interactive is None else bool(interactive)
        self.figure = Figure(figsize=(5.6, 4.2), dpi=90, layout="constrained")
        if self.interactive:
            from .mpl_canvas import FastCanvas, FigureManager

            self.canvas = FastCanvas(self.figure)
            self.manager = FigureManager(self.canvas, 0)
            self.canvas.header_visible = False
            self.canvas.footer_visible = False
            self.canvas.resizable = False
            self.canvas.syncing_data_url = False
            self.image = None
            shown = self.canvas
        else:
            self.canvas = FigureCanvasAgg(self.figure)
            self.image = widgets.Image(format="png")
            shown = self.image
        self.ax = self.figure.add_subplot()
        plot_map(ds, level=self.level, ax=self.ax, dispersion=self._dispersion())
        (self._marker,) = self.ax.plot([], [], ls="none", marker="s", ms=12, mfc="none", mec="#D55E00",
                                       mew=2, gid=SELECTED_GID)
        self.canvas.mpl_connect("button_press_event", self._on_click)
        self.pickers = [widgets.Dropdown(options=[(f"{v:g}", k) for k, v in enumerate(vals)], value=0,
                                         description=name, layout=widgets.Layout(width="220px"))
                        for name, vals in zip(self.names, self.values)]
        for p in self.pickers:
            p.observe(self._on_pick, names="value")
        coords, anchors = ds["coordinates"].values, ds["anchors"].values if "anchors" in ds.variables else None
        n1, n2 = len(self.values[0]), len(self.values[1])
        self.view3d = Molecule3D([scene_from_arrays(ds["symbol"].values, ds["fragment"].values, coords[i, j],
                                                    None if anchors is None else anchors[i, j], None,
                                                    self._cell_text(i, j))
                                  for i in range(n1) for j in range(n2)])
        self.readout = widgets.HTML()
        self.readout.add_class("interkit-map-readout")
        super().__init__(children=[widgets.HBox([shown, self.view3d]), widgets.HBox(self.pickers), self.readout])
        self.add_class("interkit-map-explorer")
        low = grid_minimum(ds, self.level, dispersion=self._dispersion())
        self.cell, self._syncing = (0, 0), False
        self.select(int(np.flatnonzero(self.values[0] == low[self.names[0]])[0]),
                    int(np.flatnonzero(self.values[1] == low[self.names[1]])[0]))

    def _dispersion(self):
        return str(self.ds["dispersion"].values[0]) if "dispersion" in self.ds["e_int"].dims else None

    def _cell_text(self, i: int, j: int) -> str:
        return ", ".join(f"{n} = {v[k]:g} {u}" for n, v, u, k in zip(self.names, self.values, self.units, (i, j)))

    def cell_at(self, x: float, y: float) -> tuple[int, int]:
        """The cell nearest to map position ``(x, y)`` (first axis along x)."""
        return int(np.argmin(np.abs(self.values[0] - x))), int(np.argmin(np.abs(self.values[1] - y)))

    def numbers(self) -> dict:
        """Values of the selected cell: axis values, energies (kcal/mol), status, point."""
        i, j = self.cell
        sel = {self.names[0]: i, self.names[1]: j}
        out = {n: float(v[k]) for n, v, k in zip(self.names, self.values, self.cell)}
        for name in ("e_int", "e_int_nocp", "bsse"):
            da = self.ds[name].sel(level=self.level).isel(sel)
            if "dispersion" in da.dims:
                da = da.sel(dispersion=self._dispersion())
            out[name] = float(da.values)
        out["status"] = str(self.ds["status"].sel(level=self.level).isel(sel).values)
        out["point"] = int(self.ds["point"].isel(sel).values)
        return out

    def select(self, i: int, j: int) -> None:
        """Select cell ``(i, j)``: marker, drop-downs, 3D frame and readout follow."""
        self.cell = (int(i), int(j))
        self._syncing = True
        try:
            for p, k in zip(self.pickers, self.cell):
                p.value = k
        finally:
            self._syncing = False
        nums = self.numbers()
        self.view3d.show_frame(nums["point"])
        self._marker.set_data([self.values[0][i]], [self.values[1][j]])
        rows = "".join(f"<tr><td>{html.escape(k)}</td><td>{v:.4f} kcal/mol</td></tr>"
                       for k, v in nums.items() if k.startswith(("e_int", "bsse")))
        self.readout.value = (f"<div><b>{html.escape(self._cell_text(i, j))}</b> (point {nums['point']}, "
                              f"{html.escape(nums['status'])})<table>{rows}</table></div>")
        self._refresh()

    def _refresh(self) -> None:
        if self.image is not None:
            import io

            buf = io.BytesIO()
            self.figure.savefig(buf, format="png", dpi=90)
            self.image.value = buf.getvalue()
        else:
            self.canvas.draw_idle()

    def _on_click(self, event) -> None:
        if event.inaxes is not self.ax or event.xdata is None or event.ydata is None:
            return
        self.select(*self.cell_at(event.xdata, event.ydata))

    def _on_pick(self, _change) -> None:
        want = tuple(p.value for p in self.pickers)
        if not self._syncing and want != self.cell:
            self.select(*want)
