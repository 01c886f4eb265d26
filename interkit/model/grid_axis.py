"""Grid axes: the base class of orientation coordinates and the helpers they share
(vectors or atom pairs as directions, value lists, rigid placement of fragment B)."""

from __future__ import annotations

import math

import numpy as np

from ..errors import InputError
from .geometry import Dimer

#: how far (angstrom) a rotated or shifted monomer's internal distances may drift (rounding)
RIGID_TOLERANCE_ANGSTROM = 1e-10


def rotation_matrix(axis: np.ndarray, angle_rad: float) -> np.ndarray:
    """Rodrigues' rotation matrix of ``angle_rad`` (right hand) about the unit vector ``axis``."""
    n = np.asarray(axis, dtype=float)
    k = np.array([[0.0, -n[2], n[1]], [n[2], 0.0, -n[0]], [-n[1], n[0], 0.0]])
    return np.eye(3) + math.sin(angle_rad) * k + (1.0 - math.cos(angle_rad)) * (k @ k)


def with_b_coordinates(dimer: Dimer, new_b: np.ndarray) -> Dimer:
    """Copy of ``dimer`` with the coordinates of fragment B replaced (angstrom)."""
    coords = np.array(dimer.coordinates)
    coords[list(dimer.fragment_b)] = new_b
    return Dimer(dimer.symbols, coords, dimer.fragment_a, dimer.charges, dimer.multiplicities,
                 dimer.name, dimer.dimer_multiplicity, _check=False)


def _numbers(values, where: str, positive: bool = False) -> tuple[float, ...]:
    if isinstance(values, (str, bytes)) or not hasattr(values, "__iter__"):
        raise InputError(f"{where}: {values!r} is not a list of numbers")
    out = []
    for k, v in enumerate(values):
        try:
            x = None if isinstance(v, (bool, str, bytes)) else float(v)
        except (TypeError, ValueError):
            x = None
        if x is None or not math.isfinite(x) or (positive and x <= 0):
            raise InputError(f"{where}[{k}]: {v!r} is not a {'positive ' if positive else ''}finite number")
        out.append(x)
    if not out:
        raise InputError(f"{where}: no values given")
    return tuple(out)


def _distinct_sorted(values: tuple[float, ...], where: str, period: float | None = None) -> tuple[float, ...]:
    vals = sorted(values)
    for a, b in zip(vals, vals[1:]):
        if b - a < 1e-9:
            raise InputError(f"{where}: value {b!r} appears twice")
    if period is not None:
        for k, a in enumerate(vals):
            for b in vals[k + 1:]:
                if abs((b - a) / period - round((b - a) / period)) * period < 1e-9:
                    raise InputError(f"{where}: {a!r} and {b!r} differ by a whole turn (same geometry)")
    return tuple(vals)


def _index(v, where: str) -> int:
    if isinstance(v, bool) or not isinstance(v, (int, np.integer)):
        raise InputError(f"{where}: {v!r} is not an atom index")
    return int(v)


def _direction(spec, where: str):
    """A direction: three numbers (normalised here) or two atom indices (kept as ints)."""
    if isinstance(spec, (str, bytes)) or not hasattr(spec, "__len__"):
        raise InputError(f"{where}: {spec!r} is not a vector of three numbers or two atom indices")
    items = list(spec)
    if len(items) == 2:
        i, j = (_index(x, where) for x in items)
        if i == j:
            raise InputError(f"{where}: atoms {i} and {j} are the same atom; give two atoms")
        return ("atoms", i, j)
    if len(items) != 3:
        raise InputError(f"{where}: {spec!r} is not a vector of three numbers or two atom indices")
    vec = np.array(_numbers(items, where))
    norm = float(np.linalg.norm(vec))
    if norm < 1e-12:
        raise InputError(f"{where}: {list(spec)!r} is a zero vector")
    return ("vector", *(float(x) for x in vec / norm))


def _check_atoms(dimer: Dimer, where: str, *atoms: int) -> None:
    for a in atoms:
        if not 0 <= a < dimer.natoms:
            raise InputError(f"{where}: atom index {a} is outside 0..{dimer.natoms - 1}")


def _resolve_direction(spec: tuple, dimer: Dimer) -> np.ndarray:
    if spec[0] == "vector":
        return np.array(spec[1:])
    d = dimer.coordinates[spec[2]] - dimer.coordinates[spec[1]]
    return d / np.linalg.norm(d)


def _direction_dict(spec: tuple) -> dict:
    return {"atoms": list(spec[1:])} if spec[0] == "atoms" else {"vector": list(spec[1:])}


def _direction_from_dict(data: dict):
    return tuple(data["atoms"]) if "atoms" in data else tuple(data["vector"])


def _name(name, default: str) -> str:
    name = default if name is None else name
    if not isinstance(name, str) or not name.isidentifier():
        raise InputError(f"name: {name!r} is not a plain dimension name (letters, digits, underscores)")
    return name


class GridAxis:
    """One coordinate of an orientation grid: values, units and how B is placed."""

    kind = ""
    name = ""
    units = ""
    values: tuple = ()

    def check(self, dimer: Dimer) -> None:
        """Raise InputError if the axis does not fit ``dimer``."""

    def place(self, dimer: Dimer, k: int) -> Dimer:
        """``dimer`` with B placed at the axis's value number ``k``."""
        raise NotImplementedError

    def label(self, k: int) -> str:
        """``'angle = 30 degree'`` for value ``k`` (error messages, plots)."""
        return f"{self.name} = {self.values[k]:g} {self.units}"

    def describe(self) -> str:
        """Short description (the Dataset's ``long_name`` of the dimension)."""
        return self.kind

    def extra_coordinates(self) -> dict:
        """Extra Dataset variables along this dimension: name -> (dims, data, attrs)."""
        return {}

    def to_dict(self) -> dict:
        """Plain-data description (JSON-safe); :func:`axis_from_dict` inverts it."""
        raise NotImplementedError

    def __eq__(self, other):
        return type(self) is type(other) and self.to_dict() == other.to_dict()

    __hash__ = None  # type: ignore[assignment]

    def __repr__(self):
        return f"{type(self).__name__}({self.to_dict()!r})"
