"""Method-versus-reference statistics of interaction-energy curves.

Errors are ``method - reference`` in kcal/mol at common distances (angstrom). A negative
signed error means the method binds more strongly than the reference there.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import xarray as xr

from ..errors import InputError
from ..model.levels import REFERENCE_PREFERENCE, default_reference  # noqa: F401  (part of this module's API)
from .error_statistics import (  # noqa: F401  (part of this module's API)
    DEFAULT_WINDOW_ANGSTROM,
    NEAR_ZERO_KCAL_PER_MOL,
    REGIONS,
    CurveComparison,
    check_region,
    curve_errors,
    curve_statistics,
    region_mask,
    statistics_columns,
)
from .reference_curves import (  # noqa: F401  (part of this module's API)
    DISTANCE_COLUMN,
    ENERGY_COLUMN,
    ReferenceCurve,
    curve_pairs,
    reference_from_csv,
    reference_from_file,
    reference_from_scan,
)


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
            from ..model.composite import parse_level

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
                  variable: str = "e_int", reference_dispersion: str | None = None, region: str = "all",
                  window_angstrom: float | None = None, relative: bool = False,
                  near_zero_kcal_per_mol: float = NEAR_ZERO_KCAL_PER_MOL) -> list[dict]:
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
    region, window_angstrom, relative, near_zero_kcal_per_mol :
        The points and the kind of error of the statistics (see
        :mod:`interkit.analysis.error_statistics`; default every point, kcal/mol).

    Returns
    -------
    list of dict
        One row per curve, sorted by its RMSE (``rmse_kcal_per_mol``, or ``rmse_percent``
        with ``relative``; curves with no comparable point last): ``rank``, ``level``
        [, ``dispersion``], ``status``, the whole-curve fields of :class:`CurveComparison`
        and the statistics of :func:`curve_statistics` over the region (which replace
        the whole-curve MAE, RMSE, largest and mean signed errors and ``n_compared``).
    """
    check_region(region, window_angstrom)
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
            values = curve.transpose("distance").values
            try:
                stats = curve_errors(distance, values, ref).to_dict()
                stats.update(curve_statistics(distance, values, ref, region, window_angstrom, relative,
                                              near_zero_kcal_per_mol))
                row["status"] = "ok"
            except InputError as exc:
                stats = {k: math.nan for k in CurveComparison.__dataclass_fields__}
                stats.update({k: math.nan for k, _, _ in statistics_columns(relative)})
                stats.update(n_compared=0, n_skipped=int(distance.size))
                row["status"] = str(exc)
            row.update(stats)
            rows.append(row)
    key = "rmse_percent" if relative else "rmse_kcal_per_mol"
    rows.sort(key=lambda d: (not np.isfinite(d[key]), d[key] if np.isfinite(d[key]) else 0.0))
    return [{"rank": i + 1, **row} for i, row in enumerate(rows)]


@dataclass(frozen=True)
class ComparisonTable:
    """The statistics table of a scan's curves against one reference curve.

    Attributes
    ----------
    reference : str
        Folded label of the reference curve, or ``"external curve (<source>)"``.
    chosen_by : str
        ``"given"`` or ``"default rule"`` (:func:`interkit.model.levels.default_reference`).
    region : str
        ``"all"``, ``"bound"`` or ``"window"``.
    region_text : str
        The region in words (with the window and the reference minimum).
    relative : bool
        Errors in per cent of ``|reference|`` instead of kcal/mol.
    variable : str
        The energy compared (``e_int``, ``e_int_nocp`` for a scan without counterpoise, or
        the one asked for, e.g. ``e_int_halfcp``).
    columns : list of (str, str, str)
        (column name, header, unit) of the statistics, in order; when the reference has a
        basis-set uncertainty, the last is ``reference_uncertainty_kcal_per_mol``: its
        mean over the points each curve is compared at.
    rows : list of dict
        :func:`ranking_table` rows with their folded label under ``"curve"``.
    reference_uncertainty_at_minimum_kcal_per_mol : float
        The reference's basis-set uncertainty at its lowest computed point (NaN when it
        has none).
    reference_uncertainty_mean_kcal_per_mol : float
        Its mean over the points of the region (NaN when it has none).
    """

    reference: str
    chosen_by: str
    region: str
    region_text: str
    relative: bool
    variable: str
    columns: list = field(default_factory=list)
    rows: list = field(default_factory=list)
    reference_uncertainty_at_minimum_kcal_per_mol: float = math.nan
    reference_uncertainty_mean_kcal_per_mol: float = math.nan

    @property
    def has_reference_uncertainty(self) -> bool:
        """True when the reference has a basis-set uncertainty (an extrapolated level)."""
        return math.isfinite(self.reference_uncertainty_mean_kcal_per_mol)

    def uncertainty_text(self, unit: str = "kcal/mol") -> str:
        """One sentence on the reference's basis-set uncertainty (in ``unit``), or ``''``."""
        if not self.has_reference_uncertainty:
            return ""
        from ..units import convert_energy

        at_min, mean = (convert_energy(v, "kcal/mol", unit) for v in (
            self.reference_uncertainty_at_minimum_kcal_per_mol, self.reference_uncertainty_mean_kcal_per_mol))
        return (f"the reference's basis-set uncertainty is {at_min:.3f} {unit} at its lowest point and "
                f"{mean:.3f} {unit} on average over the region; column 'ref. basis-set uncertainty' "
                f"({unit}) is its mean over the points each curve is compared at")

    def csv_rows(self) -> list[list]:
        """Comment line, header and rows of the CSV form (column convention of
        :mod:`interkit.data.columns`)."""
        keys = ["rank", "curve"] + [k for k, _, _ in self.columns] + ["n_compared", "status"]
        head = [f"# reference: {self.reference} ({self.chosen_by}); region: {self.region_text}; "
                f"errors: {'per cent of |reference|' if self.relative else 'kcal/mol'}, curve minus reference"
                + (f"; {self.uncertainty_text()}" if self.has_reference_uncertainty else "")]
        return [head, keys] + [[row.get(k, "") for k in keys] for row in self.rows]


