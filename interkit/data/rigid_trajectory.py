"""The trajectory Dataset of a rigid-body optimisation (one entry per evaluated geometry).

Layout (dimension ``step``: every geometry whose energy and forces were computed, in the
order computed, rejected trial steps included)::

    e_int            step                  kcal/mol      counterpoise-corrected interaction energy
    fragment_force   step, xyz             kcal/mol/angstrom   net force on B
    fragment_torque  step, xyz             kcal/mol      torque on B about its centre of mass (per radian)
    force_norm       step                  kcal/mol/angstrom   length of fragment_force
    torque_norm      step                  kcal/mol      length of fragment_torque
    accepted         step                  1             the optimiser moved to this geometry
    trust_radius     step                  angstrom      trust radius when the step was taken
    coordinates      step, atom, xyz       angstrom      geometry of the dimer

Attributes: level and its settings (``level_settings_json``), thresholds (with units in
their names), converged, evaluations,
the start and the final dimer as JSON (``dimer_json``, ``final_dimer_json``).
"""

from __future__ import annotations

import json
import os

import numpy as np
import xarray as xr

from ..errors import InputError
from ..model.geometry import Dimer

TRAJECTORY_SCHEMA = "interkit-rigid-trajectory/1"
_REQUIRED = ("e_int", "fragment_force", "fragment_torque", "accepted", "coordinates")


def build_trajectory(steps: list[dict], start: Dimer, attrs: dict) -> xr.Dataset:
    """Trajectory Dataset from per-evaluation dicts with keys ``e_int``, ``force``,
    ``torque``, ``accepted``, ``trust_radius``, ``coordinates`` (units as in the layout)."""
    n = len(steps)
    force = np.array([s["force"] for s in steps], dtype=float).reshape(n, 3)
    torque = np.array([s["torque"] for s in steps], dtype=float).reshape(n, 3)
    coords = np.array([s["coordinates"] for s in steps], dtype=float).reshape(n, start.natoms, 3)
    accepted = np.array([bool(s["accepted"]) for s in steps], dtype=bool)
    final = start.with_coordinates(coords[np.flatnonzero(accepted)[-1]]) if accepted.any() else start
    ds = xr.Dataset(
        {
            "e_int": ("step", np.array([s["e_int"] for s in steps], dtype=float),
                      {"units": "kcal/mol", "long_name": "counterpoise-corrected interaction energy"}),
            "fragment_force": (("step", "xyz"), force,
                               {"units": "kcal/mol/angstrom", "long_name": "net force on B"}),
            "fragment_torque": (("step", "xyz"), torque,
                                {"units": "kcal/mol", "long_name": "torque on B about its centre of mass (per radian)"}),
            "force_norm": ("step", np.linalg.norm(force, axis=1),
                           {"units": "kcal/mol/angstrom", "long_name": "length of the net force on B"}),
            "torque_norm": ("step", np.linalg.norm(torque, axis=1),
                            {"units": "kcal/mol", "long_name": "length of the torque on B"}),
            "accepted": ("step", accepted, {"units": "1", "long_name": "the optimiser moved to this geometry"}),
            "trust_radius": ("step", np.array([s.get("trust_radius", np.nan) for s in steps], dtype=float),
                             {"units": "angstrom", "long_name": "trust radius of the step (rotations scaled by "
                                                                "the length in attrs rotation_length_angstrom)"}),
            "coordinates": (("step", "atom", "xyz"), coords, {"units": "angstrom"}),
        },
        coords={"step": np.arange(n), "atom": np.arange(start.natoms), "xyz": ["x", "y", "z"],
                "symbol": ("atom", np.array(start.symbols, dtype=str))},
        attrs=dict(attrs, schema=TRAJECTORY_SCHEMA, dimer_json=json.dumps(start.to_dict()),
                   final_dimer_json=json.dumps(final.to_dict())),
    )
    return ds


def trajectory_dimer(ds: xr.Dataset, step: int | None = None) -> Dimer:
    """The dimer at ``step`` of a trajectory (default: the last accepted geometry, the
    optimum of a converged run), usable as the start of a scan."""
    start = Dimer.from_dict(json.loads(ds.attrs["dimer_json"]))
    if step is None:
        return Dimer.from_dict(json.loads(ds.attrs["final_dimer_json"]))
    n = ds.sizes["step"]
    if isinstance(step, bool) or not isinstance(step, (int, np.integer)) or not -n <= step < n:
        raise InputError(f"step: {step!r} is not a step of this trajectory (0..{n - 1})")
    return start.with_coordinates(ds["coordinates"].values[int(step)])


def validate_trajectory(ds: xr.Dataset) -> None:
    """Raise InputError unless ``ds`` has the trajectory layout."""
    if ds.attrs.get("schema") != TRAJECTORY_SCHEMA:
        raise InputError(f"trajectory: schema {ds.attrs.get('schema')!r} is not {TRAJECTORY_SCHEMA!r}")
    for name in _REQUIRED:
        if name not in ds:
            raise InputError(f"trajectory variable {name}: missing")


def save_trajectory(ds: xr.Dataset, path: str | os.PathLike) -> None:
    """Write a trajectory Dataset to netCDF-4 (temporary file, then rename)."""
    validate_trajectory(ds)
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise InputError(f"output: folder {folder!r} does not exist")
    from ..fileio import exclusive_temp

    fd, tmp = exclusive_temp(folder, ".tmp-", ".nc")
    os.close(fd)
    out = ds.copy()
    out["accepted"] = out["accepted"].astype("i1")  # netCDF has no boolean type
    out["accepted"].attrs = dict(ds["accepted"].attrs)
    out.attrs = {k: (int(v) if isinstance(v, (bool, np.bool_)) else v) for k, v in ds.attrs.items()}
    try:
        out.to_netcdf(tmp, engine="h5netcdf")
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def open_trajectory(path: str | os.PathLike) -> xr.Dataset:
    """Read a trajectory written by :func:`save_trajectory` (fully loaded, file closed)."""
    path = os.fspath(path)
    if not os.path.isfile(path):
        raise InputError(f"trajectory file: {path!r} does not exist")
    try:
        with xr.open_dataset(path, engine="h5netcdf") as handle:
            ds = handle.load()
    except (OSError, ValueError) as exc:
        raise InputError(f"trajectory file {path!r}: not a readable netCDF file ({exc})") from None
    validate_trajectory(ds)
    attrs = dict(ds["accepted"].attrs)
    ds["accepted"] = ds["accepted"].astype(bool)
    ds["accepted"].attrs = attrs
    if "converged" in ds.attrs:
        ds.attrs["converged"] = bool(ds.attrs["converged"])
    return ds
