"""Matplotlib views of a scan Dataset (Dataset in, Axes out; nothing else)."""

from __future__ import annotations

import numpy as np
import xarray as xr

from ..data.dispersion import flatten_dispersion
from ..units import MATCHING_FORCE_UNIT, convert_energy, convert_force
from .style import (
    BSSE_LINESTYLE,
    LEVEL_COLOURS,
    MINIMUM_MARKER,
    UNCORRECTED_LINESTYLE,
    energy_axis_label,
    force_axis_label,
    legend_label,
    level_style,
)

__all__ = ["LEVEL_COLOURS", "plain_text", "plot_curves", "plot_forces", "curve_values", "default_ylim",
           "draw_uncertainty_band"]


def plain_text(text: object) -> str:
    """``text`` for a matplotlib label, with ``$`` escaped so that a label such as a level
    name is drawn as written, never as mathtext."""
    return str(text).replace("\\$", "$").replace("$", "\\$")


def curve_values(ds: xr.Dataset, level: str, unit: str = "kcal/mol",
                 variable: str | None = None) -> tuple[np.ndarray, str]:
    """The energies drawn for ``level`` in ``unit``, and their variable: ``variable`` if
    given (a key of :data:`interkit.analysis.basis_uncertainty.CURVE_VARIABLES`), else the
    counterpoise-corrected ``e_int``, or ``e_int_nocp`` when no counterpoise was computed."""
    if variable is not None:
        return convert_energy(ds[variable].sel(level=level).values, "kcal/mol", unit), variable
    e = convert_energy(ds["e_int"].sel(level=level).values, "kcal/mol", unit)
    if np.all(np.isnan(e)):
        return convert_energy(ds["e_int_nocp"].sel(level=level).values, "kcal/mol", unit), "e_int_nocp"
    return e, "e_int"


def default_ylim(values: np.ndarray) -> tuple[float, float] | None:
    """The y range that shows the well: from a little below the lowest value to a
    fraction of the depth above zero (the repulsive wall is cut off)."""
    finite = np.asarray(values, dtype=float)
    finite = finite[np.isfinite(finite)]
    if not finite.size:
        return None
    lo = float(finite.min())
    span = max(abs(lo), 1e-6)
    return lo - 0.15 * span, max(0.6 * span, 0.2 * span + float(np.median(finite)))


def full_ylim(values: np.ndarray) -> tuple[float, float] | None:
    """The y range that shows every value (the repulsive wall included)."""
    finite = np.asarray(values, dtype=float)
    finite = finite[np.isfinite(finite)]
    if not finite.size:
        return None
    lo, hi = float(finite.min()), float(finite.max())
    pad = 0.05 * max(hi - lo, 1e-6)
    return lo - pad, hi + pad


