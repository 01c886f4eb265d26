"""Scan coordinates: how fragment B moves relative to fragment A.

Every coordinate measures a scalar value (angstrom) on a dimer and, except
:class:`Frames`, produces the geometry at a requested value by translating fragment B
rigidly along a fixed unit vector. Fragment A never moves.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from .geometry import Dimer


class ScanCoordinate:
    """Base class of scan coordinates."""

    kind: str = ""

    def value(self, dimer: Dimer) -> float:
        """The coordinate's value for ``dimer`` in angstrom."""
        raise NotImplementedError

    def anchors(self, dimer: Dimer) -> tuple[np.ndarray, np.ndarray]:
        """Two points (angstrom) between which a view draws the coordinate."""
        raise NotImplementedError

    def direction(self, dimer: Dimer) -> np.ndarray:
        """Unit vector along which fragment B moves."""
        a, b = self.anchors(dimer)
        d = b - a
        norm = np.linalg.norm(d)
        if norm < 1e-8:
            raise InputError(f"coordinate: the anchor points of {self.describe()} coincide")
        return d / norm

    def displaced(self, dimer: Dimer, target: float) -> Dimer:
        """Dimer with fragment B translated rigidly so the value becomes ``target`` (Å)."""
        shift = (float(target) - self.value(dimer)) * self.direction(dimer)
        return dimer.translated_b(shift)

    def check(self, dimer: Dimer) -> None:
        """Raise InputError if the coordinate does not fit ``dimer``."""

    def describe(self) -> str:
        """Short human-readable description."""
        return self.kind

    def to_dict(self) -> dict:
        """Plain-data description."""
        return {"kind": self.kind}


@dataclass(frozen=True)
class CentreOfMass(ScanCoordinate):
    """Distance between the centres of mass of A and B; B moves along that line."""

    kind = "centre-of-mass"

    def value(self, dimer: Dimer) -> float:
        return float(np.linalg.norm(dimer.centre_of_mass("B") - dimer.centre_of_mass("A")))

    def anchors(self, dimer: Dimer):
        return dimer.centre_of_mass("A"), dimer.centre_of_mass("B")

    def describe(self) -> str:
        return "centre-of-mass distance"


@dataclass(frozen=True)
class AtomPair(ScanCoordinate):
    """Distance between atom ``i`` and atom ``j`` (0-based indices of the whole dimer).

    One atom must be in each fragment; B moves along the contact vector from the A atom
    to the B atom, so scaling the value scales exactly that contact distance.
    """

    i: int
    j: int
    kind = "atom-pair"

    def __post_init__(self):
        for name in ("i", "j"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, np.integer)):
                raise InputError(f"coordinate atom {name}: {v!r} is not an atom index")
            object.__setattr__(self, name, int(v))

    def _ordered(self, dimer: Dimer) -> tuple[int, int]:
        self.check(dimer)
        return (self.i, self.j) if self.i in dimer.fragment_a else (self.j, self.i)

    def check(self, dimer: Dimer) -> None:
        for name, v in (("i", self.i), ("j", self.j)):
            if not 0 <= v < dimer.natoms:
                raise InputError(f"coordinate atom {name}: index {v} is outside 0..{dimer.natoms - 1}")
        frags = {dimer.fragment_labels[self.i], dimer.fragment_labels[self.j]}
        if frags != {"A", "B"}:
            raise InputError(
                f"coordinate atoms: {self.i} and {self.j} are both in fragment "
                f"{dimer.fragment_labels[self.i]}; choose one atom in each fragment"
            )

    def value(self, dimer: Dimer) -> float:
        a, b = self._ordered(dimer)
        return float(np.linalg.norm(dimer.coordinates[b] - dimer.coordinates[a]))

    def anchors(self, dimer: Dimer):
        a, b = self._ordered(dimer)
        return np.array(dimer.coordinates[a]), np.array(dimer.coordinates[b])

    def describe(self) -> str:
        return f"distance between atoms {self.i} and {self.j}"

    def to_dict(self) -> dict:
        return {"kind": self.kind, "atoms": [self.i, self.j]}


