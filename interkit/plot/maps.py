"""Maps of two-axis orientation scans (Dataset in, Axes out): a heat map with contour
lines of the interaction energy, the grid minimum and the minimum-energy path; and the
curve of a one-axis scan (:func:`plot_grid_line`)."""

from __future__ import annotations

import numpy as np
import xarray as xr

from ..analysis.grid_minima import axis_names, grid_energies, grid_minimum, minimum_energy_path
from ..errors import InputError
from ..units import convert_energy
from .style import MINIMUM_MARKER, energy_axis_label, legend_label, level_style

#: gid of the artists a test or a widget looks up
MINIMUM_GID = "grid-minimum"
PATH_GID = "minimum-energy-path"


def _axis_label(ds: xr.Dataset, name: str) -> str:
    units = ds[name].attrs.get("units", "")
    return f"{name} / {units}" if units and units != "1" else name


def plot_map(ds: xr.Dataset, level: str | None = None, variable: str = "e_int", ax=None,
             unit: str = "kcal/mol", dispersion: str | None = None, contours: int = 12, path: bool = True):
    """Heat map of ``variable`` over the two axes of an orientation scan.

    The first axis runs along x, the second along y. The lowest grid point is marked
    (gid :data:`MINIMUM_GID`) and, with ``path``, the minimum-energy path (for each value
    of the first axis the lowest point over the second; gid :data:`PATH_GID`) is drawn.
    Failed points are left blank.

    Parameters
    ----------
    ds : xarray.Dataset
        An orientation-grid Dataset of two axes (:func:`~interkit.run.orientation.run_orientation_scan`).
    level : str, optional
        Level label (may be omitted with one level).
    variable : {'e_int', 'e_int_nocp', 'bsse'}
    ax : matplotlib Axes, optional
    unit : str
        Energy unit of the colour scale (kcal/mol, kJ/mol, eV, cm-1, hartree).
    dispersion : str, optional
        The scheme, when the Dataset compares several.
    contours : int
        Number of contour lines (0: none).
    path : bool
        Draw the minimum-energy path.

    Returns
    -------
    matplotlib.axes.Axes
    """
    names = axis_names(ds)
    if len(names) != 2:
        raise InputError(f"grid: a map needs two axes, the Dataset has {len(names)} ({', '.join(names)})")
    e = grid_energies(ds, level, variable, dispersion).transpose(*names)
    z = convert_energy(e.values, "kcal/mol", unit)
    if ax is None:
        import matplotlib.pyplot as plt

        _, ax = plt.subplots(figsize=(6, 4.5))
    x, y = ds[names[0]].values, ds[names[1]].values
    mesh = ax.pcolormesh(x, y, z.T, shading="nearest", cmap="viridis")
    ax.figure.colorbar(mesh, ax=ax, label=energy_axis_label(unit, "E_int" if variable == "e_int" else variable))
    if contours and min(len(x), len(y)) >= 2 and np.isfinite(z).sum() >= 4:
        ax.contour(x, y, np.ma.masked_invalid(z.T), levels=contours, colors="white", linewidths=0.6, alpha=0.8)
    if path:
        mep = minimum_energy_path(ds, level, variable, dispersion)
        ax.plot(x, mep[f"{names[1]}_at_minimum"].values, color="#D55E00", lw=1.5, marker=".",
                label="minimum-energy path", gid=PATH_GID)
    low = grid_minimum(ds, level, variable, dispersion)
    ax.plot([low[names[0]]], [low[names[1]]], ls="none", marker=MINIMUM_MARKER, ms=14, color="white",
            mec="black", label=f"minimum {convert_energy(low['energy_kcal_per_mol'], 'kcal/mol', unit):.3f}",
            gid=MINIMUM_GID)
    ax.set_xlabel(_axis_label(ds, names[0]))
    ax.set_ylabel(_axis_label(ds, names[1]))
    lv = level if level is not None else str(ds["level"].values[0])
    ax.set_title(legend_label(lv, variable))
    ax.legend(loc="best", fontsize="small")
    return ax


def plot_grid_line(ds: xr.Dataset, variable: str = "e_int", ax=None, unit: str = "kcal/mol",
                   dispersion: str | None = None):
    """The interaction energy of every level along the single axis of a one-axis grid
    (e.g. an angle scan); failed points are gaps, the lowest point of each level is marked.

    Returns
    -------
    matplotlib.axes.Axes
    """
    names = axis_names(ds)
    if len(names) != 1:
        raise InputError(f"grid: a line plot needs one axis, the Dataset has {len(names)} ({', '.join(names)})")
    if ax is None:
        import matplotlib.pyplot as plt

        _, ax = plt.subplots(figsize=(6, 4.2))
    x = ds[names[0]].values
    for k, level in enumerate(str(v) for v in ds["level"].values):
        y = convert_energy(grid_energies(ds, level, variable, dispersion).values, "kcal/mol", unit)
        style = level_style(k)
        ax.plot(x, y, ms=4, label=legend_label(level), **style)
        if np.isfinite(y).any():
            i = int(np.nanargmin(y))
            ax.plot([x[i]], [y[i]], ls="none", marker=MINIMUM_MARKER, ms=12, color=style.get("color"), mec="black")
    ax.axhline(0.0, color="0.6", lw=0.8)
    ax.set_xlabel(_axis_label(ds, names[0]))
    ax.set_ylabel(energy_axis_label(unit, "E_int" if variable == "e_int" else variable))
    ax.legend(loc="best", fontsize="small")
    return ax
