"""Error statistics of one interaction-energy curve against a reference curve.

Errors are ``method - reference`` at common distances (angstrom): kcal/mol, or with
``relative=True`` per cent of the reference's magnitude. A negative signed error means
the method binds more strongly than the reference there.

The statistics (the columns of :data:`STATISTICS_COLUMNS`, shared by the report,
``interkit compare`` and the comparison widget) are the mean absolute error, the mean
signed error, the root-mean-square error, the largest absolute error, the error at the
reference's interpolated minimum, the shift of the minimum position (ΔR_min) and the
well-depth error (ΔDe).

Region (``region``): which points enter the mean, RMS and largest errors.

* ``"all"``: every point where both curves are finite;
* ``"bound"``: the points where the reference is attractive (E_int < 0), which leaves
  out the repulsive wall whose large energies otherwise dominate an RMSE;
* ``"window"``: the points within ``window_angstrom`` (default 0.5 Å) of the
  reference's interpolated minimum.

The error at the reference minimum, ΔR_min and ΔDe describe the whole curves (their
minima) and do not depend on the region.

Relative errors (``relative=True``): ``100 (E - E_ref) / |E_ref|`` per point. A point
whose reference magnitude is below ``near_zero_kcal_per_mol`` (default 0.1 kcal/mol: the
crossing of the wall and the long-range tail, where a per-cent error has no meaning) is
left out of the relative statistics and counted in ``n_near_zero``; the error at the
minimum and ΔDe are given per cent of the reference well depth; ΔR_min stays in
angstrom.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np
from scipy.interpolate import CubicSpline

from ..errors import InputError
from .minima import find_minimum

REGIONS = ("all", "bound", "window")
#: half-width of the default window around the reference minimum, angstrom
DEFAULT_WINDOW_ANGSTROM = 0.5
#: reference magnitudes below this (kcal/mol) are left out of relative errors
NEAR_ZERO_KCAL_PER_MOL = 0.1

#: the statistics table: (column stem, header); the column name is the stem with the unit
#: suffix of :mod:`interkit.data.columns` (``_kcal_per_mol``, or ``_percent`` with relative
#: errors), except ΔR_min, always ``minimum_shift_angstrom``
STATISTICS_COLUMNS = (
    ("mae", "MAE"),
    ("mean_signed_error", "mean signed error"),
    ("rmse", "RMSE"),
    ("max_abs_error", "largest error"),
    ("error_at_reference_minimum", "error at ref. minimum"),
    ("minimum_shift", "ΔR_min"),
    ("well_depth_error", "ΔDe"),
)


def statistics_columns(relative: bool = False) -> list[tuple[str, str, str]]:
    """The statistics columns as (column name, header, unit) for kcal/mol or per-cent errors."""
    unit, suffix = ("%", "percent") if relative else ("kcal/mol", "kcal_per_mol")
    out = []
    for stem, header in STATISTICS_COLUMNS:
        if stem == "minimum_shift":
            out.append(("minimum_shift_angstrom", header, "Å"))
        else:
            out.append((f"{stem}_{suffix}", header, unit))
    return out


@dataclass(frozen=True)
class CurveComparison:
    """Statistics of one curve against a reference sampled at the same distances.

    Attributes
    ----------
    n_compared : int
        Points where both curves are finite.
    n_skipped : int
        Points skipped because either value is NaN.
    mae_kcal_per_mol : float
        Mean absolute error.
    rmse_kcal_per_mol : float
        Root-mean-square error.
    max_abs_error_kcal_per_mol : float
        Largest absolute error.
    max_abs_error_at_angstrom : float
        Distance of the largest absolute error.
    mean_signed_error_kcal_per_mol : float
        Mean of ``method - reference``.
    reference_lowest_point_angstrom : float
        Distance of the reference's lowest sampled (compared) point.
    error_at_reference_lowest_point_kcal_per_mol : float
        Error at that point.
    reference_minimum_angstrom : float
        Interpolated minimum of the reference (:func:`interkit.analysis.minima.find_minimum`).
    error_at_reference_minimum_kcal_per_mol : float
        Method (natural cubic spline through its compared points) minus reference at the
        reference's interpolated minimum; NaN with fewer than 4 compared points.
    minimum_shift_angstrom : float
        Method minimum position minus reference minimum position (both interpolated).
    well_depth_error_kcal_per_mol : float
        Method well depth minus reference well depth (positive = deeper well).
    """

    n_compared: int
    n_skipped: int
    mae_kcal_per_mol: float
    rmse_kcal_per_mol: float
    max_abs_error_kcal_per_mol: float
    max_abs_error_at_angstrom: float
    mean_signed_error_kcal_per_mol: float
    reference_lowest_point_angstrom: float
    error_at_reference_lowest_point_kcal_per_mol: float
    reference_minimum_angstrom: float
    error_at_reference_minimum_kcal_per_mol: float
    minimum_shift_angstrom: float
    well_depth_error_kcal_per_mol: float

    def to_dict(self) -> dict:
        return asdict(self)


def curve_errors(distance, energy, reference) -> CurveComparison:
    """Compare a curve with a reference curve sampled at the same distances.

    Parameters
    ----------
    distance : array-like
        Distances in angstrom (positive; any order, no repeats).
    energy : array-like
        Method interaction energies in kcal/mol (NaN = missing).
    reference : array-like
        Reference interaction energies in kcal/mol at the same distances (NaN = missing).

    Returns
    -------
    CurveComparison

    Raises
    ------
    InputError
        Mismatched lengths, non-positive or repeated distances, or no point where both
        curves are finite.
    """
    r = np.asarray(distance, dtype=float)
    e = np.asarray(energy, dtype=float)
    ref = np.asarray(reference, dtype=float)
    if r.ndim != 1:
        raise InputError(f"distance: expected a 1-D array, got shape {r.shape}")
    if e.shape != r.shape:
        raise InputError(f"energy: length {e.size} does not match distance length {r.size}")
    if ref.shape != r.shape:
        raise InputError(f"reference: length {ref.size} does not match distance length {r.size}")
    if not np.all(np.isfinite(r)):
        raise InputError(f"distance: non-finite value {r[~np.isfinite(r)][0]!r}")
    if np.any(r <= 0):
        raise InputError(f"distance: value {r[r <= 0][0]!r} angstrom is not positive")
    if len(np.unique(r)) != len(r):
        raise InputError("distance: repeated values")
    ok = np.isfinite(e) & np.isfinite(ref)
    n = int(ok.sum())
    if n == 0:
        raise InputError("energy: no point where both energy and reference are finite")
    order = np.argsort(r[ok])
    r, e, ref = r[ok][order], e[ok][order], ref[ok][order]
    err = e - ref
    k_max = int(np.argmax(np.abs(err)))
    k_ref = int(np.argmin(ref))
    m_ref = find_minimum(r, ref)
    m_met = find_minimum(r, e)
    at_min = math.nan
    if n >= 4 and np.isfinite(m_ref.r_min_angstrom):
        spline = CubicSpline(r, e, bc_type="natural")
        at_min = float(spline(m_ref.r_min_angstrom)) - m_ref.e_min_kcal_per_mol
    return CurveComparison(
        n_compared=n,
        n_skipped=int(ok.size - n),
        mae_kcal_per_mol=float(np.mean(np.abs(err))),
        rmse_kcal_per_mol=float(np.sqrt(np.mean(err**2))),
        max_abs_error_kcal_per_mol=float(abs(err[k_max])),
        max_abs_error_at_angstrom=float(r[k_max]),
        mean_signed_error_kcal_per_mol=float(np.mean(err)),
        reference_lowest_point_angstrom=float(r[k_ref]),
        error_at_reference_lowest_point_kcal_per_mol=float(err[k_ref]),
        reference_minimum_angstrom=m_ref.r_min_angstrom,
        error_at_reference_minimum_kcal_per_mol=at_min,
        minimum_shift_angstrom=m_met.r_min_angstrom - m_ref.r_min_angstrom,
        well_depth_error_kcal_per_mol=m_met.well_depth_kcal_per_mol - m_ref.well_depth_kcal_per_mol,
    )


def check_region(region: str, window_angstrom: float | None) -> float | None:
    """Validate a region choice; return the window half-width (angstrom) or None."""
    if region not in REGIONS:
        raise InputError(f"region: {region!r} is not one of {', '.join(REGIONS)}")
    if region != "window":
        if window_angstrom is not None:
            raise InputError(f"window_angstrom: {window_angstrom!r} given, but region is {region!r}, not 'window'")
        return None
    w = DEFAULT_WINDOW_ANGSTROM if window_angstrom is None else window_angstrom
    if isinstance(w, bool) or not isinstance(w, (int, float, np.integer, np.floating)) \
            or not math.isfinite(float(w)) or float(w) <= 0:
        raise InputError(f"window_angstrom: {window_angstrom!r} is not a positive number of angstrom")
    return float(w)


def region_mask(distance, reference, region: str = "all", window_angstrom: float | None = None
                ) -> tuple[np.ndarray, str]:
    """The points of ``region`` (a boolean mask over ``distance``) and a description.

    ``"window"`` is centred on the reference's interpolated minimum over its finite
    points; a reference without a minimum inside the scan is refused (InputError).
    """
    window = check_region(region, window_angstrom)
    r = np.asarray(distance, dtype=float)
    ref = np.asarray(reference, dtype=float)
    finite = np.isfinite(ref)
    if region == "all":
        return finite, "all points"
    if region == "bound":
        return finite & (ref < 0), "bound region (reference E_int < 0)"
    m = find_minimum(r[finite], ref[finite])
    if not m.interior:
        raise InputError("region: the reference curve has no minimum inside the scan, so a window "
                         "around it is undefined; choose region 'all' or 'bound'")
    return finite & (np.abs(r - m.r_min_angstrom) <= window + 1e-12), \
        f"within ±{window:g} Å of the reference minimum ({m.r_min_angstrom:.3f} Å)"


def curve_statistics(distance, energy, reference, region: str = "all", window_angstrom: float | None = None,
                     relative: bool = False, near_zero_kcal_per_mol: float = NEAR_ZERO_KCAL_PER_MOL) -> dict:
    """The statistics of :data:`STATISTICS_COLUMNS` for one curve (see the module docstring).

    Parameters
    ----------
    distance, energy, reference : array-like
        As in :func:`curve_errors` (angstrom, kcal/mol; NaN = missing).
    region : {'all', 'bound', 'window'}
    window_angstrom : float, optional
        Half-width of the window (region ``'window'``; default 0.5 Å).
    relative : bool
        Errors in per cent of ``|reference|`` instead of kcal/mol.
    near_zero_kcal_per_mol : float
        With ``relative``, points whose ``|reference|`` is below this are left out.

    Returns
    -------
    dict
        The columns of :func:`statistics_columns`, ``n_compared`` (points in the
        statistics), ``n_skipped`` (points with a NaN on either curve), ``max_abs_error_at_angstrom``
        and, with ``relative``, ``n_near_zero``.

    Raises
    ------
    InputError
        As :func:`curve_errors`, or no point of the curves in the region.
    """
    whole = curve_errors(distance, energy, reference)
    r = np.asarray(distance, dtype=float)
    e = np.asarray(energy, dtype=float)
    ref = np.asarray(reference, dtype=float)
    in_region, where = region_mask(r, ref, region, window_angstrom)
    keep = in_region & np.isfinite(e)
    out = {"n_skipped": whole.n_skipped, "minimum_shift_angstrom": whole.minimum_shift_angstrom}
    err = e[keep] - ref[keep]
    r_kept = r[keep]
    if relative:
        if not (math.isfinite(near_zero_kcal_per_mol) and near_zero_kcal_per_mol >= 0):
            raise InputError(f"near_zero_kcal_per_mol: {near_zero_kcal_per_mol!r} is not a non-negative number")
        big = np.abs(ref[keep]) >= near_zero_kcal_per_mol
        out["n_near_zero"] = int((~big).sum())
        err, r_kept = 100.0 * err[big] / np.abs(ref[keep][big]), r_kept[big]
        e_min = _reference_minimum_energy(r, e, ref)
        scale = 100.0 / -e_min if e_min < 0 else math.nan   # per cent of the reference well depth
        suffix = "percent"
        out["error_at_reference_minimum_percent"] = whole.error_at_reference_minimum_kcal_per_mol * scale
        out["well_depth_error_percent"] = whole.well_depth_error_kcal_per_mol * scale
    else:
        suffix = "kcal_per_mol"
        out["error_at_reference_minimum_kcal_per_mol"] = whole.error_at_reference_minimum_kcal_per_mol
        out["well_depth_error_kcal_per_mol"] = whole.well_depth_error_kcal_per_mol
    if err.size == 0:
        raise InputError(f"region: no point of this curve lies in the {where}"
                         + (" with |reference| above the near-zero limit" if relative else ""))
    k = int(np.argmax(np.abs(err)))
    out.update({"n_compared": int(err.size), f"mae_{suffix}": float(np.mean(np.abs(err))),
                f"mean_signed_error_{suffix}": float(np.mean(err)),
                f"rmse_{suffix}": float(np.sqrt(np.mean(err ** 2))),
                f"max_abs_error_{suffix}": float(abs(err[k])), "max_abs_error_at_angstrom": float(r_kept[k])})
    return out


def _reference_minimum_energy(r, e, ref) -> float:
    """The reference's interpolated minimum energy (kcal/mol) over the points where both
    curves are finite (those of :func:`curve_errors`); NaN without a finite point."""
    ok = np.isfinite(ref) & np.isfinite(e)
    return find_minimum(r[ok], ref[ok]).e_min_kcal_per_mol