@dataclass(frozen=True)
class Vector(ScanCoordinate):
    """B moves along a fixed direction ``v``; the value is the projection of the
    centre-of-mass separation (A to B) on that direction, in angstrom."""

    v: tuple[float, float, float]
    kind = "vector"

    def __post_init__(self):
        try:
            vec = np.asarray(self.v, dtype=float).reshape(3)
        except (TypeError, ValueError):
            raise InputError(f"coordinate vector: {self.v!r} is not three numbers") from None
        norm = float(np.linalg.norm(vec))
        if not np.all(np.isfinite(vec)) or norm < 1e-12:
            raise InputError(f"coordinate vector: {self.v!r} is not a finite non-zero vector")
        object.__setattr__(self, "v", tuple(float(x) for x in vec / norm))

    def direction(self, dimer: Dimer) -> np.ndarray:
        return np.array(self.v)

    def value(self, dimer: Dimer) -> float:
        sep = dimer.centre_of_mass("B") - dimer.centre_of_mass("A")
        return float(sep @ np.array(self.v))

    def anchors(self, dimer: Dimer):
        a = dimer.centre_of_mass("A")
        return a, a + self.value(dimer) * np.array(self.v)

    def describe(self) -> str:
        return "displacement along ({:.3f}, {:.3f}, {:.3f})".format(*self.v)

    def to_dict(self) -> dict:
        return {"kind": self.kind, "vector": list(self.v)}


