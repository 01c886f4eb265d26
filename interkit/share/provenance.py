"""Provenance of a scan Dataset: what a saved scan records about its own making.

A saved scan carries its full spec (``spec_json``), the versions of every library whose
numbers enter it and the store key of each calculation (``job_key``). This module reads
them back: the Dataset and its spec (:func:`load_saved`, :func:`rebuild_spec`), the
versions and a summary (:func:`version_attrs`, :func:`provenance_summary`), and the
store keys, compared with the keys of today's calculations (:func:`key_agreement`).
"""

from __future__ import annotations

import json
import os

import numpy as np
import xarray as xr

from ..errors import InputError


def load_saved(ds_or_path) -> tuple[xr.Dataset, str | None]:
    """The scan Dataset of ``ds_or_path`` and its path (None for a Dataset in memory).

    Parameters
    ----------
    ds_or_path : xarray.Dataset or path-like
        A scan Dataset, or the ``.nc`` file written by :func:`interkit.save_scan`.
    """
    from ..data.schema import open_scan, validate

    refuse_grid(ds_or_path)
    if isinstance(ds_or_path, xr.Dataset):
        validate(ds_or_path)
        return ds_or_path, None
    if isinstance(ds_or_path, (str, os.PathLike)):
        return open_scan(ds_or_path), os.fspath(ds_or_path)
    raise InputError(f"scan: expected an xarray.Dataset or the path of a .nc file, got {type(ds_or_path).__name__}")


def refuse_grid(ds_or_path) -> None:
    """Raise InputError, pointing at the grid functions, when ``ds_or_path`` is an
    orientation grid (a Dataset or file with the grid schema) rather than a scan."""
    from ..data.grid import GRID_SCHEMA, is_grid_file

    if isinstance(ds_or_path, xr.Dataset):
        if ds_or_path.attrs.get("schema") != GRID_SCHEMA:
            return
        what = "the Dataset"
    elif isinstance(ds_or_path, (str, os.PathLike)) and is_grid_file(ds_or_path):
        what = repr(os.fspath(ds_or_path))
    else:
        return
    raise InputError(f"scan: {what} is an orientation grid ({GRID_SCHEMA!r}); use interkit.verify_grid, "
                     "rerun_grid, export_grid or write_grid_report")


def rebuild_spec(ds: xr.Dataset, path: str | None = None):
    """The :class:`~interkit.model.spec.ScanSpec` recorded in ``ds`` (``attrs["spec_json"]``).

    Raises :class:`~interkit.errors.InputError` naming the file (``path``) when the
    spec is missing or cannot be rebuilt.
    """
    from ..data.schema import spec_of

    where = f"scan file {path!r}" if path is not None else "scan"
    try:
        return spec_of(ds)
    except InputError as exc:
        raise InputError(f"{where}: its spec cannot be rebuilt ({exc})") from None
    except (KeyError, TypeError, ValueError) as exc:
        raise InputError(f"{where}: attrs.spec_json cannot be rebuilt into a spec "
                         f"({type(exc).__name__}: {exc})") from None


def store_keys(ds: xr.Dataset) -> list[str]:
    """The distinct store keys of the calculations recorded in ``ds`` (sorted)."""
    if "job_key" not in ds.variables:
        return []
    return sorted({str(k) for k in np.asarray(ds["job_key"].values).ravel() if str(k)})


def key_agreement(saved: xr.Dataset, plan, indices=None) -> tuple[int, int]:
    """``(matching, total)`` store keys of the points ``indices`` of ``saved`` against
    the keys ``plan`` (of the same spec, or of a :func:`subset_spec`) gives today.

    Keys differ when the pyscf version or interkit's numerics version changed since
    the file was written; the calculations are then new jobs, not store hits.
    """
    if "job_key" not in saved.variables:
        return 0, 0
    idx = np.arange(saved.sizes["distance"]) if indices is None else np.asarray(indices, dtype=int)
    keys = saved["job_key"].isel(distance=idx)
    levels = [str(x) for x in saved["level"].values]
    roles = [str(x) for x in saved["role"].values]
    labels = [lv.label for lv in plan.spec.levels]
    match = total = 0
    for (li, pi), entry in plan.table.items():
        if li >= len(labels) or labels[li] not in levels or pi >= idx.size:
            continue
        for role, key in entry.items():
            if role not in roles:
                continue
            stored = str(keys.sel(level=labels[li], role=role).values[pi])
            if stored:
                total += 1
                match += stored == key
    return match, total


def version_attrs(ds: xr.Dataset) -> dict[str, str]:
    """The library versions recorded in ``ds`` (attributes ending in ``_version``)."""
    return {k[: -len("_version")]: str(v) for k, v in sorted(ds.attrs.items()) if k.endswith("_version")}


def provenance_summary(ds: xr.Dataset) -> dict:
    """What a saved scan says about its own making.

    Returns
    -------
    dict
        ``spec`` (parsed spec JSON), ``versions`` (library -> version), ``created_utc``,
        ``codata``, ``schema``, ``n_store_keys`` (distinct calculations with a key),
        ``counterpoise`` and, when present, ``executor``, ``workers``,
        ``calculations_computed``, ``calculations_from_store``, ``run_wall_time_s``.
    """
    try:
        spec = json.loads(ds.attrs["spec_json"])
    except (KeyError, ValueError):
        raise InputError("dataset attrs.spec_json: missing or not JSON") from None
    out = {
        "spec": spec,
        "versions": version_attrs(ds),
        "created_utc": str(ds.attrs.get("created_utc", "")),
        "codata": str(ds.attrs.get("codata", "")),
        "schema": str(ds.attrs.get("schema", "")),
        "counterpoise": str(ds.attrs.get("counterpoise", "")),
        "n_store_keys": len(store_keys(ds)),
    }
    for key in ("executor", "workers", "calculations_computed", "calculations_from_store", "run_wall_time_s"):
        if key in ds.attrs:
            value = ds.attrs[key]
            out[key] = value.item() if hasattr(value, "item") else value
    return out
