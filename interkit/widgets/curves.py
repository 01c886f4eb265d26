"""The energy-curve panel: interkit.plot.curves drawn by matplotlib, shown as a widget.

With ipympl (matplotlib's Jupyter widget backend) the panel is an interactive canvas:
its toolbar zooms and pans. Without it (or with ``interactive=False``) the figure is
drawn off-screen and shown as a PNG image. Either way the curves are drawn in full only
when the unit, the levels, the toggles or the y range change; moving the selected point
restores a saved background and draws only the marker artists on it (blitting), and
after a zoom or pan the background is saved again from that draw.
"""

from __future__ import annotations

import html
import io

import ipywidgets as widgets
import numpy as np
import xarray as xr
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from PIL import Image

from ..data.dispersion import flatten_dispersion
from ..plot.curves import curve_values, full_ylim, plot_curves
from ..plot.style import level_colour  # noqa: F401 (re-exported for the widgets)

MARKER_COLOUR = "#111111"


def shown_energy(ds: xr.Dataset, level: str, unit: str, variable: str | None = None) -> np.ndarray:
    """The curve drawn for ``level``: ``variable`` if given, else corrected energies, or
    uncorrected if no counterpoise was computed (as :func:`interkit.plot.curves.plot_curves`
    does), in ``unit``."""
    return curve_values(ds, level, unit, variable)[0]


def ipympl_available() -> bool:
    """True when matplotlib's Jupyter widget backend (ipympl) can be imported."""
    try:
        import ipympl.backend_nbagg  # noqa: F401
    except ImportError:
        return False
    return True


