"""Method-versus-reference statistics of interaction-energy curves.

Errors are ``method - reference`` in kcal/mol at common distances (angstrom). A negative
signed error means the method binds more strongly than the reference there.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from pathlib import Path

import numpy as np
import xarray as xr
from scipy.interpolate import CubicSpline

from ..errors import InputError
from ..model.levels import REFERENCE_PREFERENCE, default_reference  # noqa: F401  (part of this module's API)
from .minima import find_minimum

DISTANCE_COLUMN = "distance_angstrom"
ENERGY_COLUMN = "e_int_kcal_per_mol"


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


@dataclass(frozen=True)
class ReferenceCurve:
    """An external reference curve.

    Attributes
    ----------
    distance_angstrom : numpy.ndarray
        Increasing distances of the finite reference points.
    e_int_kcal_per_mol : numpy.ndarray
        Reference interaction energies.
    source : str
        Where the curve was read from.
    """

    distance_angstrom: np.ndarray
    e_int_kcal_per_mol: np.ndarray
    source: str = ""

    def on(self, distance) -> np.ndarray:
        """Reference energies (kcal/mol) at ``distance`` (angstrom) by a natural cubic
        spline; NaN outside the reference's distance range (never extrapolated)."""
        x = np.asarray(distance, dtype=float)
        out = np.full(x.shape, np.nan)
        r, e = self.distance_angstrom, self.e_int_kcal_per_mol
        inside = np.isfinite(x) & (x >= r[0]) & (x <= r[-1])
        if inside.any():
            out[inside] = CubicSpline(r, e, bc_type="natural")(x[inside])
        return out


def reference_from_csv(path, curve: str | None = None) -> ReferenceCurve:
    """Read a reference curve from a CSV file.

    The first non-blank line not starting with ``#`` is a header that follows the column
    convention of :mod:`interkit.data.columns`: ``distance_angstrom`` and
    ``e_int_kcal_per_mol`` (or ``e_int`` in another energy unit, e.g. ``e_int_kj_per_mol``;
    other columns are ignored), or a tidy table (``variable``, ``value``, ``unit``). Every
    CSV curve table interkit exports reads back this way. Rows whose energy is empty or
    ``nan`` are dropped.

    Parameters
    ----------
    path : str or pathlib.Path
        CSV file.
    curve : str, optional
        With several curves in the table (columns ``curve`` or ``level`` [+
        ``dispersion``]), the folded label of the one to read; by default the most
        accurate wavefunction level (:func:`default_reference`).

    Returns
    -------
    ReferenceCurve
        Use :meth:`ReferenceCurve.on` to interpolate onto a scan's distances.

    Raises
    ------
    InputError
        Missing file or column, a row with a missing or non-numeric value, non-positive
        or repeated distances, or fewer than 2 finite points.
    """
    from ..data.columns import read_curve_table

    p = Path(path)
    r, e, label = read_curve_table(p, curve)
    ok = np.isfinite(e)
    r, e = r[ok], e[ok]
    if len(r) < 2:
        raise InputError(f"{p.name}: column {ENERGY_COLUMN!r} has {len(r)} finite value(s); need at least 2")
    order = np.argsort(r)
    r, e = r[order], e[order]
    if np.any(np.diff(r) == 0):
        raise InputError(f"{p.name}: column {DISTANCE_COLUMN!r} repeats the value "
                         f"{r[:-1][np.diff(r) == 0][0]!r}")
    return ReferenceCurve(r, e, f"{p} [{label}]" if label else str(p))


def _energy_array(ds: xr.Dataset, variable: str) -> xr.DataArray:
    if variable not in ds:
        raise InputError(f"variable: {variable!r} is not in the dataset")
    da = ds[variable]
    if da.attrs.get("units") != "kcal/mol":
        raise InputError(f"dataset variable {variable}: units {da.attrs.get('units')!r} is not 'kcal/mol'")
    for dim in ("level", "distance"):
        if dim not in da.dims:
            raise InputError(f"dataset variable {variable}: dimension {dim!r} missing (dims {da.dims})")
    return da


