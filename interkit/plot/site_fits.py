"""The fitted site-site energy beside the computed one, per scan (Dataset and fit in, Axes out)."""

from __future__ import annotations

import numpy as np
import xarray as xr

from ..analysis.site_fits import SiteSiteFit, scan_points
from .curves import plain_text
from .style import energy_axis_label


def plot_site_fit(fit: SiteSiteFit, scans, ax=None, level: str | None = None, types=None, charges=None,
                  n_dense: int = 200):
    """Computed interaction energies (markers) and the fitted site-site model (lines).

    Parameters
    ----------
    fit : SiteSiteFit
        From :func:`interkit.analysis.site_fits.fit_site_site`.
    scans : Dataset, sequence of Dataset or dict label -> Dataset
        The scans (usually those of the fit).
    ax : matplotlib Axes, optional
    level : str, optional
        Level of the computed energies (needed when a scan has more than one).
    types, charges
        As given to the fit.
    n_dense : int
        Points of the model line of a scan along a continuous coordinate (frames scans
        draw the model at their own geometries).

    Returns
    -------
    matplotlib.axes.Axes
    """
    import matplotlib.pyplot as plt

    from ..data.schema import spec_of
    from ..model.coordinates import Frames

    if ax is None:
        _, ax = plt.subplots(figsize=(6.4, 4.2))
    if isinstance(scans, xr.Dataset):
        scans = {scans.attrs.get("title", "scan"): scans}
    elif not isinstance(scans, dict):
        scans = {f"scan {k}": s for k, s in enumerate(scans)}
    colours = plt.rcParams["axes.prop_cycle"].by_key()["color"]
    lows = []
    for k, (label, ds) in enumerate(scans.items()):
        colour = colours[k % len(colours)]
        r = ds["distance"].values.astype(float)
        _, e = scan_points(ds, level)
        ax.plot(r, e, "o", color=colour, label=plain_text(f"{label} (computed)"))
        spec = spec_of(ds)
        if isinstance(spec.coordinate, Frames):
            rd = r
            dimers = [spec.dimer.with_coordinates(c) for c in ds["coordinates"].values]
        else:
            rd = np.linspace(r.min(), r.max(), n_dense)
            dimers = [spec.coordinate.displaced(spec.dimer, x) for x in rd]
        model = [fit.energy(d, types, charges) for d in dimers]
        rmse = fit.rmse_kcal_per_mol.get(label, float("nan"))
        ax.plot(rd, model, "-", color=colour,
                label=plain_text(f"{label} ({fit.model} fit, RMSD {rmse:.3f} kcal/mol)"))
        lows.append(np.nanmin(e))
    low = min(lows)
    ax.set_ylim(1.3 * low if low < 0 else -1.0, max(abs(low), 1.0) * 1.5)
    ax.axhline(0.0, color="0.6", lw=0.8)
    ax.set_xlabel("scan coordinate / Å")
    ax.set_ylabel(energy_axis_label("kcal/mol"))
    ax.legend(fontsize="small")
    return ax
