"""Dimer geometry: reading, validation, fragment detection and rigid displacement.

Coordinates are in angstrom throughout. Atom indices are 0-based over the whole dimer.
"""

from __future__ import annotations

import math
import os
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field

import numpy as np
from pyscf.data import elements as _elements
from pyscf.data import radii as _radii

from ..errors import InputError, excerpt
from ..units import BOHR_TO_ANGSTROM

#: closest allowed distance between any two atoms, angstrom
MIN_ATOM_DISTANCE_ANGSTROM = 0.5
#: two atoms are bonded when closer than this factor times the sum of covalent radii
#: (a common-practice threshold)
BOND_FACTOR = 1.2

_SYMBOLS = {s.lower(): s for s in _elements.ELEMENTS[1:]}


def normalise_symbol(symbol: str, where: str = "symbol") -> str:
    """Return the canonical element symbol (``'cl'`` -> ``'Cl'``) or raise InputError."""
    text = str(symbol).strip()
    canonical = _SYMBOLS.get(text.lower())
    if canonical is None or canonical in ("X",):
        raise InputError(f"{where}: unknown element {excerpt(text)}")
    return canonical


def atomic_number(symbol: str) -> int:
    """Atomic number of a canonical element symbol."""
    return _elements.ELEMENTS.index(symbol)


def atomic_mass(symbol: str) -> float:
    """Standard atomic mass in dalton."""
    return float(_elements.MASSES[atomic_number(symbol)])


def covalent_radius_angstrom(symbol: str) -> float:
    """Covalent radius in angstrom (pyscf's table)."""
    return float(_radii.COVALENT[atomic_number(symbol)] * BOHR_TO_ANGSTROM)