class Frames(ScanCoordinate):
    """One given geometry per scan point (e.g. from a multi-frame XYZ file).

    Parameters
    ----------
    geometries : path, or sequence of Dimer or (natoms, 3) arrays (angstrom)
        The frames. A path is read as a multi-frame XYZ file.
    measure : ScanCoordinate
        How the scan value of each frame is measured (default centre-of-mass distance).
    values : sequence of float, optional
        Explicit values (angstrom) instead of measuring.
    symbols : sequence of sequence of str, optional
        Element symbols of every frame; taken from the file or the Dimers when not given
        (bare arrays carry none). Each frame's symbols must equal the scanned dimer's,
        atom by atom.
    """

    kind = "frames"

    def __init__(self, geometries, measure: ScanCoordinate | None = None,
                 values: Sequence[float] | None = None, symbols: Sequence[Sequence[str]] | None = None):
        frame_symbols: list[tuple[str, ...] | None] = []
        if isinstance(geometries, (str, os.PathLike)):
            from .geometry import read_xyz

            xyz = read_xyz(geometries)
            geometries = [f.coordinates for f in xyz]
            frame_symbols = [tuple(f.symbols) for f in xyz]
        elif isinstance(geometries, bytes) or not hasattr(geometries, "__iter__"):
            raise InputError(f"coordinate frames: {geometries!r} is not a list of geometries")
        geometries = list(geometries)
        if not frame_symbols:
            frame_symbols = [tuple(g.symbols) if isinstance(g, Dimer) else None for g in geometries]
        if symbols is not None:
            from .geometry import normalise_symbol

            if len(symbols) != len(geometries):
                raise InputError(f"coordinate symbols: {len(symbols)} symbol lists for {len(geometries)} frames")
            frame_symbols = [None if sy is None else
                             tuple(normalise_symbol(x, f"coordinate frames[{k}] symbol") for x in sy)
                             for k, sy in enumerate(symbols)]
        frames = []
        for k, g in enumerate(geometries):
            arr = np.array(g.coordinates if isinstance(g, Dimer) else g, dtype=float)
            if arr.ndim != 2 or arr.shape[1] != 3:
                raise InputError(f"coordinate frames[{k}]: expected an (natoms, 3) array, got shape {arr.shape}")
            if frame_symbols[k] is not None and len(frame_symbols[k]) != arr.shape[0]:
                raise InputError(f"coordinate frames[{k}]: {len(frame_symbols[k])} symbols for {arr.shape[0]} atoms")
            arr.setflags(write=False)
            frames.append(arr)
        if not frames:
            raise InputError("coordinate frames: no geometries given")
        self.frames = tuple(frames)
        self.symbols = tuple(frame_symbols)
        if isinstance(measure, Frames):
            raise InputError("coordinate frames: measure cannot itself be Frames")
        self.measure = measure or CentreOfMass()
        if values is not None:
            if isinstance(values, (str, bytes)) or not hasattr(values, "__iter__"):
                raise InputError(f"coordinate values: {values!r} is not a list of numbers (angstrom)")
            vals = []
            for k, v in enumerate(values):
                try:
                    x = float(v) if not isinstance(v, (bool, str, bytes)) else None
                except (TypeError, ValueError):
                    x = None
                if x is None or not np.isfinite(x):
                    raise InputError(f"coordinate values[{k}]: {v!r} is not a finite number (angstrom)")
                vals.append(x)
            if len(vals) != len(frames):
                raise InputError(f"coordinate values: {len(vals)} values for {len(frames)} frames")
            self.values = tuple(vals)
        else:
            self.values = None

    def dimers(self, template: Dimer) -> list[Dimer]:
        """The frames as dimers with the template's atoms, fragments and charges."""
        out = []
        for k, arr in enumerate(self.frames):
            if arr.shape[0] != template.natoms:
                raise InputError(
                    f"coordinate frames[{k}]: {arr.shape[0]} atoms, but the dimer has {template.natoms}"
                )
            syms = self.symbols[k]
            if syms is not None and tuple(syms) != tuple(template.symbols):
                i = next(i for i, (a, b) in enumerate(zip(syms, template.symbols)) if a != b)
                raise InputError(f"coordinate frames[{k}]: atom {i} is {syms[i]}, but atom {i} of the dimer "
                                 f"is {template.symbols[i]}; the frames must list the dimer's atoms in order")
            try:
                out.append(template.with_coordinates(arr))
            except InputError as exc:
                raise InputError(f"coordinate frames[{k}]: {exc}") from None
        return out

    def frame_values(self, template: Dimer) -> list[float]:
        """Scan value (angstrom) of every frame."""
        if self.values is not None:
            return list(self.values)
        return [self.measure.value(d) for d in self.dimers(template)]

    def value(self, dimer: Dimer) -> float:
        return self.measure.value(dimer)

    def anchors(self, dimer: Dimer):
        return self.measure.anchors(dimer)

    def displaced(self, dimer: Dimer, target: float) -> Dimer:
        raise InputError("coordinate frames: frames give their own geometries; no grid applies")

    def check(self, dimer: Dimer) -> None:
        self.measure.check(dimer)

    def describe(self) -> str:
        return f"{len(self.frames)} given geometries, value = {self.measure.describe()}"

    def to_dict(self) -> dict:
        return {
            "kind": self.kind,
            "measure": self.measure.to_dict(),
            "values": list(self.values) if self.values is not None else None,
            "frames_angstrom": [f.tolist() for f in self.frames],
            **({"symbols": [list(sy) if sy is not None else None for sy in self.symbols]}
               if any(sy is not None for sy in self.symbols) else {}),
        }

    def __eq__(self, other):
        return isinstance(other, Frames) and self.to_dict() == other.to_dict()

    __hash__ = None  # type: ignore[assignment]

    def __repr__(self):
        return f"Frames(<{len(self.frames)} geometries>, measure={self.measure!r})"


def coordinate_from_dict(data: dict) -> ScanCoordinate:
    """Inverse of ``ScanCoordinate.to_dict``."""
    kind = data.get("kind")
    if kind == "centre-of-mass":
        return CentreOfMass()
    if kind == "atom-pair":
        atoms = data.get("atoms")
        if not isinstance(atoms, (list, tuple)) or len(atoms) != 2:
            raise InputError(f"scan.atoms: {atoms!r} is not a pair of atom indices")
        return AtomPair(*atoms)
    if kind == "vector":
        return Vector(tuple(data.get("vector", ())))
    if kind == "frames":
        return Frames(data["frames_angstrom"], coordinate_from_dict(data["measure"]), data.get("values"),
                      data.get("symbols"))
    raise InputError(
        f"scan.coordinate: {kind!r} is not one of centre-of-mass, atom-pair, vector, frames"
    )
