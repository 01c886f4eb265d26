"""The energy-curve panel: interkit.plot.curves drawn off-screen, shown as an image widget.

The curves are drawn with :func:`interkit.plot.curves.plot_curves` whenever the unit, the
levels or the toggles change; moving the selected point only moves the marker
artists and re-encodes the image, which is about twice as fast as a full redraw.
"""

from __future__ import annotations

import io

import ipywidgets as widgets
import numpy as np
import xarray as xr
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from PIL import Image

from ..data.dispersion import flatten_dispersion
from ..plot.curves import LEVEL_COLOURS, plot_curves
from ..units import convert_energy

MARKER_COLOUR = "#111111"


def shown_energy(ds: xr.Dataset, level: str, unit: str) -> np.ndarray:
    """The curve drawn for ``level``: corrected energies, or uncorrected if no
    counterpoise was computed (as :func:`interkit.plot.curves.plot_curves` does), in ``unit``."""
    e = convert_energy(ds["e_int"].sel(level=level).values, "kcal/mol", unit)
    if np.all(np.isnan(e)):
        e = convert_energy(ds["e_int_nocp"].sel(level=level).values, "kcal/mol", unit)
    return e


class CurvePanel:
    """Energy curves of a scan Dataset with a movable marker, as PNG bytes.

    Parameters
    ----------
    ds : xarray.Dataset
        A scan Dataset.
    width, height : float
        Figure size in inches (at 90 dpi on screen).
    """

    def __init__(self, ds: xr.Dataset, width: float = 5.8, height: float = 3.9):
        self.ds = flatten_dispersion(ds)
        self.figure = Figure(figsize=(width, height), dpi=90, layout="constrained")
        self.canvas = FigureCanvasAgg(self.figure)
        self.ax = self.figure.add_subplot()
        self._background = None
        self.image = widgets.Image(format="png", layout=widgets.Layout(width=f"{int(width * 90)}px"))
        self.image.add_class("interkit-curves")
        self._markers = []
        self._guide = None
        self.levels: list[str] = []
        self.unit = "kcal/mol"
        self.marker_xy: dict[str, tuple[float, float]] = {}
        self._curves: dict[str, np.ndarray] = {}

    def _draw(self, unit: str, show_uncorrected: bool, show_bsse: bool) -> None:
        """Draw the static curves of ``self.levels`` on ``self.ax``."""
        plot_curves(self.ds, ax=self.ax, unit=unit, show_uncorrected=show_uncorrected,
                    show_bsse=show_bsse, levels=self.levels)

    def _marked_values(self, level: str, unit: str) -> np.ndarray:
        """The values the marker of ``level`` follows, one per point."""
        return shown_energy(self.ds, level, unit)

    def redraw(self, levels, unit: str, show_uncorrected: bool, show_bsse: bool, index: int) -> None:
        """Draw the curves from scratch, then place the marker at point ``index``."""
        self.levels, self.unit = list(levels), unit
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
        # lay out and draw once without the marker; marker moves then only blit the
        # marker artists onto a copy of that background (a few milliseconds)
        self.canvas.draw()
        self.figure.set_layout_engine("none")
        self._background = self.canvas.copy_from_bbox(self.figure.bbox)
        self.move_marker(index)

    def move_marker(self, index: int) -> None:
        """Move the selected-point marker to point ``index`` and refresh the image."""
        r = self.ds["distance"].values
        x = float(r[index])
        self.marker_xy = {}
        for level, marker in zip(self.levels, self._markers):
            y = float(self._curves[level][index])
            marker.set_data([x], [y])
            self.marker_xy[level] = (x, y)
        if self._guide is not None:
            self._guide.set_xdata([x, x])
        self.image.value = self.png()

    def png(self) -> bytes:
        """The current figure with its marker as PNG bytes (blitted, fast)."""
        self.canvas.restore_region(self._background)
        for artist in [self._guide, *self._markers]:
            self.ax.draw_artist(artist)
        rgba = np.asarray(self.canvas.buffer_rgba())
        buf = io.BytesIO()
        Image.fromarray(rgba[..., :3]).save(buf, format="png", compress_level=1)
        return buf.getvalue()

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
            self._set_animated(True)
            # savefig at another dpi redraws the canvas: refresh the blit background
            self._set_animated(True)
            self.canvas.draw()
            self._background = self.canvas.copy_from_bbox(self.figure.bbox)


def level_colour(k: int) -> str:
    """Colour of the k-th level (same palette as :mod:`interkit.plot.curves`)."""
    return LEVEL_COLOURS[k % len(LEVEL_COLOURS)]


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
