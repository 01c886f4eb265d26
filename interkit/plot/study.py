"""Plots of a study: error distribution per method, method x system error map, per-category bars.

Errors are ``method - reference`` in kcal/mol (negative = the method overbinds), from
:mod:`interkit.analysis.study_stats`; each function returns the Matplotlib Axes.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from ..analysis.study_stats import OVERALL, error_matrix, study_errors, study_statistics
from .curves import LEVEL_COLOURS, plain_text

ERROR_COLOURMAP = "RdBu"


def _axes(ax, width=6.4, height=4.0):
    if ax is not None:
        return ax
    import matplotlib.pyplot as plt

    return plt.subplots(figsize=(width, height), constrained_layout=True)[1]


def _reference_text(attrs: dict) -> str:
    ref = attrs.get("reference", "")
    return "stored reference values" if ref == "stored" else plain_text(str(ref))


def plot_error_distribution(tree: xr.DataTree, reference=None, region: str = "all", points: str = "curve", ax=None):
    """Signed errors of every compared point, one column per method (box and points):
    a column below zero overbinds, above zero underbinds."""
    errors = study_errors(tree, reference, region, points)
    ax = _axes(ax)
    curves = list(dict.fromkeys(errors["curve"]))
    data = [errors.loc[errors["curve"] == c, "error_kcal_per_mol"].to_numpy() for c in curves]
    if curves:
        ax.boxplot(data, positions=np.arange(len(curves)), widths=0.5, showfliers=False)
        rng = np.random.default_rng(0)  # fixed jitter: the same file draws the same figure
        for i, values in enumerate(data):
            x = i + rng.uniform(-0.12, 0.12, size=values.size)
            ax.plot(x, values, "o", ms=4, alpha=0.75, color=LEVEL_COLOURS[i % len(LEVEL_COLOURS)])
    ax.axhline(0.0, color="0.3", lw=0.8)
    ax.set_xticks(np.arange(len(curves)), [plain_text(c) for c in curves], rotation=30, ha="right")
    ax.set_ylabel("error (method - reference) / kcal/mol")
    ax.set_title(f"errors against {_reference_text(errors.attrs)} ({points}, region {region})", fontsize=9)
    return ax


def plot_error_map(tree: xr.DataTree, reference=None, region: str = "all", points: str = "equilibrium", ax=None):
    """Method x system map of the signed error (kcal/mol), a diverging colour scale
    centred on zero; blank where nothing was compared."""
    table = error_matrix(tree, reference, region, points)
    n_sys, n_cur = table.shape
    ax = _axes(ax, width=max(4.0, 1.1 * n_cur + 3.0), height=max(2.5, 0.32 * n_sys + 1.2))
    values = table.to_numpy(dtype=float)
    limit = float(np.nanmax(np.abs(values))) if np.isfinite(values).any() else 1.0
    image = ax.imshow(np.ma.masked_invalid(values), cmap=ERROR_COLOURMAP, vmin=-limit, vmax=limit, aspect="auto")
    ax.set_xticks(np.arange(n_cur), [plain_text(c) for c in table.columns], rotation=30, ha="right")
    ax.set_yticks(np.arange(n_sys), [str(s) for s in table.index])
    for i in range(n_sys):
        for j in range(n_cur):
            if np.isfinite(values[i, j]):
                ax.text(j, i, f"{values[i, j]:+.2f}", ha="center", va="center", fontsize=7,
                        color="white" if abs(values[i, j]) > 0.6 * limit else "black")
    ax.figure.colorbar(image, ax=ax, label="error / kcal/mol")
    ax.set_title(f"error vs {_reference_text(table.attrs)} ({points})", fontsize=8)
    return ax


def plot_category_bars(tree: xr.DataTree, reference=None, region: str = "all", points: str = "curve",
                       statistic: str = "mae_kcal_per_mol", ax=None):
    """Bars of one statistic (default the MAE, kcal/mol) per category, one bar per method,
    the whole study last."""
    stats = study_statistics(tree, reference, region, points, by_category=True)
    ax = _axes(ax)
    categories = sorted(c for c in set(stats["category"]) if c != OVERALL) + [OVERALL]
    curves = list(dict.fromkeys(stats["curve"]))
    width = 0.8 / max(1, len(curves))
    for j, curve in enumerate(curves):
        sub = stats[stats["curve"] == curve].set_index("category")
        heights = [float(sub[statistic].get(c, np.nan)) for c in categories]
        ax.bar(np.arange(len(categories)) + (j - (len(curves) - 1) / 2) * width, heights, width,
               label=plain_text(curve), color=LEVEL_COLOURS[j % len(LEVEL_COLOURS)])
    ax.set_xticks(np.arange(len(categories)), [c or "(no category)" for c in categories])
    ax.axhline(0.0, color="0.3", lw=0.8)
    unit = "kcal/mol" if statistic.endswith("kcal_per_mol") else "%" if statistic.endswith("percent") else ""
    ax.set_ylabel(f"{statistic.replace('_kcal_per_mol', '').replace('_percent', '').replace('_', ' ')} / {unit}")
    ax.legend(fontsize=8)
    ax.set_title(f"by category, against {_reference_text(stats.attrs)} ({points}, region {region})", fontsize=9)
    return ax
