"""Spec files from specs and from saved scans: :func:`write_spec`, :func:`spec_toml_of`.

The TOML text is :meth:`interkit.ScanSpec.to_toml`'s (the layout of
:func:`interkit.load_spec_toml`, the geometry and any frames written into the file), so a
spec set up in a notebook, or the spec of a finished scan, runs again with
``interkit scan spec.toml -o scan.nc`` with the same calculations (the same store keys).
"""

from __future__ import annotations

import os

import xarray as xr

from ..errors import InputError
from ..fileio import existing_folder
from ..model.spec import ScanSpec


def write_spec(spec: ScanSpec, path: str | os.PathLike) -> str:
    """Write ``spec`` as a TOML spec file.

    Parameters
    ----------
    spec : ScanSpec
    path : path-like
        File to write (``.toml``; its folder must exist); written atomically.

    Returns
    -------
    str
        The path written.
    """
    path = os.fspath(path)
    if not path.lower().endswith(".toml"):
        raise InputError(f"path: {path!r} should end in .toml (a TOML spec file)")
    existing_folder(path, "path")
    if os.path.isdir(path):
        raise InputError(f"path: {path!r} is a folder, not a file")
    text = spec.to_toml() if isinstance(spec, ScanSpec) else None
    if text is None:
        raise InputError(f"spec: expected an interkit.ScanSpec, got {type(spec).__name__}")
    from ..fileio import atomic_write_text

    return atomic_write_text(path, text)


def spec_toml_of(ds: xr.Dataset | str | os.PathLike) -> str:
    """The spec of a saved scan as TOML text: its ``spec_toml`` attribute, or (older
    files) the text of the spec rebuilt from ``spec_json``."""
    path = None
    if not isinstance(ds, xr.Dataset):
        from ..data.schema import open_scan

        path = os.fspath(ds)
        ds = open_scan(path)
    text = ds.attrs.get("spec_toml")
    if isinstance(text, str) and text.strip():
        return text
    from .provenance import rebuild_spec

    return rebuild_spec(ds, path).to_toml()
