"""Statistics of a study against a reference: which method errs how much, where, on what.

Errors are ``method - reference`` in kcal/mol at the same point of the same system; a
negative signed error means the method binds more strongly (overbinds). The reference
is either the study's own reference values (from its CSV, TOML or the S22B table), a
CSV table of the layout of :mod:`interkit.model.study_folder`, or one level (curve) of
the study itself.

Choices:

* ``points='curve'`` uses every point of every curve that has a reference value;
  ``points='equilibrium'`` only each system's equilibrium point (factor closest to 1,
  see :func:`interkit.data.study_tree.equilibrium_index`).
* ``region='all'`` keeps every point; ``'bound'`` the points where the reference is
  negative; ``'minimum'`` the points near the reference minimum of their system, where
  the reference lies in the lower half of that system's well
  (``E_ref <= 0.5 * min E_ref``, with ``min E_ref < 0``).
* Relative errors (``error / |E_ref|``, percent) only where ``|E_ref| >=``
  :data:`RELATIVE_FLOOR_KCAL_PER_MOL`: near zero they would say nothing.
"""

from __future__ import annotations

import os

import numpy as np
import pandas as pd
import xarray as xr

from ..data.dispersion import flatten_dispersion
from ..data.study_tree import equilibrium_index, system_datasets
from ..errors import InputError
from ..model.levels import default_reference

#: relative errors are computed only where the reference is at least this deep (kcal/mol)
RELATIVE_FLOOR_KCAL_PER_MOL = 0.1
REGIONS = ("all", "bound", "minimum")
POINTS = ("curve", "equilibrium")
#: the reference name meaning "the reference values stored in the study"
STORED = "stored"
OVERALL = "all"

ERROR_COLUMNS = ("system", "category", "curve", "distance_angstrom", "factor", "equilibrium",
                 "e_int_kcal_per_mol", "reference_kcal_per_mol", "error_kcal_per_mol", "relative_error_percent")


def _curves(tree: xr.DataTree) -> list[str]:
    return [str(c) for c in tree["curve"].values] if "curve" in tree.variables else []


def resolve_study_reference(tree: xr.DataTree, reference: str | os.PathLike | None = None) -> str:
    """``'stored'``, a curve label of the study, or the path of a CSV file.

    None picks the stored reference values when the study has any, else the most
    accurate wavefunction level (:func:`interkit.model.levels.default_reference`).
    """
    has_stored = "reference_e_int" in tree.variables
    curves = _curves(tree)
    if reference is None:
        if has_stored:
            return STORED
        if len(curves) < 2:
            raise InputError("reference: the study has no reference values and fewer than two levels; "
                             "give a CSV of reference energies")
        return default_reference(curves)
    ref = os.fspath(reference)
    if ref == STORED:
        if not has_stored:
            raise InputError("reference: 'stored': the study has no reference values")
        return STORED
    if ref in curves:
        return ref
    if ref.lower().endswith(".csv"):
        if not os.path.isfile(ref):
            raise InputError(f"reference: {ref!r} does not exist")
        return ref
    raise InputError(f"reference: {ref!r} is not 'stored', a level of the study ({', '.join(curves)}) "
                     "or a .csv file of reference energies")


def _reference_values(tree: xr.DataTree, datasets: dict, reference: str) -> dict[str, np.ndarray]:
    """System -> reference e_int (kcal/mol) on its points (NaN where none)."""
    out = {name: np.full(ds.sizes["distance"], np.nan) for name, ds in datasets.items()}
    if reference == STORED:
        for s, r, e in zip(tree["reference_system"].values, tree["reference_distance"].values,
                           tree["reference_e_int"].values):
            if str(s) in out:
                k = int(np.argmin(np.abs(datasets[str(s)]["distance"].values - r)))
                out[str(s)][k] = float(e)
        return out
    if reference.lower().endswith(".csv"):
        from ..model.study import REFERENCE_DISTANCE_TOLERANCE_ANGSTROM, REFERENCE_FACTOR_TOLERANCE
        from ..model.study_folder import read_reference_csv

        for row in read_reference_csv(reference):
            if row.system not in datasets:
                continue
            ds = datasets[row.system]
            if row.distance is not None:
                gaps = np.abs(ds["distance"].values - row.distance)
                tol = REFERENCE_DISTANCE_TOLERANCE_ANGSTROM
            else:
                gaps = np.abs(ds["factor"].values - row.factor)
                tol = REFERENCE_FACTOR_TOLERANCE
            if not np.any(gaps <= tol):
                raise InputError(f"{reference}: row {row.line}: no point of system {row.system!r} at "
                                 f"{'distance' if row.distance is not None else 'factor'} "
                                 f"{row.distance if row.distance is not None else row.factor:g}")
            out[row.system][int(np.nanargmin(gaps))] = row.e_kcal
        return out
    for name, ds in datasets.items():
        flat = flatten_dispersion(ds)
        if reference in [str(x) for x in flat["level"].values]:
            out[name] = np.asarray(flat["e_int"].sel(level=reference).values, dtype=float)
    return out