def resolve_reference(ds: xr.Dataset, reference_level: str | None = None, reference=None,
                      variable: str = "e_int", reference_dispersion: str | None = None) -> tuple[np.ndarray, str]:
    """The reference curve at ``ds.distance`` (kcal/mol) and a label for it.

    Parameters are those of :func:`ranking_table`. Returns ``(values, label)``; the
    label names the level (and scheme) or the external curve's source.
    """
    if (reference_level is None) == (reference is None):
        raise InputError("reference: give exactly one of reference_level and reference")
    da = _energy_array(ds, variable)
    distance = ds["distance"].values
    has_disp = "dispersion" in da.dims
    levels = [str(v) for v in ds["level"].values]
    if reference_level is not None:
        if reference_level not in levels:
            raise InputError(f"reference_level: {reference_level!r} is not a level of the dataset ({levels})")
        ref_da = da.sel(level=reference_level)
        if has_disp:
            schemes = [str(v) for v in ds["dispersion"].values]
            if reference_dispersion is not None:
                if reference_dispersion not in schemes:
                    raise InputError(f"reference_dispersion: {reference_dispersion!r} is not a scheme "
                                     f"of the dataset ({schemes})")
                chosen = reference_dispersion
            else:
                finite = [s for s in schemes if np.isfinite(ref_da.sel(dispersion=s).values).any()]
                if not finite:
                    raise InputError(f"reference_level: {reference_level!r} has no finite {variable}")
                chosen = "none" if "none" in finite else finite[0]
            ref_da = ref_da.sel(dispersion=chosen)
        ref = ref_da.transpose("distance").values
        label = reference_level
        if has_disp and chosen != "none":
            from ..data.dispersion import scheme_label
            from ..model.levels import parse_level

            label = scheme_label(parse_level(reference_level), chosen)
    elif isinstance(reference, ReferenceCurve):
        ref = reference.on(distance)
        label = f"external curve ({reference.source})"
    else:
        ref = np.asarray(reference, dtype=float)
        if ref.shape != distance.shape:
            raise InputError(f"reference: length {ref.size} does not match distance length {distance.size}")
        label = "external values"

    return ref, label


def ranking_table(ds: xr.Dataset, reference_level: str | None = None, reference=None,
                  variable: str = "e_int", reference_dispersion: str | None = None) -> list[dict]:
    """Rank the curves of a scan Dataset by RMSE against a reference.

    Parameters
    ----------
    ds : xarray.Dataset
        Scan with dims ``level`` and ``distance`` (angstrom); ``variable`` in kcal/mol.
        If ``variable`` also has a ``dispersion`` dimension, every (level, dispersion)
        pair is ranked.
    reference_level : str, optional
        Level of ``ds`` used as reference; its curves are left out of the ranking.
    reference : array-like or ReferenceCurve, optional
        External reference: energies (kcal/mol) at ``ds.distance``, or a
        :class:`ReferenceCurve` (interpolated onto ``ds.distance``; NaN outside its range).
        Give exactly one of ``reference_level`` and ``reference``.
    variable : str
        Energy variable compared.
    reference_dispersion : str, optional
        With a ``dispersion`` dimension, the scheme of the reference level to use; by
        default ``"none"`` if it has finite values there, else the first scheme that does.

    Returns
    -------
    list of dict
        One row per curve, sorted by ``rmse_kcal_per_mol`` (curves with no comparable
        point last): ``rank``, ``level`` [, ``dispersion``], ``status`` and the fields of
        :class:`CurveComparison`.
    """
    da = _energy_array(ds, variable)
    has_disp = "dispersion" in da.dims
    levels = [str(v) for v in ds["level"].values]
    distance = ds["distance"].values
    ref, _ = resolve_reference(ds, reference_level, reference, variable, reference_dispersion)

    rows = []
    for level in levels:
        if level == reference_level and not has_disp:
            continue
        schemes = [str(v) for v in ds["dispersion"].values] if has_disp else [None]
        for disp in schemes:
            if disp is not None and "dispersion_status" in ds and \
                    str(ds["dispersion_status"].sel(level=level, dispersion=disp).values) != "ok":
                continue  # the scheme does not apply to the level (see dispersion_status)
            row = {"level": level}
            curve = da.sel(level=level)
            if disp is not None:
                row["dispersion"] = disp
                curve = curve.sel(dispersion=disp)
                values = curve.transpose("distance").values
                if level == reference_level and (np.array_equal(values, ref, equal_nan=True)
                                                 or np.isnan(values).all()):
                    continue  # the reference itself, or a scheme it does not have
            try:
                stats = curve_errors(distance, curve.transpose("distance").values, ref).to_dict()
                row["status"] = "ok"
            except InputError as exc:
                nan_stats = {k: math.nan for k in CurveComparison.__dataclass_fields__}
                nan_stats.update(n_compared=0, n_skipped=int(distance.size))
                stats = nan_stats
                row["status"] = str(exc)
            row.update(stats)
            rows.append(row)
    rows.sort(key=lambda d: (not np.isfinite(d["rmse_kcal_per_mol"]), d["rmse_kcal_per_mol"]
                             if np.isfinite(d["rmse_kcal_per_mol"]) else 0.0))
    return [{"rank": i + 1, **row} for i, row in enumerate(rows)]




