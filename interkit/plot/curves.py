"""Matplotlib views of a scan Dataset (Dataset in, Axes out; nothing else)."""

from __future__ import annotations

import numpy as np
import xarray as xr

from ..data.dispersion import flatten_dispersion
from ..units import convert_energy

#: our own palette for levels of theory (colour-blind-safe order)
LEVEL_COLOURS = ("#1b6f8a", "#c4581b", "#5b8c2a", "#7a4fa3", "#a8324a", "#3c3c3c")


def plain_text(text: object) -> str:
    """``text`` for a matplotlib label, with ``$`` escaped so that a label such as a level
    name is drawn as written, never as mathtext."""
    return str(text).replace("\\$", "$").replace("$", "\\$")


def plot_curves(ds: xr.Dataset, ax=None, unit: str = "kcal/mol", show_uncorrected: bool = False,
                show_bsse: bool = False, selected: float | None = None, levels=None):
    """Interaction energy against the scan coordinate, one curve per level.

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

    Returns
    -------
    matplotlib.axes.Axes
    """
    ds = flatten_dispersion(ds)
    import matplotlib.pyplot as plt

    if ax is None:
        _, ax = plt.subplots(figsize=(6.4, 4.2))
    r = ds["distance"].values
    chosen = list(levels) if levels is not None else [str(x) for x in ds["level"].values]
    drawn = []
    for k, level in enumerate(chosen):
        colour = LEVEL_COLOURS[k % len(LEVEL_COLOURS)]
        e = convert_energy(ds["e_int"].sel(level=level).values, "kcal/mol", unit)
        if np.all(np.isnan(e)):
            e = convert_energy(ds["e_int_nocp"].sel(level=level).values, "kcal/mol", unit)
        ax.plot(r, e, "o-", color=colour, lw=1.8, ms=4, label=plain_text(f"{level}"))
        drawn.append(e)
        if show_uncorrected:
            e2 = convert_energy(ds["e_int_nocp"].sel(level=level).values, "kcal/mol", unit)
            ax.plot(r, e2, "--", color=colour, lw=1.2, label=plain_text(f"{level}, uncorrected"))
            drawn.append(e2)
        if show_bsse:
            b = convert_energy(ds["bsse"].sel(level=level).values, "kcal/mol", unit)
            ax.plot(r, b, ":", color=colour, lw=1.2, label=plain_text(f"{level}, BSSE"))
        failed = ds["status"].sel(level=level).values == "failed"
        for x in r[failed]:
            ax.axvline(x, color=colour, alpha=0.25, lw=6)
        if selected is not None:
            i = int(np.argmin(np.abs(r - selected)))
            ax.plot([r[i]], [e[i]], marker="D", ms=9, mfc="none", mec=colour, mew=2, zorder=5)
    ax.axhline(0.0, color="#888888", lw=0.8)
    ax.set_xlabel(f"{ds['distance'].attrs.get('long_name', 'distance')} / Å")
    ax.set_ylabel(f"interaction energy / {unit}")
    ax.legend(frameon=False, fontsize=8)
    finite = np.concatenate(drawn) if drawn else np.array([])
    finite = finite[np.isfinite(finite)]
    if finite.size:
        lo = float(finite.min())
        span = max(abs(lo), 1e-6)
        ax.set_ylim(lo - 0.15 * span, max(0.6 * span, 0.2 * span + float(np.median(finite))))
    return ax


def plot_forces(ds: xr.Dataset, ax=None, levels=None, show_fit: bool = True, show_split: bool = False):
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
    r = ds["distance"].values
    chosen = list(levels) if levels is not None else [str(x) for x in ds["level"].values]
    for k, level in enumerate(chosen):
        colour = LEVEL_COLOURS[k % len(LEVEL_COLOURS)]
        f = ds["force_along"].sel(level=level).values
        ax.plot(r, f, "o-", color=colour, lw=1.8, ms=4, label=plain_text(f"{level}"))
        zero = force_zero_crossing(r, f)
        if np.isfinite(zero):
            ax.plot([zero], [0.0], marker="|", ms=16, mew=2.5, color=colour)
            ax.annotate(f"{zero:.3f} Å", (zero, 0.0), textcoords="offset points", xytext=(4, 6),
                        color=colour, fontsize=8)
        if show_fit:
            ax.plot(r, derivative_force(r, ds["e_int"].sel(level=level).values), "--", color=colour,
                    lw=1.1, label=plain_text(f"{level}, −dE/dR of a spline fit"))
        if show_split and "force_hf_along" in ds.variables:
            ax.plot(r, ds["force_hf_along"].sel(level=level).values, ":", color=colour, lw=1.4,
                    label=plain_text(f"{level}, electrostatic (Hellmann–Feynman)"))
            ax.plot(r, ds["force_pulay_along"].sel(level=level).values, "-.", color=colour, lw=1.1,
                    label=plain_text(f"{level}, Pulay"))
    ax.axhline(0.0, color="#888888", lw=0.8)
    ax.set_xlabel(f"{ds['distance'].attrs.get('long_name', 'distance')} / Å")
    ax.set_ylabel("force on B along the coordinate / kcal/mol/Å  (+ repulsive)")
    ax.legend(frameon=False, fontsize=8)
    return ax
