"""Curve analysis: the minimum of an interaction-energy curve by smooth interpolation."""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np
import xarray as xr
from scipy.interpolate import CubicSpline

from ..data.dispersion import flatten_dispersion


@dataclass(frozen=True)
class CurveMinimum:
    """Minimum of one interaction-energy curve.

    Attributes
    ----------
    r_min_angstrom : float
        Position of the minimum (NaN if the curve has no finite points).
    e_min_kcal_per_mol : float
        Interaction energy at the minimum (negative when bound).
    well_depth_kcal_per_mol : float
        ``-e_min`` (positive when bound).
    force_constant_kcal_per_mol_per_angstrom2 : float
        Curvature of the interpolant at the minimum (NaN when not interior).
    interior : bool
        False when the lowest point lies on the edge of the grid (the true minimum may
        lie outside the scanned range).
    n_points : int
        Finite points used.
    """

    r_min_angstrom: float
    e_min_kcal_per_mol: float
    well_depth_kcal_per_mol: float
    force_constant_kcal_per_mol_per_angstrom2: float
    interior: bool
    n_points: int

    def to_dict(self) -> dict:
        return asdict(self)


def finite_sorted(distance, values) -> tuple[np.ndarray, np.ndarray]:
    """The points of a curve where both coordinates are finite, by increasing distance."""
    r = np.asarray(distance, dtype=float)
    v = np.asarray(values, dtype=float)
    ok = np.isfinite(r) & np.isfinite(v)
    order = np.argsort(r[ok])
    return r[ok][order], v[ok][order]


def find_minimum(distance, energy) -> CurveMinimum:
    """Locate the minimum of E(R) with a natural cubic spline through the finite points.

    Parameters
    ----------
    distance : array-like
        Coordinate values in angstrom (any order).
    energy : array-like
        Energies in kcal/mol; NaN points are skipped.
    """
    r, e = finite_sorted(distance, energy)
    n = len(r)
    nan = float("nan")
    if n == 0:
        return CurveMinimum(nan, nan, nan, nan, False, 0)
    k = int(np.argmin(e))
    if n < 4 or k in (0, n - 1):
        return CurveMinimum(float(r[k]), float(e[k]), float(-e[k]), nan, 0 < k < n - 1, n)
    spline = CubicSpline(r, e, bc_type="natural")
    lo, hi = r[k - 1], r[k + 1]
    grid = np.linspace(lo, hi, 2001)
    vals = spline(grid)
    j = int(np.argmin(vals))
    roots = [x for x in spline.derivative().roots() if lo <= x <= hi]
    if roots:
        x = min(roots, key=lambda t: float(spline(t)))
    else:
        x = grid[j]
    return CurveMinimum(float(x), float(spline(x)), float(-spline(x)),
                        float(spline(x, 2)), True, n)


def minimum_table(ds: xr.Dataset, variable: str = "e_int") -> list[dict]:
    """Minimum of ``variable`` for every level of a scan Dataset, as rows of dicts."""
    ds = flatten_dispersion(ds)
    rows = []
    for level in ds["level"].values:
        curve = ds[variable].sel(level=level)
        m = find_minimum(ds["distance"].values, curve.values)
        row = {"level": str(level)}
        row.update(m.to_dict())
        row["failed_points"] = int((ds["status"].sel(level=level) == "failed").sum())
        rows.append(row)
    return rows


def force_zero_crossing(distance, force) -> float:
    """Distance (angstrom) where a force curve changes sign from repulsive (+) to
    attractive (-), by a natural cubic spline through the finite points; NaN if the
    sampled force never changes sign that way."""
    r, f = finite_sorted(distance, force)
    if len(r) < 2:
        return float("nan")
    changes = np.nonzero((f[:-1] > 0) & (f[1:] <= 0))[0]
    if changes.size == 0:
        return float("nan")
    k = int(changes[0])
    if len(r) < 4:
        return float(r[k] + (r[k + 1] - r[k]) * f[k] / (f[k] - f[k + 1]))
    spline = CubicSpline(r, f, bc_type="natural")
    roots = [x for x in spline.roots(extrapolate=False) if r[k] <= x <= r[k + 1]]
    return float(roots[0]) if roots else float(r[k] + (r[k + 1] - r[k]) * f[k] / (f[k] - f[k + 1]))


def derivative_force(distance, energy) -> np.ndarray:
    """``-dE/dR`` (kcal/mol/angstrom) of a smooth fit (natural cubic spline) through an
    energy curve (kcal/mol), at the sampled distances; a check on analytic forces."""
    r = np.asarray(distance, dtype=float)
    e = np.asarray(energy, dtype=float)
    out = np.full(r.shape, np.nan)
    ok = np.isfinite(r) & np.isfinite(e)
    if ok.sum() < 4:
        return out
    order = np.argsort(r[ok])
    spline = CubicSpline(r[ok][order], e[ok][order], bc_type="natural")
    out[ok] = -spline(r[ok], 1)
    return out


def curve_interpolant(distance, values, n: int = 240) -> tuple[np.ndarray, np.ndarray]:
    """The smooth curve drawn through a scan's points: the natural cubic spline that
    :func:`find_minimum` and :func:`force_zero_crossing` use, sampled at ``n`` distances
    between the first and last finite point (same units as the input). Fewer than four
    finite points give the points themselves (no interpolant)."""
    r, v = finite_sorted(distance, values)
    if len(r) < 4:
        return r, v
    grid = np.linspace(r[0], r[-1], n)
    return grid, CubicSpline(r, v, bc_type="natural")(grid)


def value_at(distance, values, x: float) -> float:
    """``values`` at distance ``x`` (angstrom) on the natural cubic spline through the
    finite points (linear with fewer than four points); NaN outside the sampled range."""
    r, v = finite_sorted(distance, values)
    if not np.isfinite(x) or len(r) == 0 or not r[0] <= x <= r[-1]:
        return float("nan")
    if len(r) < 4:
        return float(np.interp(x, r, v))
    return float(CubicSpline(r, v, bc_type="natural")(x))


def headline_table(ds: xr.Dataset, variable: str | None = None) -> list[dict]:
    """The numbers a scan is opened for, one row per level: the minimum and well depth
    (:func:`minimum_table`, as ``interkit show`` prints them), where the force along the
    coordinate vanishes (:func:`force_zero_crossing`; NaN without forces) and the BSSE at
    the minimum (:func:`value_at` on the ``bsse`` curve; NaN without counterpoise).

    ``variable`` defaults to ``e_int``, or ``e_int_nocp`` for a scan run without
    counterpoise. Energies in kcal/mol, distances in angstrom.
    """
    ds = flatten_dispersion(ds)
    if variable is None:
        variable = "e_int_nocp" if ds.attrs.get("counterpoise", "") == "none" else "e_int"
    r = ds["distance"].values
    rows = []
    for row in minimum_table(ds, variable):
        level = row["level"]
        force_zero = (force_zero_crossing(r, ds["force_along"].sel(level=level).values)
                      if "force_along" in ds.variables else float("nan"))
        bsse = value_at(r, ds["bsse"].sel(level=level).values, row["r_min_angstrom"]) \
            if "bsse" in ds.variables else float("nan")
        rows.append(dict(row, variable=variable, force_zero_angstrom=force_zero,
                         bsse_at_minimum_kcal_per_mol=bsse))
    return rows
