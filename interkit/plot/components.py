"""Matplotlib view of the SAPT0 components along a scan (Dataset in, Axes out)."""

from __future__ import annotations

import numpy as np
import xarray as xr

from ..data.dispersion import flatten_dispersion
from ..data.sapt0 import COMPONENT_NAMES, COMPONENTS, has_decomposition
from ..errors import InputError
from ..units import convert_energy
from .style import energy_axis_label, legend_label

#: our own colours of the four components and the total
COMPONENT_COLOURS = {
    "e_elst": "#2b5d9e",    # electrostatics: deep blue
    "e_exch": "#c2492d",    # exchange: brick red
    "e_ind": "#3f8f5a",     # induction: green
    "e_disp": "#8a5fb0",    # dispersion: violet
    "e_sapt0": "#1f1f1f",   # SAPT0 total: near black
}


def plot_components(ds: xr.Dataset, ax=None, unit: str = "kcal/mol", show_total: bool = True,
                    level: str | None = None):
    """SAPT0 components (electrostatics, exchange, induction, dispersion) against the
    scan coordinate.

    Parameters
    ----------
    ds : xarray.Dataset
        A scan Dataset computed with ``decomposition="sapt0"``.
    ax : matplotlib Axes, optional
    unit : str
        Display unit (kcal/mol, kJ/mol, eV, cm-1, hartree).
    show_total : bool
        Also draw the SAPT0 total (and the sSAPT0 total, dotted, when present).
    level : str, optional
        Also draw the counterpoise-corrected interaction energy of this level (dashed
        grey) for comparison.

    Returns
    -------
    matplotlib.axes.Axes
    """
    ds = flatten_dispersion(ds)
    import matplotlib.pyplot as plt

    if not has_decomposition(ds):
        raise InputError("dataset: no SAPT0 components (run the scan with decomposition='sapt0')")
    if ax is None:
        _, ax = plt.subplots(figsize=(6.4, 4.2))
    r = ds["distance"].values
    drawn = []
    for name in COMPONENTS + (("e_sapt0",) if show_total else ()):
        e = convert_energy(np.asarray(ds[name].values, dtype=float), "kcal/mol", unit)
        label = COMPONENT_NAMES.get(name, "SAPT0 total")
        ax.plot(r, e, "o-", color=COMPONENT_COLOURS[name], lw=2.2 if name == "e_sapt0" else 1.6,
                ms=3.5, label=label)
        drawn.append(e)
    if show_total and "e_ssapt0" in ds.variables:
        e = convert_energy(np.asarray(ds["e_ssapt0"].values, dtype=float), "kcal/mol", unit)
        ax.plot(r, e, ":", color=COMPONENT_COLOURS["e_sapt0"], lw=1.4, label="sSAPT0 total")
    if level is not None:
        if level not in [str(x) for x in ds["level"].values]:
            raise InputError(f"level: {level!r} is not a level of this scan")
        e = convert_energy(ds["e_int"].sel(level=level).values, "kcal/mol", unit)
        ax.plot(r, e, "--", color="#8c8c8c", lw=1.4, label=legend_label(level) + " (CP)")
    if "sapt_status" in ds.variables:
        for x in r[ds["sapt_status"].values == "failed"]:
            ax.axvline(x, color="#c2492d", alpha=0.18, lw=6)
    ax.axhline(0.0, color="#888888", lw=0.8)
    basis = ds.attrs.get("decomposition_basis", "")
    ax.set_xlabel(f"{ds['distance'].attrs.get('long_name', 'distance')} / Å")
    ax.set_ylabel(energy_axis_label(unit, "SAPT0 component"))
    ax.set_title(f"SAPT0/{basis} decomposition" if basis else "SAPT0 decomposition", fontsize=10)
    ax.legend(frameon=False, fontsize=8)
    return ax
