"""Orientation coordinates: B turned or slid rigidly, and grids of one or two coordinates.

A grid axis (:class:`Rotation`, :class:`Offset`, :class:`Separation`, or
:class:`~interkit.model.orientation_sampling.OrientationSample`) places fragment B at each
of its values, starting from a given dimer; fragment A never moves and both monomers stay
rigid. An :class:`OrientationGrid` of two axes gives the geometry of point ``(i, j)`` by
applying the first axis at its value ``i`` to the starting dimer, then the second axis at
its value ``j`` to that result (so an axis or centre defined by atoms is taken from the
geometry the axis is applied to).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from ..errors import InputError
from .coordinates import CentreOfMass, ScanCoordinate, coordinate_from_dict
from .geometry import Dimer
from .grid_axis import (
    GridAxis,
    _check_atoms,
    _direction,
    _direction_dict,
    _direction_from_dict,
    _distinct_sorted,
    _index,
    _name,
    _numbers,
    _resolve_direction,
    rotation_matrix,
    with_b_coordinates,
)
from .orientation_sampling import OrientationSample


class Rotation(GridAxis):
    """B turned rigidly about an axis through a centre (Rodrigues' formula, right hand).

    Parameters
    ----------
    axis : three numbers or two atom indices
        Direction of the axis: a vector (normalised here), or atoms ``(i, j)`` (0-based,
        whole dimer): from atom i to atom j of the geometry the rotation is applied to.
    angles_deg : sequence of float
        Angles in degrees relative to that geometry (0 = unchanged); sorted here.
    centre : 'com-b', int or (int, int)
        The point the axis passes through: B's centre of mass, an atom, or a contact
        (midpoint of atom i of one fragment and atom j of the other).
    name : str
        Dimension name in the Dataset (default ``'angle'``, units ``'degree'``).
    """

    kind = "rotation"
    units = "degree"

    def __init__(self, axis, angles_deg: Sequence[float], centre="com-b", name: str | None = None):
        self.axis = _direction(axis, "rotation axis")
        self.values = _distinct_sorted(_numbers(angles_deg, "rotation angles_deg"), "rotation angles_deg", 360.0)
        if isinstance(centre, str):
            if centre.strip().lower() != "com-b":
                raise InputError(f"rotation centre: {centre!r} is not 'com-b', an atom index or two atom indices")
            self.centre: tuple = ("com-b",)
        elif isinstance(centre, (int, np.integer)) and not isinstance(centre, bool):
            self.centre = ("atom", int(centre))
        elif isinstance(centre, (list, tuple)) and len(centre) == 2:
            i, j = (_index(x, "rotation centre") for x in centre)
            self.centre = ("contact", i, j)
        else:
            raise InputError(f"rotation centre: {centre!r} is not 'com-b', an atom index or two atom indices")
        self.name = _name(name, "angle")

    def check(self, dimer: Dimer) -> None:
        if self.axis[0] == "atoms":
            _check_atoms(dimer, "rotation axis", *self.axis[1:])
        if self.centre[0] != "com-b":
            _check_atoms(dimer, "rotation centre", *self.centre[1:])
        if self.centre[0] == "contact":
            i, j = self.centre[1:]
            if dimer.fragment_labels[i] == dimer.fragment_labels[j]:
                raise InputError(f"rotation centre: atoms {i} and {j} are both in fragment "
                                 f"{dimer.fragment_labels[i]}; a contact joins one atom of A and one of B")

    def pivot(self, dimer: Dimer) -> np.ndarray:
        """The centre of the rotation in ``dimer`` (angstrom)."""
        if self.centre[0] == "com-b":
            return dimer.centre_of_mass("B")
        if self.centre[0] == "atom":
            return np.array(dimer.coordinates[self.centre[1]])
        return 0.5 * (dimer.coordinates[self.centre[1]] + dimer.coordinates[self.centre[2]])

    def axis_vector(self, dimer: Dimer) -> np.ndarray:
        """Unit vector of the axis in ``dimer``."""
        return _resolve_direction(self.axis, dimer)

    def place(self, dimer: Dimer, k: int) -> Dimer:
        rot = rotation_matrix(self.axis_vector(dimer), math.radians(self.values[k]))
        c = self.pivot(dimer)
        b = dimer.coordinates[list(dimer.fragment_b)]
        return with_b_coordinates(dimer, (b - c) @ rot.T + c)

    def describe(self) -> str:
        centre = {"com-b": "B's centre of mass", "atom": "atom {}", "contact": "midpoint of atoms {} and {}"}
        where = centre[self.centre[0]].format(*self.centre[1:])
        axis = ("atoms {} to {}" if self.axis[0] == "atoms" else "({:.3f}, {:.3f}, {:.3f})").format(*self.axis[1:])
        return f"rotation of B about {axis} through {where}"

    def to_dict(self) -> dict:
        centre = "com-b" if self.centre[0] == "com-b" else (
            self.centre[1] if self.centre[0] == "atom" else list(self.centre[1:]))
        return {"kind": self.kind, "axis": _direction_dict(self.axis), "angles_deg": list(self.values),
                "centre": centre, "name": self.name}


class Offset(GridAxis):
    """B slid rigidly in the plane perpendicular to ``normal`` (e.g. a stacking axis).

    The value is the component of the centre-of-mass separation (A to B) along ``u``,
    the unit vector of ``toward`` with its part along ``normal`` removed; B moves along
    ``u`` only, so the separation along ``normal`` and the orientation stay as they are.

    Parameters
    ----------
    normal : three numbers or two atom indices
        The direction the plane is perpendicular to.
    shifts_angstrom : sequence of float
        Offsets in angstrom (0 = centres of mass on one line along ``normal``).
    toward : three numbers or two atom indices
        The in-plane direction of the slide (must not be parallel to ``normal``).
    name : str
        Dimension name (default ``'offset'``, units ``'angstrom'``).
    """

    kind = "offset"
    units = "angstrom"

    def __init__(self, normal, shifts_angstrom: Sequence[float], toward, name: str | None = None):
        self.normal = _direction(normal, "offset normal")
        self.toward = _direction(toward, "offset toward")
        self.values = _distinct_sorted(_numbers(shifts_angstrom, "offset shifts_angstrom"), "offset shifts_angstrom")
        self.name = _name(name, "offset")
        if self.normal[0] == "vector" and self.toward[0] == "vector":
            self.in_plane(None)

    def in_plane(self, dimer: Dimer | None) -> np.ndarray:
        """Unit vector ``u`` of the slide in ``dimer``."""
        n = _resolve_direction(self.normal, dimer)
        t = _resolve_direction(self.toward, dimer)
        u = t - (t @ n) * n
        norm = float(np.linalg.norm(u))
        if norm < 1e-6:
            raise InputError("offset toward: the direction is parallel to the normal; give an in-plane direction")
        return u / norm

    def check(self, dimer: Dimer) -> None:
        for where, spec in (("offset normal", self.normal), ("offset toward", self.toward)):
            if spec[0] == "atoms":
                _check_atoms(dimer, where, *spec[1:])
        self.in_plane(dimer)

    def value(self, dimer: Dimer) -> float:
        """Offset of ``dimer`` in angstrom."""
        return float((dimer.centre_of_mass("B") - dimer.centre_of_mass("A")) @ self.in_plane(dimer))

    def place(self, dimer: Dimer, k: int) -> Dimer:
        return dimer.translated_b((self.values[k] - self.value(dimer)) * self.in_plane(dimer))

    def describe(self) -> str:
        return "in-plane offset of B's centre of mass"

    def to_dict(self) -> dict:
        return {"kind": self.kind, "normal": _direction_dict(self.normal), "toward": _direction_dict(self.toward),
                "shifts_angstrom": list(self.values), "name": self.name}


class Separation(GridAxis):
    """B translated rigidly along a scan coordinate to given distances (angstrom).

    Parameters
    ----------
    distances_angstrom : sequence of float
        Positive values of ``coordinate`` in angstrom.
    coordinate : ScanCoordinate
        :class:`~interkit.model.coordinates.CentreOfMass` (default),
        :class:`~interkit.model.coordinates.AtomPair` or
        :class:`~interkit.model.coordinates.Vector`.
    name : str
        Dimension name (default ``'distance'``, units ``'angstrom'``).
    """

    kind = "separation"
    units = "angstrom"

    def __init__(self, distances_angstrom: Sequence[float], coordinate: ScanCoordinate | None = None,
                 name: str | None = None):
        from .coordinates import Frames

        coordinate = CentreOfMass() if coordinate is None else coordinate
        if not isinstance(coordinate, ScanCoordinate) or isinstance(coordinate, Frames):
            raise InputError(f"separation coordinate: {coordinate!r} is not CentreOfMass, AtomPair or Vector")
        self.coordinate = coordinate
        self.values = _distinct_sorted(_numbers(distances_angstrom, "separation distances_angstrom", positive=True),
                                       "separation distances_angstrom")
        self.name = _name(name, "distance")

    def check(self, dimer: Dimer) -> None:
        self.coordinate.check(dimer)

    def place(self, dimer: Dimer, k: int) -> Dimer:
        return self.coordinate.displaced(dimer, self.values[k])

    def describe(self) -> str:
        return self.coordinate.describe()

    def to_dict(self) -> dict:
        return {"kind": self.kind, "coordinate": self.coordinate.to_dict(),
                "distances_angstrom": list(self.values), "name": self.name}


def axis_from_dict(data: dict) -> GridAxis:
    """Inverse of ``GridAxis.to_dict``."""
    kind = data.get("kind")
    if kind == "rotation":
        centre = data["centre"]
        return Rotation(_direction_from_dict(data["axis"]), data["angles_deg"],
                        tuple(centre) if isinstance(centre, list) else centre, data.get("name"))
    if kind == "offset":
        return Offset(_direction_from_dict(data["normal"]), data["shifts_angstrom"],
                      _direction_from_dict(data["toward"]), data.get("name"))
    if kind == "separation":
        return Separation(data["distances_angstrom"], coordinate_from_dict(data["coordinate"]), data.get("name"))
    if kind == "sampling":
        return OrientationSample(data["count"], data["seed"], data.get("method", "sobol"), data.get("name"),
                                 data.get("quaternions"))
    raise InputError(f"grid axis kind: {kind!r} is not one of rotation, offset, separation, sampling")


class OrientationGrid:
    """One or two grid axes applied to a starting dimer.

    Parameters
    ----------
    dimer : Dimer
        The starting geometry; fragment A never moves.
    axes : GridAxis or sequence of one or two GridAxis
        The coordinates. Point ``(i, j)`` is ``axes[1].place(axes[0].place(dimer, i), j)``:
        the first axis is applied to the starting dimer, the second to its result.

    Every point is checked for safe A-B contacts (as a distance scan is) when the grid is
    made; :meth:`dimers` lists the geometries in flat order ``p = i * n2 + j``.
    """

    def __init__(self, dimer: Dimer, axes):
        if not isinstance(dimer, Dimer):
            raise InputError(f"dimer: expected an interkit.Dimer, got {type(dimer).__name__}")
        if isinstance(axes, GridAxis):
            axes = [axes]
        if isinstance(axes, (str, bytes)) or not hasattr(axes, "__iter__"):
            raise InputError(f"axes: {axes!r} is not a list of grid axes")
        axes = list(axes)
        if not 1 <= len(axes) <= 2:
            raise InputError(f"axes: {len(axes)} axes given; a grid has one or two")
        for k, ax in enumerate(axes):
            if not isinstance(ax, GridAxis):
                raise InputError(f"axes[{k}]: {ax!r} is not a Rotation, Offset, Separation or OrientationSample")
            ax.check(dimer)
        if len(axes) == 2 and axes[0].name == axes[1].name:
            raise InputError(f"axes: both axes are named {axes[0].name!r}; give one of them another name")
        for ax in axes:
            if ax.name in ("level", "point", "atom", "xyz", "role", "end", "dispersion"):
                raise InputError(f"axes: the name {ax.name!r} is taken by the Dataset; give another name")
        self.dimer = dimer
        self.axes = tuple(axes)
        self._dimers = self._build()

    @property
    def shape(self) -> tuple[int, ...]:
        """Number of values of each axis."""
        return tuple(len(ax.values) for ax in self.axes)

    @property
    def names(self) -> tuple[str, ...]:
        """Dimension names of the axes."""
        return tuple(ax.name for ax in self.axes)

    def _build(self) -> tuple[Dimer, ...]:
        from .spec import check_contacts

        out = []
        for idx in np.ndindex(*self.shape):
            d = self.dimer
            for ax, k in zip(self.axes, idx):
                d = ax.place(d, k)
            check_contacts(d, ", ".join(ax.label(k) for ax, k in zip(self.axes, idx)))
            out.append(d)
        return tuple(out)

    def dimers(self) -> tuple[Dimer, ...]:
        """Geometries of all points, flat index ``p = i * n2 + j`` (row-major)."""
        return self._dimers

    def scan_spec(self, **options):
        """The flat ScanSpec of every point as explicit frames (values = flat index).

        ``options`` are ScanSpec fields (``levels``, ``counterpoise``, ``forces``,
        ``scf_threshold_hartree``, ...); ``dimer``, ``coordinate``, ``distances`` and
        ``factors`` come from the grid.
        """
        from .coordinates import Frames
        from .spec import ScanSpec

        for key in ("dimer", "coordinate", "distances", "factors"):
            if key in options:
                raise InputError(f"{key}: an orientation scan takes it from the grid; omit it")
        frames = Frames(list(self._dimers), values=list(range(len(self._dimers))))
        return ScanSpec(dimer=self.dimer, coordinate=frames, **options)

    def describe(self) -> str:
        return " x ".join(f"{ax.name} ({len(ax.values)} values" + (f", {ax.units})" if ax.units != "1" else ")")
                          for ax in self.axes)

    def to_dict(self) -> dict:
        """Plain-data recipe (JSON-safe); :meth:`from_dict` inverts it."""
        return {"format": "interkit-orientation-grid", "version": 1, "dimer": self.dimer.to_dict(),
                "axes": [ax.to_dict() for ax in self.axes],
                "order": "point (i, j) = second axis at j applied to (first axis at i applied to the dimer)"}

    @classmethod
    def from_dict(cls, data: dict) -> OrientationGrid:
        """Rebuild a grid from :meth:`to_dict` output."""
        return cls(Dimer.from_dict(data["dimer"]), [axis_from_dict(a) for a in data["axes"]])

    def __repr__(self):
        return f"OrientationGrid({self.dimer.name!r}, {self.describe()})"