def _in_region(ref: np.ndarray, region: str) -> np.ndarray:
    ok = np.isfinite(ref)
    if region == "all":
        return ok
    if region == "bound":
        return ok & (ref < 0)
    low = np.nanmin(ref) if ok.any() else np.nan
    if not (np.isfinite(low) and low < 0):
        return np.zeros_like(ok)
    return ok & (ref <= 0.5 * low)


def study_errors(tree: xr.DataTree, reference: str | os.PathLike | None = None, region: str = "all",
                 points: str = "curve") -> pd.DataFrame:
    """One row per (system, curve, point) compared with the reference.

    Parameters
    ----------
    tree : xarray.DataTree
        A study (:func:`interkit.run_study`, :func:`interkit.open_study`).
    reference : str or path-like, optional
        See :func:`resolve_study_reference`.
    region : {'all', 'bound', 'minimum'}
    points : {'curve', 'equilibrium'}

    Returns
    -------
    pandas.DataFrame
        Columns :data:`ERROR_COLUMNS`; energies and errors in kcal/mol, distances in
        angstrom, relative errors in percent (NaN below the relative floor). Failed
        points (NaN) are left out, and so are the rows a composite level is made of that
        were not asked for (``level_kind == 'component'``: parts of a reference, not
        candidates; list such a level in the study to rank it). ``attrs`` record the
        reference, region and points.
    """
    if region not in REGIONS:
        raise InputError(f"region: {region!r} is not one of {', '.join(REGIONS)}")
    if points not in POINTS:
        raise InputError(f"points: {points!r} is not one of {', '.join(POINTS)}")
    ref_name = resolve_study_reference(tree, reference)
    datasets = system_datasets(tree)
    refs = _reference_values(tree, datasets, ref_name)
    cats = dict(zip((str(s) for s in tree["system"].values), (str(c) for c in tree["category"].values)))
    rows = []
    for name, ds in datasets.items():
        ref = refs[name]
        keep = _in_region(ref, region)
        k_eq = equilibrium_index(ds)
        if points == "equilibrium":
            only = np.zeros_like(keep)
            only[k_eq] = True
            keep = keep & only
        flat = flatten_dispersion(ds)
        r = ds["distance"].values
        f = ds["factor"].values if "factor" in ds.variables else np.full(r.shape, np.nan)
        parts = ({str(lv) for lv, kind in zip(ds["level"].values, ds["level_kind"].values) if str(kind) == "component"}
                 if "level_kind" in ds.coords else set())
        for lab in flat["level"].values:
            if str(lab) == ref_name or str(lab) in parts:
                continue
            e = np.asarray(flat["e_int"].sel(level=lab).values, dtype=float)
            for k in np.flatnonzero(keep & np.isfinite(e)):
                err = e[k] - ref[k]
                rel = 100.0 * err / abs(ref[k]) if abs(ref[k]) >= RELATIVE_FLOOR_KCAL_PER_MOL else np.nan
                rows.append((name, cats.get(name, ""), str(lab), float(r[k]), float(f[k]), bool(k == k_eq),
                             float(e[k]), float(ref[k]), float(err), float(rel)))
    table = pd.DataFrame(rows, columns=list(ERROR_COLUMNS))
    table.attrs.update(reference=ref_name, region=region, points=points,
                       relative_floor_kcal_per_mol=RELATIVE_FLOOR_KCAL_PER_MOL)
    return table