def comparison_table(ds: xr.Dataset, reference: str | None = None, external: ReferenceCurve | None = None,
                     region: str = "all", window_angstrom: float | None = None, relative: bool = False,
                     near_zero_kcal_per_mol: float = NEAR_ZERO_KCAL_PER_MOL,
                     variable: str | None = None, include_components: bool = False) -> ComparisonTable:
    """The one statistics table of the report, ``interkit compare`` and the comparison widget.

    Parameters
    ----------
    ds : xarray.Dataset
        A scan (``e_int`` compared, or ``e_int_nocp`` for a scan without counterpoise).
    reference : str, optional
        Folded label of the reference curve of ``ds`` (e.g. ``'mp2/def2-svp'`` or
        ``'b3lyp-d3bj/def2-svp'``); by default the one rule
        :func:`interkit.model.levels.default_reference` over the scan's curves.
    external : ReferenceCurve, optional
        An external reference curve instead (then ``reference`` must be None).
    region, window_angstrom, relative, near_zero_kcal_per_mol :
        See :mod:`interkit.analysis.error_statistics`.
    variable : str, optional
        The energy compared: ``'e_int'``, ``'e_int_nocp'`` or ``'e_int_halfcp'``
        (half-counterpoise); default ``e_int``, or ``e_int_nocp`` for a scan without
        counterpoise.
    include_components : bool
        Also rank the rows that a composite level is made of and that were not asked for
        (``level_kind == 'component'``, e.g. ``mp2/aug-cc-pvtz`` inside
        ``mp2/aug-cc-pvtz~aug-cc-pvqz + ccsd(t)/aug-cc-pvdz``); default False.

    Returns
    -------
    ComparisonTable
        When the reference level has a basis-set uncertainty for ``variable``
        (``e_int_basis_uncertainty``), a last column gives it, so a reader sees whether
        a curve's error lies within the reference's own uncertainty.
    """
    from .basis_uncertainty import basis_uncertainty, check_curve_variable, uncertainty_summary

    if variable is None:
        variable = "e_int_nocp" if ds.attrs.get("counterpoise", "") == "none" else "e_int"
    else:
        check_curve_variable(ds, variable)
    window = check_region(region, window_angstrom)
    options = dict(variable=variable, region=region, window_angstrom=window, relative=relative,
                   near_zero_kcal_per_mol=near_zero_kcal_per_mol)
    pairs = curve_pairs(ds, variable)
    if external is not None:
        if reference is not None:
            raise InputError("reference: give a curve of the scan or an external curve, not both")
        ref, label = resolve_reference(ds, reference=external, variable=variable)
        rows, chosen_by = ranking_table(ds, reference=external, **options), "given"
    else:
        if not pairs:
            raise InputError("scan: no curve has a finite interaction energy to compare")
        label = reference if reference is not None else default_reference(list(pairs))
        chosen_by = "given" if reference is not None else "default rule"
        if label not in pairs:
            raise InputError(f"reference: {label!r} is not a curve of the scan ({', '.join(pairs)})")
        level, scheme = pairs[label]
        ref, _ = resolve_reference(ds, reference_level=level, reference_dispersion=scheme, variable=variable)
        rows = ranking_table(ds, reference_level=level, reference_dispersion=scheme, **options)
    from ..data.dispersion import scheme_label
    from ..model.composite import parse_level

    if not include_components and "level_kind" in ds.coords:
        kind = dict(zip((str(x) for x in ds["level"].values), (str(k) for k in ds["level_kind"].values)))
        rows = [row for row in rows if kind.get(row["level"]) != "component"]
    for row in rows:
        scheme = row.get("dispersion")
        row["curve"] = scheme_label(parse_level(row["level"]), scheme) if scheme else row["level"]
    in_region, region_text = region_mask(ds["distance"].values, ref, region, window)
    columns = statistics_columns(relative)
    unc = basis_uncertainty(ds, level, variable, scheme) if external is None else None
    summary = {"at_minimum_kcal_per_mol": math.nan, "mean_kcal_per_mol": math.nan}
    if unc is not None:
        summary = uncertainty_summary(ref, unc, in_region)
        columns.append(("reference_uncertainty_kcal_per_mol", "ref. basis-set uncertainty", "kcal/mol"))
        da = ds[variable]
        for row in rows:
            curve = da.sel(level=row["level"])
            if "dispersion" in curve.dims:
                curve = curve.sel(dispersion=row["dispersion"])
            compared = in_region & np.isfinite(curve.transpose("distance").values)
            if relative:
                compared &= np.abs(ref) >= near_zero_kcal_per_mol
            row["reference_uncertainty_kcal_per_mol"] = uncertainty_summary(ref, unc, compared)["mean_kcal_per_mol"]
    return ComparisonTable(label, chosen_by, region, region_text, bool(relative), variable, columns, rows,
                           summary["at_minimum_kcal_per_mol"], summary["mean_kcal_per_mol"])