def curve_pairs(ds: xr.Dataset, variable: str | None = None) -> dict[str, tuple[str, str | None]]:
    """Folded label -> (level, scheme or None) of every curve with values of ``variable``
    (default ``e_int``, or ``e_int_nocp`` for a scan run without counterpoise)."""
    from ..data.dispersion import scheme_label
    from ..model.levels import parse_level

    if variable is None:
        variable = "e_int_nocp" if ds.attrs.get("counterpoise", "") == "none" else "e_int"
    out = {}
    if "dispersion" in ds.dims:
        from ..data.dispersion import available_pairs

        for level, scheme in available_pairs(ds):
            if np.isfinite(ds[variable].sel(level=level, dispersion=scheme).values).any():
                out[scheme_label(parse_level(level), scheme)] = (level, scheme)
    else:
        for level in ds["level"].values:
            if np.isfinite(ds[variable].sel(level=level).values).any():
                out[str(level)] = (str(level), None)
    return out


def reference_from_scan(path, curve: str | None = None) -> ReferenceCurve:
    """A reference curve taken from another saved scan (netCDF written by ``save_scan``).

    Parameters
    ----------
    path : str or pathlib.Path
        The scan file, e.g. a CCSD(T) scan of the same dimer along the same coordinate.
    curve : str, optional
        Folded label of the curve (e.g. ``'ccsd(t)/aug-cc-pvtz'`` or
        ``'b3lyp-d3bj/def2-tzvp'``); by default the most accurate wavefunction level.

    Returns
    -------
    ReferenceCurve
        Its finite points, interpolated onto another scan's distances by
        :meth:`ReferenceCurve.on`.
    """
    from ..data.schema import open_scan

    ds = open_scan(path)
    pairs = curve_pairs(ds)
    if not pairs:
        raise InputError(f"reference scan {str(path)!r}: no curve has values")
    label = curve if curve is not None else default_reference(list(pairs))
    if label not in pairs:
        raise InputError(f"reference curve: {label!r} is not a curve of {str(path)!r} ({', '.join(pairs)})")
    level, scheme = pairs[label]
    da = ds["e_int_nocp" if ds.attrs.get("counterpoise", "") == "none" else "e_int"].sel(level=level)
    if scheme is not None:
        da = da.sel(dispersion=scheme)
    r, e = ds["distance"].values, da.transpose("distance").values
    keep = np.isfinite(e)
    if keep.sum() < 2:
        raise InputError(f"reference curve {label!r} of {str(path)!r}: fewer than 2 finite points")
    return ReferenceCurve(r[keep], e[keep], f"{Path(path).name} [{label}]")


def reference_from_file(path, curve: str | None = None) -> ReferenceCurve:
    """A reference curve from a CSV file (:func:`reference_from_csv`) or a saved scan
    (``.nc``, :func:`reference_from_scan`); ``curve`` chooses the curve of either."""
    if str(path).lower().endswith(".nc"):
        return reference_from_scan(path, curve)
    return reference_from_csv(path, curve)
