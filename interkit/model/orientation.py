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
        from .orientation_sampling import OrientationSample

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
        return " x ".join(f"{ax.name} ({len(ax.values)} values, {ax.units})" for ax in self.axes)

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
