"""Studies: a named collection of dimer scans that share their levels of theory.

A :class:`Study` holds one :class:`~interkit.model.spec.ScanSpec` per system (its own
dimer, coordinate and grid) plus a free-form category label per system (``"hydrogen
bond"``, ``"stacking"``...) and, optionally, reference interaction energies at some of
its points. Every scan of a study uses the same levels, dispersion schemes,
counterpoise and force settings, so the statistics of
:mod:`interkit.analysis.study_stats` compare like with like.

Studies come from Python (:class:`Study`, :meth:`Study.from_specs`), from one TOML file
(:func:`interkit.model.study_file.load_study_toml`) or from a folder of XYZ files with a
CSV of reference energies (:func:`interkit.model.study_folder.read_study_folder`).
"""

from __future__ import annotations

import json
import math
from collections.abc import Sequence
from dataclasses import dataclass, field

from ..errors import InputError
from .composite import CompositeLevel, parse_level
from .coordinates import CentreOfMass, ScanCoordinate
from .geometry import Dimer
from .levels import LevelOfTheory
from .spec import DEFAULT_MEMORY_LIMIT_MB, DEFAULT_SCF_THRESHOLD_HARTREE, ScanSpec

#: a reference distance matches a scan point within this many angstrom
REFERENCE_DISTANCE_TOLERANCE_ANGSTROM = 1e-3
#: a reference factor matches a scan point within this (relative to 1)
REFERENCE_FACTOR_TOLERANCE = 1e-6
#: characters a system name may not contain (names become DataTree node names)
_FORBIDDEN_NAME_CHARACTERS = "/\\"


@dataclass(frozen=True)
class ReferenceValue:
    """A reference interaction energy at one point of a system.

    Exactly one of ``distance_angstrom`` (the coordinate's value) and ``factor``
    (multiple of the starting value) says where.

    Attributes
    ----------
    e_int_kcal_per_mol : float
        Reference interaction energy (negative = bound).
    distance_angstrom : float or None
    factor : float or None
    source : str
        Where the value comes from (file and row, or a citation).
    """

    e_int_kcal_per_mol: float
    distance_angstrom: float | None = None
    factor: float | None = None
    source: str = ""

    def __post_init__(self):
        if (self.distance_angstrom is None) == (self.factor is None):
            raise InputError("reference: give exactly one of distance_angstrom or factor")
        for name in ("e_int_kcal_per_mol", "distance_angstrom", "factor"):
            value = getattr(self, name)
            if value is None:
                continue
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
                raise InputError(f"reference {name}: {value!r} is not a finite number")
            object.__setattr__(self, name, float(value))

    def point_index(self, spec: ScanSpec) -> int | None:
        """Index of the point of ``spec`` this value belongs to (None if none matches)."""
        for p in spec.points:
            if self.distance_angstrom is not None:
                if abs(p.distance - self.distance_angstrom) <= REFERENCE_DISTANCE_TOLERANCE_ANGSTROM:
                    return p.index
            elif math.isfinite(p.factor) and abs(p.factor - self.factor) <= REFERENCE_FACTOR_TOLERANCE:
                return p.index
        return None

    def to_dict(self) -> dict:
        return {"e_int_kcal_per_mol": self.e_int_kcal_per_mol, "distance_angstrom": self.distance_angstrom,
                "factor": self.factor, "source": self.source}


@dataclass(frozen=True)
class StudySystem:
    """One dimer of a study: its geometry, coordinate, grid and category.

    Parameters
    ----------
    name : str
        Unique within the study (no ``/``); the node name of its results.
    dimer : Dimer
    coordinate : ScanCoordinate
        As in :class:`~interkit.model.spec.ScanSpec` (default centre of mass).
    distances, factors : sequence of float, optional
        The grid (angstrom, or multiples of the starting value); a single-point system
        is ``factors=[1.0]``. Omit both for a :class:`~interkit.model.coordinates.Frames`
        coordinate.
    category : str
        Free-form label (e.g. ``"hydrogen bond"``); statistics are grouped by it.
    reference : sequence of ReferenceValue
        Reference interaction energies at some of the points (may be empty).
    """

    name: str
    dimer: Dimer
    coordinate: ScanCoordinate = field(default_factory=CentreOfMass)
    distances: Sequence[float] | None = None
    factors: Sequence[float] | None = None
    category: str = ""
    reference: Sequence[ReferenceValue] = ()

    def __post_init__(self):
        check_system_name(self.name)
        if not isinstance(self.category, str):
            raise InputError(f"system {self.name!r} category: {self.category!r} is not a string")
        refs = tuple(self.reference or ())
        for r in refs:
            if not isinstance(r, ReferenceValue):
                raise InputError(f"system {self.name!r} reference: {r!r} is not a ReferenceValue")
        object.__setattr__(self, "reference", refs)
        object.__setattr__(self, "category", self.category.strip())