class CurvePanel:
    """Energy curves of a scan Dataset with a movable marker.

    Parameters
    ----------
    ds : xarray.Dataset
        A scan Dataset.
    width, height : float
        Figure size in inches (at 90 dpi on screen).
    interactive : bool, optional
        An ipympl canvas with zoom and pan (default: when ipympl is installed), else a
        PNG image.

    Attributes
    ----------
    widget : ipywidgets.DOMWidget
        What to show: the ipympl canvas or the image (CSS class ``interkit-curves``).
    limits : ipywidgets.HTML
        The axis ranges drawn last (``data-xlim``/``data-ylim`` attributes), updated
        after every full draw, a zoom or pan included.
    """

    #: CSS class of the shown widget
    css_class = "interkit-curves"

    def __init__(self, ds: xr.Dataset, width: float = 5.8, height: float = 3.9,
                 interactive: bool | None = None):
        self.ds = flatten_dispersion(ds)
        self.interactive = ipympl_available() if interactive is None else bool(interactive)
        self.figure = Figure(figsize=(width, height), dpi=90, layout="constrained")
        if self.interactive:
            from .mpl_canvas import FastCanvas, FigureManager

            self.canvas = FastCanvas(self.figure)
            self.manager = FigureManager(self.canvas, 0)
            self.canvas.header_visible = False
            self.canvas.footer_visible = False
            self.canvas.resizable = False
            self.canvas.toolbar_visible = True
            self.canvas.toolbar_position = "top"   # beside the axes it would hide the y label
            # ipympl keeps a pre-display draw as bare base64 that its page side cannot
            # load; the page asks for a full image once it is shown, so keep none
            self.canvas.syncing_data_url = False
            self.image = None
            self.widget = self.canvas
        else:
            self.canvas = FigureCanvasAgg(self.figure)
            self.image = widgets.Image(format="png", layout=widgets.Layout(width=f"{int(width * 90)}px"))
            self.widget = self.image
        self.widget.add_class(self.css_class)
        self.ax = self.figure.add_subplot()
        self.limits = widgets.HTML()
        self.limits.add_class(self.css_class.replace("curves", "curve") + "-limits")
        self._background = None
        self._markers = []
        self._guide = None
        self.levels: list[str] = []
        self.unit = "kcal/mol"
        #: the energy variable drawn (None: e_int, or e_int_nocp without counterpoise)
        self.variable: str | None = None
        self.ylim: tuple[float, float] | None = None
        self.marker_xy: dict[str, tuple[float, float]] = {}
        self._curves: dict[str, np.ndarray] = {}
        self.canvas.mpl_connect("draw_event", self._on_draw)

    def _draw(self, unit: str, show_uncorrected: bool, show_bsse: bool) -> None:
        """Draw the static curves of ``self.levels`` on ``self.ax``."""
        plot_curves(self.ds, ax=self.ax, unit=unit, show_uncorrected=show_uncorrected,
                    show_bsse=show_bsse, levels=self.levels, ylim=self.ylim, variable=self.variable)

    def _marked_values(self, level: str, unit: str) -> np.ndarray:
        """The values the marker of ``level`` follows, one per point."""
        return shown_energy(self.ds, level, unit, self.variable)

    def value_range(self) -> tuple[float, float] | None:
        """The y range that shows every marked value of the drawn levels (the wall included)."""
        values = [self._curves[lv] for lv in self.levels if lv in self._curves]
        return full_ylim(np.concatenate(values)) if values else None

    def redraw(self, levels, unit: str, show_uncorrected: bool, show_bsse: bool, index: int,
               ylim: tuple[float, float] | None = None, variable: str | None = None) -> None:
        """Draw the curves from scratch, then place the marker at point ``index``.

        ``ylim`` is the energy-axis range in ``unit`` (default: the range showing the well);
        ``variable`` the energy drawn (``e_int``, ``e_int_nocp`` or ``e_int_halfcp``;
        default as :func:`interkit.plot.curves.plot_curves`). A level with a basis-set
        uncertainty gets its shaded band.
        """
        self.levels, self.unit, self.ylim, self.variable = list(levels), unit, ylim, variable
        self.figure.set_layout_engine("constrained")
        self.ax.clear()
        self._draw(unit, show_uncorrected, show_bsse)
        self._guide = self.ax.axvline(np.nan, color=MARKER_COLOUR, lw=0.8, ls=(0, (2, 3)), zorder=1,
                                      animated=True)
        self._curves = {lv: self._marked_values(lv, unit) for lv in self.levels}
        self._markers = []
        for k, _level in enumerate(self.levels):
            (m,) = self.ax.plot([], [], marker="o", ms=11, mfc="none", mec=MARKER_COLOUR, mew=2.2,
                                ls="none", zorder=6, animated=True)
            m.set_gid(f"interkit-marker-{k}")
            self._markers.append(m)
        self._place(index)
        # lay out and draw once without the marker (the draw event saves the background);
        # marker moves then only blit the marker artists onto a copy of it
        self.canvas.draw()
        self.figure.set_layout_engine("none")
        toolbar = getattr(getattr(self, "manager", None), "toolbar", None)
        if toolbar is not None:
            toolbar.update()   # the zoom history belongs to the old curves
        self._show()

    def set_ylim(self, low: float, high: float) -> None:
        """Show the energy axis from ``low`` to ``high`` (display unit)."""
        if not (np.isfinite(low) and np.isfinite(high)) or high <= low:
            return
        self.ylim = (float(low), float(high))
        self.ax.set_ylim(low, high)
        self.canvas.draw()
        self._show()

    def _on_draw(self, event) -> None:
        """After a full draw (a redraw, a zoom or pan): save the background, draw the marker."""
        if getattr(event, "canvas", self.canvas) is not self.canvas:
            return   # savefig drawing on another canvas (SVG)
        self._background = self.canvas.copy_from_bbox(self.figure.bbox)
        for artist in [self._guide, *self._markers]:
            if artist is not None:
                self.ax.draw_artist(artist)
        x0, x1 = self.ax.get_xlim()
        y0, y1 = self.ax.get_ylim()
        self.limits.value = (f'<span data-xlim="{x0:.6g},{x1:.6g}" data-ylim="{y0:.6g},{y1:.6g}" '
                             f'style="font-size:80%;color:#666">shown: {x0:.3f}–{x1:.3f} Å, '
                             f"{y0:.4g} to {y1:.4g} {html.escape(self.unit)}</span>")

    def _place(self, index: int) -> None:
        r = self.ds["distance"].values
        x = float(r[index])
        self.marker_xy = {}
        for level, marker in zip(self.levels, self._markers):
            y = float(self._curves[level][index])
            marker.set_data([x], [y])
            self.marker_xy[level] = (x, y)
        if self._guide is not None:
            self._guide.set_xdata([x, x])

    def move_marker(self, index: int) -> None:
        """Move the selected-point marker to point ``index`` and refresh the view."""
        self._place(index)
        self._blit()
        self._show()

    def _blit(self) -> None:
        if self._background is None:
            return
        self.canvas.restore_region(self._background)
        for artist in [self._guide, *self._markers]:
            self.ax.draw_artist(artist)

    def _show(self) -> None:
        if self.interactive:
            self.canvas.blit(self.figure.bbox)   # sends the changed pixels to the page
        else:
            self.image.value = self._png_bytes()

    def _png_bytes(self) -> bytes:
        rgba = np.asarray(self.canvas.buffer_rgba())
        buf = io.BytesIO()
        Image.fromarray(rgba[..., :3]).save(buf, format="png", compress_level=1)
        return buf.getvalue()

    def png(self) -> bytes:
        """The current figure with its marker as PNG bytes (blitted, fast)."""
        self._blit()
        return self._png_bytes()

    def _set_animated(self, flag: bool) -> None:
        for artist in [self._guide, *self._markers]:
            if artist is not None:
                artist.set_animated(flag)

    def save(self, path: str, dpi: int = 150) -> None:
        """Write the current figure with its marker (format from the extension: .png or .svg)."""
        self._set_animated(False)
        try:
            self.figure.savefig(path, dpi=dpi)
        finally:
            # savefig at another dpi redraws the canvas: refresh the blit background
            self._set_animated(True)
            self.canvas.draw()
            self._show()


