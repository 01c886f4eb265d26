"""Writing and reading the netCDF-4 files of every interkit result (scans, studies,
orientation grids, optimisation trajectories): written atomically (an exclusive
temporary file in the target folder, then a rename), read fully into memory with the
file closed, and bad paths or unreadable files refused in one line."""

from __future__ import annotations

import os

import xarray as xr

from ..errors import InputError


def write_netcdf(obj: xr.Dataset | xr.DataTree, path: str | os.PathLike) -> None:
    """Write a Dataset or DataTree to ``path`` (h5netcdf engine); the file appears whole
    or not at all, with the permissions the umask allows."""
    from ..fileio import exclusive_temp

    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise InputError(f"output: folder {folder!r} does not exist")
    fd, tmp = exclusive_temp(folder, ".tmp-", ".nc")
    os.close(fd)
    try:
        obj.to_netcdf(tmp, engine="h5netcdf", invalid_netcdf=False)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def read_netcdf(path: str | os.PathLike, what: str, tree: bool = False) -> xr.Dataset | xr.DataTree:
    """Read a file written by :func:`write_netcdf` (loaded, file closed).

    ``what`` names the kind of file in messages (``'scan'``, ``'study'``...): a missing
    path gives ``"<what> file: '<path>' does not exist"``, an unreadable one
    ``"<what> file '<path>': not a readable netCDF <what> (...)"``.
    """
    path = os.fspath(path)
    if not os.path.isfile(path):
        raise InputError(f"{what} file: {path!r} does not exist")
    try:
        if tree:
            with xr.open_datatree(path, engine="h5netcdf") as handle:
                return handle.load().copy()
        with xr.open_dataset(path, engine="h5netcdf") as handle:
            return handle.load()
    except (OSError, ValueError) as exc:
        raise InputError(f"{what} file {path!r}: not a readable netCDF {what} ({exc})") from None