def _summary(group: pd.DataFrame) -> dict:
    err = group["error_kcal_per_mol"].to_numpy()
    worst = int(np.argmax(np.abs(err)))
    rel = group["relative_error_percent"].to_numpy()
    rel = rel[np.isfinite(rel)]
    return {
        "n_points": int(err.size), "n_systems": int(group["system"].nunique()),
        "mae_kcal_per_mol": float(np.mean(np.abs(err))),
        "mean_signed_error_kcal_per_mol": float(np.mean(err)),
        "rmse_kcal_per_mol": float(np.sqrt(np.mean(err ** 2))),
        "max_abs_error_kcal_per_mol": float(abs(err[worst])),
        "max_error_kcal_per_mol": float(err[worst]),
        "max_error_system": str(group["system"].iloc[worst]),
        "max_error_distance_angstrom": float(group["distance_angstrom"].iloc[worst]),
        "mean_abs_relative_error_percent": float(np.mean(np.abs(rel))) if rel.size else float("nan"),
        "n_relative": int(rel.size),
    }


def study_statistics(tree: xr.DataTree, reference: str | os.PathLike | None = None, region: str = "all",
                     points: str = "curve", by_category: bool = True) -> pd.DataFrame:
    """Error statistics per method (curve), by category and overall.

    Returns
    -------
    pandas.DataFrame
        One row per (curve, category); category ``'all'`` is the whole study. Columns:
        ``n_points``, ``n_systems``, ``mae_kcal_per_mol``, ``mean_signed_error_kcal_per_mol``,
        ``rmse_kcal_per_mol``, ``max_abs_error_kcal_per_mol``, ``max_error_kcal_per_mol``
        (signed) and where (``max_error_system``, ``max_error_distance_angstrom``),
        ``mean_abs_relative_error_percent`` (over ``n_relative`` points). ``attrs`` as
        in :func:`study_errors`.
    """
    errors = study_errors(tree, reference, region, points)
    rows = []
    for curve, group in errors.groupby("curve", sort=False):
        rows.append({"curve": curve, "category": OVERALL, **_summary(group)})
        if by_category:
            for cat, sub in group.groupby("category", sort=True):
                rows.append({"curve": curve, "category": cat, **_summary(sub)})
    table = pd.DataFrame(rows)
    table.attrs.update(errors.attrs)
    if errors.empty:
        raise InputError(f"reference: no point of the study has both a value and a reference "
                         f"({errors.attrs['reference']}, region {region!r}, points {points!r})")
    return table


def rank_methods(tree: xr.DataTree, reference: str | os.PathLike | None = None, region: str = "all",
                 points: str = "curve", category: str = OVERALL) -> pd.DataFrame:
    """The methods ordered by MAE (kcal/mol) over ``category`` (default the whole study),
    ties by RMSE; column ``rank`` from 1."""
    stats = study_statistics(tree, reference, region, points, by_category=category != OVERALL)
    table = stats[stats["category"] == category]
    if table.empty:
        raise InputError(f"category: {category!r} has no compared points "
                         f"(categories: {', '.join(sorted(set(stats['category'])))})")
    table = table.sort_values(["mae_kcal_per_mol", "rmse_kcal_per_mol"], kind="stable").reset_index(drop=True)
    table.insert(0, "rank", np.arange(1, len(table) + 1))
    table.attrs.update(stats.attrs, category=category)
    return table


def error_matrix(tree: xr.DataTree, reference: str | os.PathLike | None = None, region: str = "all",
                 points: str = "equilibrium") -> pd.DataFrame:
    """Signed error (kcal/mol) per system (rows, study order) and method (columns):
    at the equilibrium point, or with ``points='curve'`` the mean signed error over
    the system's compared points. NaN where nothing was compared."""
    errors = study_errors(tree, reference, region, points)
    systems = [str(s) for s in tree["system"].values]
    curves = [c for c in dict.fromkeys(errors["curve"])] if not errors.empty else []
    table = errors.pivot_table(index="system", columns="curve", values="error_kcal_per_mol", aggfunc="mean") \
        if not errors.empty else pd.DataFrame()
    table = table.reindex(index=systems, columns=curves)
    table.attrs.update(errors.attrs)
    return table