#: colours of stacked component bars (labels not listed fall back to grey)
COMPONENT_BAR_COLOURS = {"electrostatics": "#2b5d9e", "exchange": "#c2492d", "induction": "#3f8f5a",
                         "dispersion": "#8a5fb0"}


def component_figure(values: dict[str, float], unit: str, title: str, total: float | None = None) -> bytes:
    """Stacked bars of energy components at one point (PNG bytes).

    Attractive (negative) components stack downwards from zero, repulsive ones upwards,
    in one column; a second column shows their sum (or ``total`` when given).
    """
    fig = Figure(figsize=(3.9, 2.7), dpi=90, layout="constrained")
    ax = fig.add_subplot()
    up = down = 0.0
    finite = all(np.isfinite(v) for v in values.values())
    for name, v in values.items():
        if not np.isfinite(v):
            continue
        base = up if v >= 0 else down
        ax.bar(0, v, bottom=base, width=0.55, color=COMPONENT_BAR_COLOURS.get(name, "#9a9a9a"),
               edgecolor="white", lw=0.6, label=f"{name} {v:+.2f}")
        if v >= 0:
            up += v
        else:
            down += v
    net = total if total is not None else (up + down if finite else float("nan"))
    if np.isfinite(net):
        ax.bar(1, net, width=0.55, color="#1f1f1f", label=f"total {net:+.2f}")
    else:
        ax.text(0.5, 0.5, "no decomposition at this point", transform=ax.transAxes, ha="center",
                va="center", fontsize=8, color="#555555")
    ax.axhline(0.0, color="#777777", lw=0.8)
    ax.set_xticks([0, 1], ["components", "total"], fontsize=8)
    ax.set_xlim(-0.6, 2.9)
    ax.set_ylabel(f"energy / {unit}", fontsize=8)
    ax.tick_params(axis="y", labelsize=7)
    ax.set_title(title, fontsize=8.5)
    if ax.get_legend_handles_labels()[0]:
        ax.legend(loc="center right", fontsize=6.5, frameon=False, handlelength=1.0)
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    return buf.getvalue()