def plot_curves(ds: xr.Dataset, ax=None, unit: str = "kcal/mol", show_uncorrected: bool = False,
                show_bsse: bool = False, selected: float | None = None, levels=None,
                show_minimum: bool = True, ylim: tuple[float, float] | str | None = None,
                variable: str | None = None):
    """Interaction energy against the scan coordinate, one curve per level.

    Each level is drawn as its computed points joined by the natural cubic spline that
    :func:`interkit.analysis.minima.find_minimum` uses, with that minimum marked.

    Parameters
    ----------
    ds : xarray.Dataset
        A scan Dataset.
    ax : matplotlib Axes, optional
    unit : str
        Display unit (kcal/mol, kJ/mol, eV, cm-1, hartree).
    show_uncorrected : bool
        Also draw the uncorrected curve (dashed).
    show_bsse : bool
        Also draw the BSSE (dotted).
    selected : float, optional
        Distance (angstrom) of a point to mark on every curve.
    levels : sequence of str, optional
        Subset of levels to draw.
    show_minimum : bool
        Mark the interpolated minimum of every curve (a star).
    ylim : (float, float) or 'wall', optional
        Energy-axis range in ``unit``; ``'wall'`` shows every value (the repulsive wall);
        default: the range that shows the well (:func:`default_ylim`).
    variable : str, optional
        The curve drawn: ``'e_int'`` (counterpoise-corrected), ``'e_int_nocp'``
        (uncorrected) or ``'e_int_halfcp'`` (half-counterpoise, the mean of the two);
        default ``e_int``, or ``e_int_nocp`` for a scan without counterpoise.

    Returns
    -------
    matplotlib.axes.Axes

    Notes
    -----
    A level with a finite basis-set uncertainty (``e_int_basis_uncertainty``, for the
    variable drawn) gets a shaded band E ± uncertainty at its points, labelled
    "basis-set uncertainty".
    """
    from ..analysis.basis_uncertainty import check_curve_variable
    from ..analysis.minima import curve_interpolant, find_minimum

    ds = flatten_dispersion(ds)
    if variable is not None:
        check_curve_variable(ds, variable)
    import matplotlib.pyplot as plt

    if ax is None:
        _, ax = plt.subplots(figsize=(6.4, 4.2))
    r = ds["distance"].values
    all_levels = [str(x) for x in ds["level"].values]
    chosen = list(levels) if levels is not None else all_levels
    drawn = []
    for level in chosen:
        st = level_style(all_levels.index(level) if level in all_levels else chosen.index(level))
        colour = st["color"]
        e, shown = curve_values(ds, level, unit, variable)
        xs, ys = curve_interpolant(r, e)
        ax.plot(xs, ys, color=colour, ls=st["ls"], lw=1.8, label=legend_label(level))
        ax.plot(r, e, ls="none", marker=st["marker"], ms=4.5, color=colour, mec="white", mew=0.6, zorder=3)
        drawn.append(e)
        band = draw_uncertainty_band(ax, ds, level, shown, r, e, unit, colour)
        if band is not None:
            drawn.extend(band)
        if show_minimum:   # the spline is linear in E: its minimum in any unit is the same point
            m = find_minimum(r, e)
            if m.interior:
                ax.plot([m.r_min_angstrom], [m.e_min_kcal_per_mol], ls="none", marker=MINIMUM_MARKER, ms=12,
                        color=colour, mec="black", mew=0.7, zorder=4, gid="interkit-minimum")
        if show_uncorrected:
            e2 = convert_energy(ds["e_int_nocp"].sel(level=level).values, "kcal/mol", unit)
            ax.plot(r, e2, ls=UNCORRECTED_LINESTYLE, color=colour, lw=1.2, label=legend_label(level, "uncorrected"))
            drawn.append(e2)
        if show_bsse:
            b = convert_energy(ds["bsse"].sel(level=level).values, "kcal/mol", unit)
            ax.plot(r, b, ls=BSSE_LINESTYLE, color=colour, lw=1.2, label=legend_label(level, "BSSE"))
        failed = ds["status"].sel(level=level).values == "failed"
        for x in r[failed]:
            ax.axvline(x, color=colour, alpha=0.25, lw=6)
        if selected is not None:
            i = int(np.argmin(np.abs(r - selected)))
            ax.plot([r[i]], [e[i]], marker="D", ms=9, mfc="none", mec=colour, mew=2, zorder=5)
    ax.axhline(0.0, color="#888888", lw=0.8)
    ax.set_xlabel(f"{ds['distance'].attrs.get('long_name', 'distance')} / Å")
    ax.set_ylabel(energy_axis_label(unit))
    ax.legend(frameon=False, fontsize=8)
    values = np.concatenate(drawn) if drawn else np.array([])
    limits = ylim if isinstance(ylim, tuple) else (full_ylim(values) if ylim == "wall" else default_ylim(values))
    if limits is not None:
        ax.set_ylim(*limits)
    return ax


