"""The basis-set uncertainty of extrapolated levels and the choice of the curve drawn.

A composite or extrapolated level carries ``e_int_basis_uncertainty`` (level, distance,
kcal/mol; NaN for levels that are not extrapolated). It belongs to one interaction-energy
variable, named by its ``variable`` attr if it has one, else the scan's main curve:
``e_int`` (counterpoise-corrected), or ``e_int_nocp`` for a scan without counterpoise
(:mod:`interkit.data.composite` takes the spread of that curve): a band is drawn, and a table column reported, only with that variable, so the
spread of one quantity is never shown around another.

The curve variables a user can choose between (:data:`CURVE_VARIABLES`) are the
counterpoise-corrected ``e_int``, the uncorrected ``e_int_nocp`` and the
half-counterpoise ``e_int_halfcp`` (the mean of the two).
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from ..errors import InputError

UNCERTAINTY_VARIABLE = "e_int_basis_uncertainty"
#: the interaction-energy variables a curve or a comparison can show, and their names in words
CURVE_VARIABLES = {"e_int": "counterpoise-corrected", "e_int_nocp": "uncorrected",
                   "e_int_halfcp": "half-counterpoise"}
#: legend text of the shaded band
BAND_LABEL = "basis-set uncertainty"


def check_curve_variable(ds: xr.Dataset, variable: str) -> str:
    """``variable`` if it is a curve variable present in ``ds`` (kcal/mol), else InputError.

    Parameters
    ----------
    ds : xarray.Dataset
        A scan Dataset.
    variable : str
        One of :data:`CURVE_VARIABLES`.

    Returns
    -------
    str
    """
    if variable not in CURVE_VARIABLES:
        raise InputError(f"variable: {variable!r} is not one of {', '.join(CURVE_VARIABLES)}")
    if variable not in ds.variables:
        raise InputError(f"variable: {variable!r} is not in the dataset")
    if variable == "e_int" and ds.attrs.get("counterpoise", "") == "none":
        raise InputError("variable: 'e_int' needs counterpoise calculations; the scan ran without them "
                         "(use e_int_nocp)")
    if variable == "e_int_halfcp" and ds.attrs.get("counterpoise", "") == "none":
        raise InputError("variable: 'e_int_halfcp' needs counterpoise calculations; the scan ran without them "
                         "(use e_int_nocp)")
    return variable


def uncertainty_variable_of(ds: xr.Dataset) -> str | None:
    """The curve variable the basis-set uncertainty of ``ds`` belongs to, or None without one."""
    if UNCERTAINTY_VARIABLE not in ds.variables:
        return None
    main = "e_int_nocp" if ds.attrs.get("counterpoise", "") == "none" else "e_int"
    return str(ds[UNCERTAINTY_VARIABLE].attrs.get("variable", main))


def basis_uncertainty(ds: xr.Dataset, level: str, variable: str = "e_int",
                      dispersion: str | None = None) -> np.ndarray | None:
    """The basis-set uncertainty of ``level`` along ``distance`` (kcal/mol, >= 0).

    Parameters
    ----------
    ds : xarray.Dataset
        A scan Dataset (folded or not).
    level : str
        A level label of ``ds``.
    variable : str
        The curve variable drawn or compared; the uncertainty is returned only when it
        belongs to this variable.
    dispersion : str, optional
        The scheme, when the uncertainty has a ``dispersion`` dimension.

    Returns
    -------
    numpy.ndarray or None
        One value per point (NaN where unknown), or None when the level has no finite
        uncertainty for ``variable``.
    """
    if uncertainty_variable_of(ds) != variable:
        return None
    da = ds[UNCERTAINTY_VARIABLE]
    if da.attrs.get("units", "kcal/mol") != "kcal/mol":
        raise InputError(f"dataset variable {UNCERTAINTY_VARIABLE}: units {da.attrs.get('units')!r} "
                         "is not 'kcal/mol'")
    if level not in [str(v) for v in ds["level"].values]:
        return None
    da = da.sel(level=level)
    if "dispersion" in da.dims:
        da = da.sel(dispersion=dispersion if dispersion is not None else "none")
    values = np.abs(np.asarray(da.transpose("distance").values, dtype=float))
    return values if np.isfinite(values).any() else None


def uncertainty_summary(reference, uncertainty, compared=None) -> dict[str, float]:
    """The reference's uncertainty at its lowest finite point and its mean over points.

    Parameters
    ----------
    reference : array-like
        Reference curve (kcal/mol).
    uncertainty : array-like
        Its basis-set uncertainty (kcal/mol).
    compared : array-like of bool, optional
        The points to average over (default: every point with a finite uncertainty).

    Returns
    -------
    dict
        ``at_minimum_kcal_per_mol`` (at the reference's lowest computed point) and
        ``mean_kcal_per_mol`` (NaN when no point qualifies).
    """
    ref = np.asarray(reference, dtype=float)
    unc = np.asarray(uncertainty, dtype=float)
    finite = np.isfinite(ref) & np.isfinite(unc)
    at_min = float(unc[np.nanargmin(np.where(finite, ref, np.nan))]) if finite.any() else float("nan")
    mask = finite if compared is None else finite & np.asarray(compared, dtype=bool)
    mean = float(unc[mask].mean()) if mask.any() else float("nan")
    return {"at_minimum_kcal_per_mol": at_min, "mean_kcal_per_mol": mean}
