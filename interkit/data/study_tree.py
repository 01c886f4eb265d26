"""The results of a study as an ``xarray.DataTree``, saved to and read from one netCDF file.

Layout::

    /                       the study's summary (below) and attrs: schema, study_json
    /<system name>          that system's scan Dataset, exactly as run_scan returns it

Root variables (dimension ``system``, the systems with results, in study order;
``curve``, the level labels with dispersion schemes folded in as in
:func:`interkit.data.dispersion.flatten_dispersion`; ``reference_point``):

===========================  =========================  ==========
variable                     dimensions                 units
===========================  =========================  ==========
category                     system                     -
n_points                     system                     1
n_failed_points              system                     1 (any level failed there)
equilibrium_distance         system                     angstrom
e_int_equilibrium            system, curve              kcal/mol
reference_system             reference_point            -
reference_distance           reference_point            angstrom
reference_e_int              reference_point            kcal/mol
reference_source             reference_point            -
===========================  =========================  ==========

The *equilibrium point* of a system is its point with the factor closest to 1: the
geometry it was given (benchmark sets give their equilibrium geometries). Root names
use dimensions the scan nodes do not, so no coordinate is inherited by them.
"""

from __future__ import annotations

import json
import os
from datetime import datetime, timezone

import numpy as np
import xarray as xr

from ..errors import InputError
from .dispersion import flatten_dispersion
from .schema import SCHEMA_VERSION as SCAN_SCHEMA_VERSION
from .schema import _versions, validate

STUDY_SCHEMA_VERSION = "interkit-study/1"


def equilibrium_index(ds: xr.Dataset) -> int:
    """Index (along ``distance``) of the point whose factor is closest to 1 (the given
    geometry); the first point when no factor is known."""
    factor = np.asarray(ds["factor"].values, dtype=float) if "factor" in ds.variables else np.array([np.nan])
    if not np.isfinite(factor).any():
        return 0
    return int(np.nanargmin(np.abs(factor - 1.0)))


def curve_labels(datasets: dict[str, xr.Dataset]) -> list[str]:
    """Every flattened level label of the datasets, in first-seen order."""
    out: list[str] = []
    for ds in datasets.values():
        for lab in flatten_dispersion(ds)["level"].values:
            if str(lab) not in out:
                out.append(str(lab))
    return out


def study_summary(study, datasets: dict[str, xr.Dataset]) -> xr.Dataset:
    """The root Dataset of a study tree (see the module docstring)."""
    names = [n for n in study.names if n in datasets]
    curves = curve_labels(datasets)
    eq = np.full((len(names), len(curves)), np.nan)
    n_points, n_failed, r_eq = [], [], []
    for i, name in enumerate(names):
        ds = datasets[name]
        flat = flatten_dispersion(ds)
        k = equilibrium_index(ds)
        for lab in flat["level"].values:
            eq[i, curves.index(str(lab))] = float(flat["e_int"].sel(level=lab).isel(distance=k))
        n_points.append(int(ds.sizes["distance"]))
        n_failed.append(int((ds["status"] == "failed").any("level").sum()))
        r_eq.append(float(ds["distance"].values[k]))
    cats = study.categories
    out = xr.Dataset(
        {"category": ("system", np.array([cats[n] for n in names], dtype=str), {"long_name": "category"}),
         "n_points": ("system", np.array(n_points, dtype=np.int64), {"units": "1"}),
         "n_failed_points": ("system", np.array(n_failed, dtype=np.int64),
                             {"units": "1", "long_name": "points where a level failed"}),
         "equilibrium_distance": ("system", np.array(r_eq, dtype=float),
                                  {"units": "angstrom", "long_name": "distance of the point at factor closest to 1"}),
         "e_int_equilibrium": (("system", "curve"), eq,
                               {"units": "kcal/mol", "long_name": "interaction energy at the equilibrium point"})},
        coords={"system": ("system", np.array(names, dtype=str)),
                "curve": ("curve", np.array(curves, dtype=str), {"long_name": "level (dispersion folded in)"})},
    )
    refs = [r for r in study.reference_table() if r[0] in datasets]
    if refs:
        dist = [float(datasets[s]["distance"].values[p]) for s, p, _, _ in refs]
        out["reference_system"] = ("reference_point", np.array([r[0] for r in refs], dtype=str))
        out["reference_distance"] = ("reference_point", np.array(dist), {"units": "angstrom"})
        out["reference_e_int"] = ("reference_point", np.array([r[2] for r in refs], dtype=float),
                                  {"units": "kcal/mol", "long_name": "reference interaction energy"})
        out["reference_source"] = ("reference_point", np.array([r[3] or "-" for r in refs], dtype=str))
    return out