def draw_uncertainty_band(ax, ds: xr.Dataset, level: str, variable: str, r: np.ndarray, e: np.ndarray,
                          unit: str, colour: str, label: str | None = None):
    """Shade ``e`` ± the basis-set uncertainty of ``level`` (``e`` in ``unit``) when it
    has one for ``variable``; return the band's (lower, upper) values, or None.

    The band joins the computed points (``fill_between``, gid ``interkit-basis-band``)
    and leaves gaps at points where the energy or the uncertainty is unknown.
    """
    from ..analysis.basis_uncertainty import BAND_LABEL, basis_uncertainty

    u = basis_uncertainty(ds, level, variable)
    if u is None:
        return None
    u = convert_energy(u, "kcal/mol", unit)
    ok = np.isfinite(e) & np.isfinite(u)
    lower, upper = np.where(ok, e - u, np.nan), np.where(ok, e + u, np.nan)
    text = label if label is not None else legend_label(level, BAND_LABEL)
    band = ax.fill_between(r, lower, upper, where=ok, color=colour, alpha=0.2, lw=0, label=text, zorder=1)
    band.set_gid("interkit-basis-band")
    return lower, upper


def plot_forces(ds: xr.Dataset, ax=None, levels=None, show_fit: bool = True, show_split: bool = False,
                force_unit: str = "kcal/mol/angstrom", unit: str | None = None):
    """Net force on fragment B along the scan coordinate (positive = repulsive).

    Parameters
    ----------
    ds : xarray.Dataset
        A scan Dataset with forces (``force_along`` in kcal/mol/angstrom).
    ax : matplotlib Axes, optional
    levels : sequence of str, optional
    show_fit : bool
        Also draw ``-dE/dR`` of a smooth fit through the energies (dashed): it should
        lie on the analytic force.
    show_split : bool
        Also draw the electrostatic (Hellmann–Feynman) force and the Pulay remainder.
    force_unit : str
        Display unit of the forces (a key of :data:`interkit.units.FORCE_UNITS`).
    unit : str, optional
        An energy unit: when given, the force unit that goes with it
        (:data:`interkit.units.MATCHING_FORCE_UNIT`) replaces ``force_unit``.

    Returns
    -------
    matplotlib.axes.Axes
    """
    ds = flatten_dispersion(ds)
    import matplotlib.pyplot as plt

    from ..analysis.minima import derivative_force, force_zero_crossing

    if "force_along" not in ds.variables:
        raise ValueError("dataset: no forces (run the scan with forces=True)")
    if ax is None:
        _, ax = plt.subplots(figsize=(6.4, 4.2))
    if unit is not None:
        force_unit = MATCHING_FORCE_UNIT.get(unit, force_unit)
    stored = ds["force_along"].attrs.get("units", "kcal/mol/angstrom")

    def conv(values):
        return convert_force(values, stored, force_unit)

    r = ds["distance"].values
    all_levels = [str(x) for x in ds["level"].values]
    chosen = list(levels) if levels is not None else all_levels
    for level in chosen:
        st = level_style(all_levels.index(level) if level in all_levels else chosen.index(level))
        colour = st["color"]
        f = conv(ds["force_along"].sel(level=level).values)
        ax.plot(r, f, ls=st["ls"], marker=st["marker"], color=colour, lw=1.8, ms=4, label=legend_label(level))
        zero = force_zero_crossing(r, f)
        if np.isfinite(zero):
            ax.plot([zero], [0.0], marker="|", ms=16, mew=2.5, color=colour)
            ax.annotate(f"{zero:.3f} Å", (zero, 0.0), textcoords="offset points", xytext=(4, 6),
                        color=colour, fontsize=8)
        if show_fit:
            ax.plot(r, conv(derivative_force(r, ds["e_int"].sel(level=level).values)), "--", color=colour,
                    lw=1.1, label=legend_label(level, "−dE/dR of a spline fit"))
        if show_split and "force_hf_along" in ds.variables:
            ax.plot(r, conv(ds["force_hf_along"].sel(level=level).values), ":", color=colour, lw=1.4,
                    label=legend_label(level, "electrostatic (Hellmann–Feynman)"))
            ax.plot(r, conv(ds["force_pulay_along"].sel(level=level).values), "-.", color=colour, lw=1.1,
                    label=legend_label(level, "Pulay"))
    ax.axhline(0.0, color="#888888", lw=0.8)
    ax.set_xlabel(f"{ds['distance'].attrs.get('long_name', 'distance')} / Å")
    ax.set_ylabel(force_axis_label(force_unit))
    ax.legend(frameon=False, fontsize=8)
    return ax