def check_system_name(name) -> str:
    """Return ``name`` if it is a usable system name, else raise InputError."""
    if not isinstance(name, str) or not name.strip():
        raise InputError(f"system name: {name!r} is not a non-empty string")
    bad = [c for c in _FORBIDDEN_NAME_CHARACTERS if c in name]
    if bad or name != name.strip() or name.startswith("."):
        raise InputError(f"system name: {name!r} may not contain '/' or '\\', start with '.', "
                         "or have leading or trailing spaces")
    return name


@dataclass(frozen=True)
class Study:
    """A named collection of dimer scans sharing levels and dispersion schemes.

    Parameters
    ----------
    name : str
        Label of the study.
    systems : sequence of StudySystem
        The dimers (names unique).
    levels : sequence of str or LevelOfTheory
        Levels of theory of every scan, e.g. ``["hf/sto-3g", "b3lyp-d3bj/def2-svp"]``.
    dispersion : sequence of str, optional
        Post-hoc dispersion schemes of every scan (see :class:`~interkit.ScanSpec`).
    counterpoise, forces : bool
        As in :class:`~interkit.ScanSpec`, for every scan.
    scf_threshold_hartree : float
        SCF energy convergence threshold (hartree) of every calculation.
    memory_limit_mb : float
        Per-calculation memory limit (MB) of every scan.

    Attributes
    ----------
    specs : tuple of ScanSpec
        One per system, in order; each spec's ``name`` is its system's name.
    """

    name: str
    systems: Sequence[StudySystem]
    levels: Sequence[str | LevelOfTheory] = ("hf/def2-svp",)
    dispersion: Sequence[str] | None = None
    counterpoise: bool = True
    forces: bool = False
    scf_threshold_hartree: float = DEFAULT_SCF_THRESHOLD_HARTREE
    memory_limit_mb: float = DEFAULT_MEMORY_LIMIT_MB
    specs: tuple = field(init=False, repr=False, compare=False)

    def __post_init__(self):
        if not isinstance(self.name, str) or not self.name.strip():
            raise InputError(f"study name: {self.name!r} is not a non-empty string")
        systems = tuple(self.systems) if not isinstance(self.systems, (str, bytes)) else ()
        if not systems:
            raise InputError("systems: a study needs at least one system")
        seen: set[str] = set()
        for k, s in enumerate(systems):
            if not isinstance(s, StudySystem):
                raise InputError(f"systems[{k}]: {type(s).__name__} is not an interkit StudySystem")
            if s.name in seen:
                raise InputError(f"systems[{k}]: the name {s.name!r} appears twice")
            seen.add(s.name)
        levels = [self.levels] if isinstance(self.levels, (str, LevelOfTheory, CompositeLevel)) else list(self.levels)
        levels = tuple(parse_level(x) for x in levels)
        object.__setattr__(self, "systems", systems)
        object.__setattr__(self, "levels", levels)
        specs = []
        for k, s in enumerate(systems):
            try:
                spec = ScanSpec(dimer=s.dimer, coordinate=s.coordinate, distances=s.distances, factors=s.factors,
                                levels=levels, dispersion=self.dispersion, counterpoise=self.counterpoise,
                                forces=self.forces, scf_threshold_hartree=self.scf_threshold_hartree,
                                memory_limit_mb=self.memory_limit_mb, name=s.name)
            except InputError as exc:
                raise InputError(f"systems[{k}] {s.name!r}: {exc}") from None
            for j, r in enumerate(s.reference):
                if r.point_index(spec) is None:
                    where = (f"distance {r.distance_angstrom:g} Å" if r.distance_angstrom is not None
                             else f"factor {r.factor:g}")
                    raise InputError(f"systems[{k}] {s.name!r} reference[{j}]: {where} is not a point of its "
                                     f"scan ({', '.join(f'{p.distance:.4f}' for p in spec.points)} Å)")
            specs.append(spec)
        object.__setattr__(self, "specs", tuple(specs))
        object.__setattr__(self, "dispersion", specs[0].dispersion)
        object.__setattr__(self, "levels", _given(specs[0]))

    # ------------------------------------------------------------------ access
    @property
    def names(self) -> tuple[str, ...]:
        """System names, in order."""
        return tuple(s.name for s in self.systems)

    @property
    def categories(self) -> dict[str, str]:
        """System name -> category."""
        return {s.name: s.category for s in self.systems}

    def spec(self, name: str) -> ScanSpec:
        """The ScanSpec of system ``name``."""
        for s, spec in zip(self.systems, self.specs):
            if s.name == name:
                return spec
        raise InputError(f"system: {name!r} is not in study {self.name!r} ({', '.join(self.names)})")

    def with_systems(self, names: Sequence[str]) -> Study:
        """The same study restricted to the systems ``names`` (in the given order)."""
        by_name = {s.name: s for s in self.systems}
        for n in names:
            if n not in by_name:
                raise InputError(f"systems: {n!r} is not in study {self.name!r}")
        return Study(self.name, [by_name[n] for n in names], self.levels, self.dispersion, self.counterpoise,
                     self.forces, self.scf_threshold_hartree, self.memory_limit_mb)

    @classmethod
    def from_specs(cls, name: str, specs: Sequence[ScanSpec], categories: Sequence[str] | None = None,
                   references: Sequence[Sequence[ReferenceValue]] | None = None) -> Study:
        """A study of existing specs; they must share levels, dispersion schemes,
        counterpoise, forces, SCF threshold and memory limit (no decomposition).

        System names are the specs' names.
        """
        specs = list(specs)
        if not specs:
            raise InputError("specs: a study needs at least one spec")
        first = specs[0]
        shared = ("levels", "requested_levels", "dispersion", "counterpoise", "forces", "scf_threshold_hartree", "memory_limit_mb")
        for k, sp in enumerate(specs):
            if not isinstance(sp, ScanSpec):
                raise InputError(f"specs[{k}]: {type(sp).__name__} is not an interkit ScanSpec")
            for attr in shared:
                if getattr(sp, attr) != getattr(first, attr):
                    raise InputError(f"specs[{k}] {sp.name!r}: {attr} {getattr(sp, attr)!r} differs from "
                                     f"{getattr(first, attr)!r} of specs[0]; a study shares it across systems")
            if sp.decomposition is not None:
                raise InputError(f"specs[{k}] {sp.name!r}: decomposition: studies do not run decompositions")
        cats = list(categories) if categories is not None else [""] * len(specs)
        refs = list(references) if references is not None else [()] * len(specs)
        if len(cats) != len(specs) or len(refs) != len(specs):
            raise InputError(f"categories/references: {len(cats)}/{len(refs)} entries for {len(specs)} specs")
        systems = [StudySystem(sp.name, sp.dimer, sp.coordinate, sp.distances, sp.factors, c, r)
                   for sp, c, r in zip(specs, cats, refs)]
        return cls(name, systems, _given(first), first.dispersion, first.counterpoise, first.forces,
                   first.scf_threshold_hartree, first.memory_limit_mb)

    # ------------------------------------------------------------------ references
    def reference_table(self) -> list[tuple[str, int, float, str]]:
        """``(system, point index, e_int in kcal/mol, source)`` of every reference value."""
        out = []
        for s, spec in zip(self.systems, self.specs):
            for r in s.reference:
                out.append((s.name, int(r.point_index(spec)), r.e_int_kcal_per_mol, r.source))
        return out

    # ------------------------------------------------------------------ (de)serialisation
    def to_dict(self) -> dict:
        """Plain-data description (JSON-safe); :meth:`from_dict` inverts it."""
        return {
            "format": "interkit-study", "version": 1, "name": self.name,
            "systems": [{"name": s.name, "category": s.category, "spec": spec.to_dict(),
                         "reference": [r.to_dict() for r in s.reference]}
                        for s, spec in zip(self.systems, self.specs)],
        }

    def to_json(self) -> str:
        return json.dumps(self.to_dict(), sort_keys=True)

    @classmethod
    def from_dict(cls, data: dict) -> Study:
        if not isinstance(data, dict) or data.get("format") != "interkit-study":
            raise InputError("study: not an interkit study description (format 'interkit-study')")
        specs, cats, refs = [], [], []
        for entry in data["systems"]:
            specs.append(ScanSpec.from_dict(entry["spec"]))
            cats.append(entry.get("category", ""))
            refs.append([ReferenceValue(**r) for r in entry.get("reference", [])])
        return cls.from_specs(data["name"], specs, cats, refs)

    @classmethod
    def from_json(cls, text: str) -> Study:
        return cls.from_dict(json.loads(text))


__all__ = ["ReferenceValue", "Study", "StudySystem", "check_system_name"]


def _given(spec: ScanSpec) -> tuple:
    """A spec's levels as a study keeps them: composites as given, else as computed."""
    return spec.levels_as_given if spec.composites else spec.levels