def pair_distances(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Matrix of distances between two sets of points (same unit as the input)."""
    return np.linalg.norm(a[:, None, :] - b[None, :, :], axis=-1)


def connected_components(symbols: Sequence[str], coords: np.ndarray) -> list[list[int]]:
    """Split atoms into covalently connected groups.

    Two atoms are bonded when their distance is below ``BOND_FACTOR`` times the sum of
    their covalent radii. Groups are sorted by their lowest atom index.
    """
    n = len(symbols)
    radii = np.array([covalent_radius_angstrom(s) for s in symbols])
    dist = pair_distances(coords, coords)
    bonded = dist < BOND_FACTOR * (radii[:, None] + radii[None, :])
    seen = np.zeros(n, dtype=bool)
    groups: list[list[int]] = []
    for start in range(n):
        if seen[start]:
            continue
        stack, group = [start], []
        seen[start] = True
        while stack:
            i = stack.pop()
            group.append(i)
            for j in np.nonzero(bonded[i] & ~seen)[0]:
                seen[j] = True
                stack.append(int(j))
        groups.append(sorted(group))
    return sorted(groups, key=lambda g: g[0])


@dataclass(frozen=True)
class XYZFrame:
    """One frame of an XYZ file: symbols, coordinates in angstrom, comment line."""

    symbols: tuple[str, ...]
    coordinates: np.ndarray
    comment: str = ""


def parse_xyz(text: str, source: str = "<string>") -> list[XYZFrame]:
    """Parse single- or multi-frame XYZ text.

    Parameters
    ----------
    text : str
        XYZ content: atom count, comment line, then ``symbol x y z`` lines (angstrom);
        frames follow each other directly.
    source : str
        Name used in error messages.

    Returns
    -------
    list of XYZFrame
    """
    lines = text.removeprefix("\ufeff").splitlines()
    frames: list[XYZFrame] = []
    pos = 0
    while pos < len(lines):
        if not lines[pos].strip():
            pos += 1
            continue
        head = lines[pos].strip()
        try:
            natoms = int(head.split()[0])
        except ValueError:
            raise InputError(
                f"{source}: line {pos + 1}: expected an atom count, found {excerpt(head)}"
            ) from None
        if natoms <= 0:
            raise InputError(f"{source}: line {pos + 1}: atom count {natoms} is not positive")
        if pos + 2 + natoms > len(lines):
            raise InputError(
                f"{source}: frame {len(frames)} announces {natoms} atoms but the file ends "
                f"after {max(len(lines) - pos - 2, 0)}"
            )
        comment = lines[pos + 1].strip()
        symbols, coords = [], []
        for k in range(natoms):
            lineno = pos + 2 + k
            parts = lines[lineno].split()
            if len(parts) < 4:
                raise InputError(
                    f"{source}: line {lineno + 1}: expected 'element x y z', found "
                    f"{excerpt(lines[lineno].strip())}"
                )
            symbols.append(normalise_symbol(parts[0], f"{source}: line {lineno + 1}"))
            try:
                xyz = [float(v) for v in parts[1:4]]
            except ValueError:
                raise InputError(
                    f"{source}: line {lineno + 1}: coordinates {excerpt(' '.join(parts[1:4]))} "
                    "are not numbers"
                ) from None
            if not all(math.isfinite(v) for v in xyz):
                raise InputError(
                    f"{source}: line {lineno + 1}: coordinates {' '.join(parts[1:4])!r} "
                    "are not finite"
                )
            coords.append(xyz)
        frames.append(XYZFrame(tuple(symbols), np.array(coords, dtype=float), comment))
        pos += 2 + natoms
    if not frames:
        raise InputError(f"{source}: no atoms found")
    return frames


def read_xyz(path: str | os.PathLike) -> list[XYZFrame]:
    """Read every frame of an XYZ file (see :func:`parse_xyz`)."""
    path = os.fspath(path)
    if not os.path.isfile(path):
        raise InputError(f"geometry file: {path!r} does not exist")
    try:
        with open(path, encoding="utf-8-sig") as fh:   # a byte-order mark is allowed
            text = fh.read()
    except UnicodeDecodeError:
        raise InputError(f"geometry file: {path!r} is not a UTF-8 text file") from None
    if "\x00" in text:
        raise InputError(f"geometry file: {path!r} is not a text file (it contains NUL bytes)")
    return parse_xyz(text, source=os.path.basename(path))


def _as_pair(value, name: str, kind=int) -> tuple:
    try:
        items = tuple(value)
    except TypeError:
        raise InputError(f"{name}: expected two values (fragment A, fragment B), got {value!r}") from None
    if len(items) != 2:
        raise InputError(f"{name}: expected two values (fragment A, fragment B), got {value!r}")
    out = []
    for item in items:
        if isinstance(item, bool) or not isinstance(item, (int, np.integer)) or (
            kind is int and int(item) != item
        ):
            raise InputError(f"{name}: {item!r} is not an integer")
        out.append(int(item))
    return tuple(out)


@dataclass(frozen=True, eq=False)
class Dimer:
    """Two molecular fragments A and B.

    Parameters
    ----------
    symbols : sequence of str
        Element symbols of all atoms.
    coordinates : array-like, shape (natoms, 3)
        Cartesian coordinates in angstrom.
    fragment_a : sequence of int
        0-based indices of the atoms of fragment A; every other atom is fragment B.
    charges : (int, int)
        Net charges of fragments A and B.
    multiplicities : (int, int)
        Spin multiplicities 2S+1 of fragments A and B.
    name : str
        A label used in reports.
    dimer_multiplicity : int, optional
        Spin multiplicity 2S+1 of the dimer. None (the default) means high spin,
        S = S_A + S_B (the fragment spins parallel). The lowest spin,
        S = |S_A - S_B|, is computed as a broken-symmetry unrestricted determinant
        started from the fragment densities with the spin of one fragment flipped
        (see :mod:`interkit.model.spin`); values between the two are refused
        (NotAvailableError), values outside them or of the wrong parity are an
        InputError.
    """

    symbols: tuple[str, ...]
    coordinates: np.ndarray
    fragment_a: tuple[int, ...]
    charges: tuple[int, int] = (0, 0)
    multiplicities: tuple[int, int] = (1, 1)
    name: str = "dimer"
    dimer_multiplicity: int | None = None
    _check: bool = field(default=True, repr=False, compare=False)

    def __post_init__(self):
        symbols = tuple(normalise_symbol(s, f"symbols[{i}]") for i, s in enumerate(self.symbols))
        try:
            coords = np.array(self.coordinates, dtype=float)
        except (TypeError, ValueError):
            raise InputError("coordinates: values are not numbers") from None
        if coords.ndim != 2 or coords.shape[1] != 3 or coords.shape[0] != len(symbols):
            raise InputError(
                f"coordinates: expected shape ({len(symbols)}, 3), got {coords.shape}"
            )
        if not np.all(np.isfinite(coords)):
            bad = int(np.argwhere(~np.isfinite(coords))[0][0])
            raise InputError(f"coordinates: atom {bad} has a non-finite coordinate {coords[bad].tolist()}")
        coords.setflags(write=False)
        object.__setattr__(self, "symbols", symbols)
        object.__setattr__(self, "coordinates", coords)
        object.__setattr__(self, "charges", _as_pair(self.charges, "charges"))
        object.__setattr__(self, "multiplicities", _as_pair(self.multiplicities, "multiplicities"))
        object.__setattr__(self, "dimer_multiplicity", self._checked_dimer_multiplicity())
        frag_a = self._checked_fragment(self.fragment_a, len(symbols))
        object.__setattr__(self, "fragment_a", frag_a)
        if self._check:
            self._validate()

    def _checked_dimer_multiplicity(self) -> int | None:
        value = self.dimer_multiplicity
        if value is None:
            return None
        if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
            raise InputError(f"dimer_multiplicity: {value!r} is not a positive integer")
        value = int(value)
        ma, mb = self.multiplicities
        sa, sb = ma - 1, mb - 1  # 2S of each fragment
        low, high = abs(sa - sb) + 1, sa + sb + 1
        if value < 1 or (value - high) % 2 != 0 or not low <= value <= high:
            allowed = ", ".join(str(m) for m in range(low, high + 1, 2))
            raise InputError(
                f"dimer_multiplicity: {value} is impossible for fragments of multiplicities {ma} and "
                f"{mb} (|S_A - S_B| <= S <= S_A + S_B and the electron count allow {allowed})")
        if low < value < high:
            from ..errors import NotAvailableError

            raise NotAvailableError(
                f"dimer_multiplicity: {value} lies between the lowest ({low}) and the highest ({high}) "
                "spin of these fragments; a single determinant gives only those two")
        return value

    @staticmethod
    def _checked_fragment(fragment_a, natoms: int) -> tuple[int, ...]:
        if isinstance(fragment_a, (str, bytes)):
            raise InputError(f"fragment_a: {fragment_a!r} is not a list of atom indices")
        try:
            raw = list(fragment_a)
        except TypeError:
            raise InputError(f"fragment_a: {fragment_a!r} is not a list of atom indices") from None
        for i in raw:
            if isinstance(i, bool) or not isinstance(i, (int, np.integer)):
                raise InputError(f"fragment_a: {i!r} is not an atom index (a whole number)")
        items = [int(i) for i in raw]
        for i in items:
            if not 0 <= i < natoms:
                raise InputError(f"fragment_a: atom index {i} is outside 0..{natoms - 1}")
        if len(set(items)) != len(items):
            raise InputError(f"fragment_a: {list(fragment_a)!r} repeats an atom index")
        if not items:
            raise InputError("fragment_a: fragment A has no atoms")
        if len(items) == natoms:
            raise InputError("fragment_a: every atom is in fragment A, so fragment B is empty")
        return tuple(sorted(items))

    def _validate(self) -> None:
        n = self.natoms
        dist = pair_distances(self.coordinates, self.coordinates) + np.eye(n) * 1e9
        i, j = np.unravel_index(np.argmin(dist), dist.shape)
        if dist[i, j] < MIN_ATOM_DISTANCE_ANGSTROM:
            raise InputError(
                f"coordinates: atoms {min(i, j)} ({self.symbols[min(i, j)]}) and {max(i, j)} "
                f"({self.symbols[max(i, j)]}) are {dist[i, j]:.3f} Å apart, closer than "
                f"{MIN_ATOM_DISTANCE_ANGSTROM} Å"
            )
        for label, idx, charge, mult in (
            ("A", self.fragment_a, self.charges[0], self.multiplicities[0]),
            ("B", self.fragment_b, self.charges[1], self.multiplicities[1]),
        ):
            k = 0 if label == "A" else 1
            if mult < 1:
                raise InputError(f"multiplicities[{k}]: {mult} is not a positive integer")
            nelec = sum(atomic_number(self.symbols[i]) for i in idx) - charge
            if nelec < 0:
                raise InputError(
                    f"charges[{k}]: charge {charge} leaves fragment {label} with {nelec} electrons"
                )
            if nelec == 0:
                raise InputError(f"charges[{k}]: charge {charge} leaves fragment {label} with no electrons")
            if (nelec + mult - 1) % 2 != 0 or mult - 1 > nelec:
                raise InputError(
                    f"multiplicities[{k}]: multiplicity {mult} is impossible for fragment "
                    f"{label} with {nelec} electrons (charge {charge})"
                )

    # ------------------------------------------------------------------ builders
    @classmethod
    def from_atoms(
        cls,
        symbols: Sequence[str],
        coordinates,
        fragment_a: Iterable[int] | None = None,
        charges: Sequence[int] = (0, 0),
        multiplicities: Sequence[int] = (1, 1),
        name: str = "dimer",
        dimer_multiplicity: int | None = None,
    ) -> Dimer:
        """Build a dimer, splitting it by covalent connectivity if ``fragment_a`` is None.

        ``dimer_multiplicity`` None means high spin (see :class:`Dimer`)."""
        symbols = tuple(normalise_symbol(s, f"symbols[{i}]") for i, s in enumerate(symbols))
        if fragment_a is None:
            probe = cls(symbols, coordinates, (0,), (0, 0), (1, 1), name, _check=False)
            groups = connected_components(probe.symbols, probe.coordinates)
            if len(groups) != 2:
                raise InputError(
                    f"fragment_a: automatic split by covalent connectivity found {len(groups)} "
                    "fragments, not 2; give fragment_a explicitly"
                )
            fragment_a = groups[0]
        elif isinstance(fragment_a, (str, bytes)) or not hasattr(fragment_a, "__iter__"):
            raise InputError(f"fragment_a: {fragment_a!r} is not a list of atom indices")
        return cls(symbols, coordinates, tuple(fragment_a), tuple(charges), tuple(multiplicities), name,
                   dimer_multiplicity)

    @classmethod
    def from_xyz(
        cls,
        path: str | os.PathLike,
        fragment_a: Iterable[int] | None = None,
        charges: Sequence[int] = (0, 0),
        multiplicities: Sequence[int] = (1, 1),
        frame: int = 0,
        name: str | None = None,
        dimer_multiplicity: int | None = None,
    ) -> Dimer:
        """Read a dimer from an XYZ file (angstrom).

        Parameters
        ----------
        path : path-like
            XYZ file; multi-frame files are allowed, ``frame`` selects one.
        fragment_a : sequence of int, optional
            0-based atom indices of fragment A; if omitted the atoms are split into two
            fragments by covalent connectivity.
        charges, multiplicities : (int, int)
            Per fragment.
        frame : int
            Frame index for multi-frame files.
        name : str, optional
            Label; defaults to the file name without extension.
        dimer_multiplicity : int, optional
            Spin multiplicity of the dimer; None (default) means high spin,
            S = S_A + S_B (see :class:`Dimer`).
        """
        frames = read_xyz(path)
        if not -len(frames) <= frame < len(frames):
            raise InputError(f"frame: {frame} is outside the {len(frames)} frames of {os.fspath(path)!r}")
        f = frames[frame]
        label = name or os.path.splitext(os.path.basename(os.fspath(path)))[0]
        return cls.from_atoms(f.symbols, f.coordinates, fragment_a, charges, multiplicities, label,
                              dimer_multiplicity)

    @classmethod
    def from_xyz_string(cls, text: str, fragment_a=None, charges=(0, 0), multiplicities=(1, 1),
                        name: str = "dimer", dimer_multiplicity: int | None = None) -> Dimer:
        """Read a dimer from XYZ text (first frame)."""
        f = parse_xyz(text)[0]
        return cls.from_atoms(f.symbols, f.coordinates, fragment_a, charges, multiplicities, name,
                              dimer_multiplicity)

    @classmethod
    def frames_from_xyz(cls, path: str | os.PathLike, fragment_a=None, charges=(0, 0),
                        multiplicities=(1, 1), dimer_multiplicity: int | None = None) -> list[Dimer]:
        """Read every frame of a multi-frame XYZ file as dimers with the same split."""
        frames = read_xyz(path)
        first = cls.from_atoms(frames[0].symbols, frames[0].coordinates, fragment_a, charges,
                               multiplicities, os.path.splitext(os.path.basename(os.fspath(path)))[0],
                               dimer_multiplicity)
        out = [first]
        for k, f in enumerate(frames[1:], start=1):
            if f.symbols != first.symbols:
                raise InputError(f"{os.fspath(path)}: frame {k} has different atoms than frame 0")
            out.append(first.with_coordinates(f.coordinates))
        return out

    @classmethod
    def from_ase(cls, atoms, fragment_a=None, charges=(0, 0), multiplicities=(1, 1),
                 name: str | None = None, dimer_multiplicity: int | None = None) -> Dimer:
        """Build a dimer from an :class:`ase.Atoms` object."""
        return cls.from_atoms(atoms.get_chemical_symbols(), atoms.get_positions(), fragment_a,
                              charges, multiplicities, name or atoms.get_chemical_formula(),
                              dimer_multiplicity)

    def to_ase(self):
        """Return an :class:`ase.Atoms` copy (requires the optional ``ase`` package)."""
        try:
            from ase import Atoms
        except ImportError as exc:  # pragma: no cover - depends on environment
            raise InputError("to_ase: the optional package 'ase' is not installed") from exc
        return Atoms(symbols=list(self.symbols), positions=np.array(self.coordinates))

    # ------------------------------------------------------------------ derived
    @property
    def natoms(self) -> int:
        """Number of atoms."""
        return len(self.symbols)

    @property
    def fragment_b(self) -> tuple[int, ...]:
        """0-based indices of the atoms of fragment B."""
        a = set(self.fragment_a)
        return tuple(i for i in range(self.natoms) if i not in a)

    @property
    def fragment_labels(self) -> tuple[str, ...]:
        """``'A'`` or ``'B'`` for every atom."""
        a = set(self.fragment_a)
        return tuple("A" if i in a else "B" for i in range(self.natoms))

    @property
    def spins(self) -> tuple[int, int]:
        """Number of unpaired electrons 2S of fragments A and B."""
        return (self.multiplicities[0] - 1, self.multiplicities[1] - 1)

    @property
    def spin(self) -> int:
        """Number of unpaired electrons 2S of the dimer: ``dimer_multiplicity - 1``, or
        the high-spin sum of the fragments' when ``dimer_multiplicity`` is None."""
        if self.dimer_multiplicity is None:
            return sum(self.spins)
        return self.dimer_multiplicity - 1

    @property
    def broken_symmetry(self) -> bool:
        """True when the dimer spin is below high spin (a broken-symmetry calculation)."""
        return self.spin < sum(self.spins)

    def masses(self) -> np.ndarray:
        """Atomic masses in dalton."""
        return np.array([atomic_mass(s) for s in self.symbols])

    def centre_of_mass(self, fragment: str) -> np.ndarray:
        """Centre of mass of fragment ``'A'`` or ``'B'`` in angstrom."""
        idx = list(self.fragment_a if fragment == "A" else self.fragment_b)
        m = self.masses()[idx]
        return (m[:, None] * self.coordinates[idx]).sum(axis=0) / m.sum()

    def intermolecular_distances(self) -> np.ndarray:
        """Distances (angstrom) between every atom of A (rows) and of B (columns)."""
        c = self.coordinates
        return pair_distances(c[list(self.fragment_a)], c[list(self.fragment_b)])

    def with_coordinates(self, coordinates) -> Dimer:
        """Same atoms, fragments and charges with new coordinates (validated)."""
        return Dimer(self.symbols, coordinates, self.fragment_a, self.charges,
                     self.multiplicities, self.name, self.dimer_multiplicity)

    def translated_b(self, shift) -> Dimer:
        """Copy with fragment B translated rigidly by ``shift`` (angstrom)."""
        coords = np.array(self.coordinates)
        coords[list(self.fragment_b)] += np.asarray(shift, dtype=float)
        return Dimer(self.symbols, coords, self.fragment_a, self.charges, self.multiplicities,
                     self.name, self.dimer_multiplicity, _check=False)

    def to_xyz_string(self, comment: str | None = None) -> str:
        """XYZ text of the dimer (angstrom, 10 decimals)."""
        lines = [str(self.natoms), comment if comment is not None else self.name]
        for s, (x, y, z) in zip(self.symbols, self.coordinates):
            lines.append(f"{s:<2s} {x:16.10f} {y:16.10f} {z:16.10f}")
        return "\n".join(lines) + "\n"

    def to_dict(self) -> dict:
        """Plain-data description (JSON-safe)."""
        out = {
            "name": self.name,
            "symbols": list(self.symbols),
            "coordinates_angstrom": np.asarray(self.coordinates).tolist(),
            "fragment_a": list(self.fragment_a),
            "charges": list(self.charges),
            "multiplicities": list(self.multiplicities),
        }
        if self.dimer_multiplicity is not None:  # absent = high spin (older files unchanged)
            out["dimer_multiplicity"] = self.dimer_multiplicity
        return out

    @classmethod
    def from_dict(cls, data: dict) -> Dimer:
        """Inverse of :meth:`to_dict`."""
        return cls(tuple(data["symbols"]), data["coordinates_angstrom"], tuple(data["fragment_a"]),
                   tuple(data["charges"]), tuple(data["multiplicities"]), data.get("name", "dimer"),
                   data.get("dimer_multiplicity"))

    def __eq__(self, other) -> bool:
        if not isinstance(other, Dimer):
            return NotImplemented
        return (self.symbols == other.symbols and self.fragment_a == other.fragment_a
                and self.charges == other.charges and self.multiplicities == other.multiplicities
                and self.dimer_multiplicity == other.dimer_multiplicity
                and np.array_equal(self.coordinates, other.coordinates))

    __hash__ = None  # type: ignore[assignment]
