"""Plots of a dispersion-correction comparison: curves over a reference, and their errors."""

from __future__ import annotations

import numpy as np
import xarray as xr

from ..analysis.comparison import resolve_reference
from ..data.dispersion import flatten_dispersion
from ..units import convert_energy, unit_text
from .style import LEVEL_COLOURS, energy_axis_label, legend_label

REFERENCE_COLOUR = "#1c1c1c"
#: line styles of the schemes, so colours can stay with the functional
SCHEME_STYLES = {"none": (0, (1, 2)), "d3zero": (0, (5, 2)), "d3bj": "solid", "d4": (0, (6, 2, 1, 2)),
                 "d3zero-atm": (0, (3, 1)), "d3bj-atm": (0, (8, 1)), "d4-atm": (0, (2, 1))}


def compared_curves(ds: xr.Dataset, reference_label: str | None = None,
                    variable: str = "e_int") -> list[tuple[str, np.ndarray]]:
    """``(label, variable in kcal/mol)`` of every curve with values, one per (level,
    scheme) pair, folded as in :func:`interkit.data.dispersion.flatten_dispersion`; the
    curve labelled ``reference_label`` is left out."""
    flat = flatten_dispersion(ds)
    out = []
    for level in flat["level"].values:
        values = flat[variable].sel(level=level).values
        if str(level) == reference_label or not np.isfinite(values).any():
            continue
        out.append((str(level), values))
    return out


def _style(label: str) -> tuple[str, object]:
    from ..model.composite import parse_level

    level = parse_level(label)
    return (level.dispersion or "none"), SCHEME_STYLES.get(level.dispersion or "none", "solid")


def plot_comparison(ds: xr.Dataset, reference_level: str | None = None, reference=None,
                    reference_dispersion: str | None = None, unit: str = "kcal/mol",
                    curves: list[str] | None = None, axes=None, variable: str | None = None):
    """Curves over the reference (left) and their errors, curve minus reference (right).

    Parameters
    ----------
    ds : xarray.Dataset
        A scan, with or without a ``dispersion`` dimension.
    reference_level, reference, reference_dispersion
        The reference, as in :func:`interkit.analysis.comparison.ranking_table`.
    unit : str
        Display unit of the energies.
    curves : list of str, optional
        Folded labels to draw (default: every curve with values).
    axes : pair of matplotlib Axes, optional
    variable : str, optional
        The energy compared: ``'e_int'`` (counterpoise-corrected), ``'e_int_nocp'`` or
        ``'e_int_halfcp'`` (half-counterpoise); default ``e_int``, or ``e_int_nocp`` for a
        scan without counterpoise (as :func:`interkit.analysis.comparison.comparison_table`).

    Returns
    -------
    (Axes, Axes)

    Notes
    -----
    When the reference level has a basis-set uncertainty (``e_int_basis_uncertainty``),
    the reference curve gets a shaded band ± that uncertainty and the error panel a band
    around zero of the same width: an error inside it is within the reference's own
    basis-set uncertainty. Compared curves with an uncertainty get their own band.
    """
    from ..analysis.basis_uncertainty import BAND_LABEL, basis_uncertainty, check_curve_variable
    from .curves import draw_uncertainty_band

    if variable is None:
        variable = "e_int_nocp" if ds.attrs.get("counterpoise", "") == "none" else "e_int"
    check_curve_variable(ds, variable)
    ref, ref_label = resolve_reference(ds, reference_level, reference, variable, reference_dispersion)
    if axes is None:
        import matplotlib.pyplot as plt

        _, axes = plt.subplots(1, 2, figsize=(10, 3.8), layout="constrained")
    ax_curve, ax_err = axes
    r = ds["distance"].values
    own_label = reference_level if reference_level is not None and (
        reference_dispersion in (None, "none")) else None
    if reference_level is not None and reference_dispersion not in (None, "none"):
        from ..data.dispersion import scheme_label
        from ..model.composite import parse_level

        own_label = scheme_label(parse_level(reference_level), reference_dispersion)
    chosen = compared_curves(ds, own_label, variable)
    flat = flatten_dispersion(ds)
    if curves is not None:
        chosen = [(lab, e) for lab, e in chosen if lab in curves]
    heads = []
    for label, values in chosen:
        head = label.split("/")[0]
        scheme, style = _style(label)
        base = head[: -len(scheme) - 1] if scheme != "none" and head.endswith("-" + scheme) else head
        if base not in heads:
            heads.append(base)
        colour = LEVEL_COLOURS[heads.index(base) % len(LEVEL_COLOURS)]
        shown = convert_energy(values, "kcal/mol", unit)
        ax_curve.plot(r, shown, color=colour, ls=style, lw=1.6, marker="o", ms=3, label=legend_label(label))
        draw_uncertainty_band(ax_curve, flat, label, variable, r, shown, unit, colour)
        err = convert_energy(values - ref, "kcal/mol", unit)
        ax_err.plot(r, err, color=colour, ls=style, lw=1.6, marker="o", ms=3, label=legend_label(label))
    ref_shown = convert_energy(ref, "kcal/mol", unit)
    ax_curve.plot(r, ref_shown, color=REFERENCE_COLOUR, lw=2.4, ls="solid",
                  marker="s", ms=3.5, label="reference: " + legend_label(ref_label), zorder=5)
    if reference_level is not None and basis_uncertainty(flat, ref_label, variable) is not None:
        draw_uncertainty_band(ax_curve, flat, ref_label, variable, r, ref_shown, unit, REFERENCE_COLOUR,
                              label="reference " + BAND_LABEL)
        draw_uncertainty_band(ax_err, flat, ref_label, variable, r, np.where(np.isfinite(ref), 0.0, np.nan),
                              unit, REFERENCE_COLOUR, label="reference " + BAND_LABEL)
        bands = [c for c in ax_err.collections if c.get_gid() == "interkit-basis-band"]
        ax_err.legend(handles=bands, fontsize=6.5, frameon=False, loc="best")
    ax_curve.axhline(0.0, color="#8a8a8a", lw=0.8)
    ax_err.axhline(0.0, color=REFERENCE_COLOUR, lw=1.2)
    xlabel = f"{ds['distance'].attrs.get('long_name', 'distance')} / Å"
    for ax in (ax_curve, ax_err):
        ax.set_xlabel(xlabel, fontsize=8)
        ax.tick_params(labelsize=7)
    ax_curve.set_ylabel(energy_axis_label(unit), fontsize=8)
    ax_err.set_ylabel(f"curve − reference / {unit_text(unit)}", fontsize=8)
    ax_curve.set_title("curves and reference", fontsize=9)
    ax_err.set_title("error against the reference", fontsize=9)
    finite = ref[np.isfinite(ref)]
    if finite.size:
        low = convert_energy(float(finite.min()), "kcal/mol", unit)
        span = abs(low) if low < 0 else 1.0
        ax_curve.set_ylim(low - 0.8 * span, 1.5 * span)
    ax_curve.legend(fontsize=6.5, frameon=False, loc="best")
    return ax_curve, ax_err