def build_study_tree(study, datasets: dict[str, xr.Dataset], failures: dict[str, str] | None = None,
                     run_attrs: dict | None = None) -> xr.DataTree:
    """Assemble the DataTree of a study from its systems' scan Datasets (pure)."""
    root = study_summary(study, datasets)
    root.attrs = {"schema": STUDY_SCHEMA_VERSION, "study_name": study.name, "study_json": study.to_json(),
                  "systems_without_results_json": json.dumps(failures or {}, sort_keys=True),
                  "created": datetime.now(timezone.utc).isoformat(timespec="seconds"),
                  **_versions(), **(run_attrs or {})}
    children = {name: xr.DataTree(datasets[name]) for name in study.names if name in datasets}
    return xr.DataTree(root, children=children, name=None)


def system_datasets(tree: xr.DataTree) -> dict[str, xr.Dataset]:
    """System name -> its scan Dataset (nothing inherited from the root)."""
    return {name: node.to_dataset(inherit=False) for name, node in tree.children.items()}


def validate_study(tree) -> None:
    """Check the layout of a study tree; InputError naming the problem."""
    if not isinstance(tree, xr.DataTree):
        raise InputError(f"study: expected an xarray.DataTree, got {type(tree).__name__}")
    if tree.attrs.get("schema") != STUDY_SCHEMA_VERSION:
        raise InputError(f"study attrs.schema: {tree.attrs.get('schema')!r} is not {STUDY_SCHEMA_VERSION!r}")
    if "study_json" not in tree.attrs:
        raise InputError("study attrs.study_json: missing")
    for name, ds in system_datasets(tree).items():
        try:
            validate(ds)
        except InputError as exc:
            raise InputError(f"study node {name!r}: {exc}") from None


def study_of(tree: xr.DataTree):
    """The :class:`~interkit.model.study.Study` recorded in a study tree."""
    from ..model.study import Study

    return Study.from_json(tree.attrs["study_json"])


def save_study(tree: xr.DataTree, path: str | os.PathLike) -> None:
    """Write a study tree to one netCDF-4 file (atomically: temporary file, then rename)."""
    validate_study(tree)
    from .netcdf import write_netcdf

    write_netcdf(tree, path)


def open_study(path: str | os.PathLike) -> xr.DataTree:
    """Read a study tree written by :func:`save_study` (fully loaded, file closed)."""
    from .netcdf import read_netcdf

    path = os.fspath(path)
    tree = read_netcdf(path, "study", tree=True)
    if tree.attrs.get("schema") != STUDY_SCHEMA_VERSION:
        found = tree.attrs.get("schema")
        hint = " (a scan file: open it with interkit.open_scan)" if found == SCAN_SCHEMA_VERSION else ""
        raise InputError(f"study file {path!r}: schema {found!r} is not {STUDY_SCHEMA_VERSION!r}{hint}")
    validate_study(tree)
    return tree


def is_study_file(path: str | os.PathLike) -> bool:
    """True when ``path`` is a netCDF file whose root says it is a study."""
    try:
        import h5netcdf

        with h5netcdf.File(os.fspath(path), "r") as fh:
            return fh.attrs.get("schema") == STUDY_SCHEMA_VERSION
    except Exception:
        return False
