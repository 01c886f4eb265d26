"""ScanSpec: a frozen, validated description of one interaction-energy scan.

A spec fully determines the numbers a scan produces; it is stored as JSON in every
Dataset and can be read from a TOML file (see :func:`load_spec_toml`).
"""

from __future__ import annotations

import json
import math
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError, NotAvailableError
from .composite import CompositeLevel, computed_levels
from .composite import parse_level as parse_any_level
from .coordinates import CentreOfMass, Frames, ScanCoordinate, coordinate_from_dict
from .geometry import Dimer, covalent_radius_angstrom
from .levels import (
    DISPERSION_SCHEMES,
    LEVEL_SETTINGS,
    LevelOfTheory,
    check_basis,
    ecp_assignment,
)

#: inter-fragment atoms may not come closer than this fraction of the sum of their
#: covalent radii (and never closer than 0.5 Å)
SAFE_CONTACT_FRACTION = 0.75
SAFE_CONTACT_FLOOR_ANGSTROM = 0.5
#: SCF energy convergence threshold in hartree
DEFAULT_SCF_THRESHOLD_HARTREE = 1e-8
#: a scan is refused when one calculation's estimated peak memory exceeds this (MB);
#: leaves room for the operating system and a second worker on a 24 GB machine
DEFAULT_MEMORY_LIMIT_MB = 16000.0


@dataclass(frozen=True)
class ScanPoint:
    """One point of a scan: its coordinate value (angstrom), grid factor and geometry."""

    index: int
    distance: float
    factor: float
    dimer: Dimer


def _positive_grid(values, name: str) -> tuple[float, ...]:
    if isinstance(values, (str, bytes)) or not hasattr(values, "__iter__"):
        raise InputError(f"{name}: expected a list of numbers, got {values!r}")
    out = []
    for k, v in enumerate(values):
        if isinstance(v, bool):
            raise InputError(f"{name}[{k}]: {v!r} is not a number")
        try:
            x = float(v)
        except (TypeError, ValueError):
            raise InputError(f"{name}[{k}]: {v!r} is not a number") from None
        if not math.isfinite(x) or x <= 0:
            raise InputError(f"{name}[{k}]: {v!r} is not a positive finite number")
        out.append(x)
    if not out:
        raise InputError(f"{name}: the grid is empty")
    if len(set(out)) != len(out):
        dup = next(x for x in out if out.count(x) > 1)
        raise InputError(f"{name}: value {dup!r} appears twice")
    return tuple(out)


def _safe_minimum(sym_a: str, sym_b: str) -> float:
    return max(SAFE_CONTACT_FLOOR_ANGSTROM,
               SAFE_CONTACT_FRACTION * (covalent_radius_angstrom(sym_a) + covalent_radius_angstrom(sym_b)))


def check_contacts(dimer: Dimer, where: str) -> None:
    """Raise InputError if atoms of A and B are closer than the safe minimum."""
    dist = dimer.intermolecular_distances()
    for ia, i in enumerate(dimer.fragment_a):
        for jb, j in enumerate(dimer.fragment_b):
            limit = _safe_minimum(dimer.symbols[i], dimer.symbols[j])
            if dist[ia, jb] < limit:
                raise InputError(
                    f"{where}: atoms {i} ({dimer.symbols[i]}, A) and {j} ({dimer.symbols[j]}, B) "
                    f"come to {dist[ia, jb]:.3f} Å, below the safe minimum {limit:.2f} Å"
                )


#: orbital basis of the SAPT0 decomposition unless the spec names another
DEFAULT_DECOMPOSITION_BASIS = "jun-cc-pvdz"
#: the decomposition is refused above this estimated size of its largest tensor (MB)
DEFAULT_SAPT_MEMORY_LIMIT_MB = 8000.0
DECOMPOSITIONS = ("sapt0",)


@dataclass(frozen=True, eq=False)
class ScanSpec:
    """What to compute along a dimer separation scan.

    Parameters
    ----------
    dimer : Dimer
        The starting geometry; fragment A stays fixed.
    coordinate : ScanCoordinate
        :class:`CentreOfMass`, :class:`AtomPair`, :class:`Vector` or :class:`Frames`.
    distances : sequence of float, optional
        Absolute coordinate values in angstrom.
    factors : sequence of float, optional
        Multiples of the starting value (exactly one of ``distances``/``factors``
        unless the coordinate is :class:`Frames`).
    levels : sequence of str, LevelOfTheory or CompositeLevel
        Levels of theory, e.g. ``["hf/def2-svp", "b3lyp-d3bj/def2-svp"]``; numerical
        settings (frozen core, fitting, DFT grid, fitting bases) through
        ``ik.parse_level("mp2/cc-pvdz", frozen_core=False)`` or :class:`LevelOfTheory`.
        Composite levels (``"mp2/cc-pvtz~cc-pvqz + ccsd(t)/cc-pvdz"``, see
        :mod:`interkit.model.composite`) are computed through their components: after
        construction ``levels`` holds the computed levels (the plain ones given, then
        each composite's components not already listed), ``composites`` the composites
        and ``requested_levels`` the labels as given.
    counterpoise : bool
        Boys–Bernardi counterpoise correction (dimer-basis monomers at every point).
    forces : bool
        Counterpoise-corrected forces at every point: analytic gradients for HF, DFT
        (with the dispersion correction's gradient) and MP2 (DF-MP2; an MP2 level of
        open-shell fragments runs with exact integrals in all its calculations),
        central differences along the coordinate for SCS-MP2 and CCSD(T);
        plus the Hellmann–Feynman (electrostatic) split for HF, DFT and closed-shell
        DF-MP2 (the electrostatic force of the relaxed MP2 density).
    decomposition : {None, 'sapt0'}
        ``'sapt0'`` adds a closed-shell density-fitted SAPT0 decomposition at every
        point (one calculation per point, in the dimer-centred ``decomposition_basis``,
        independent of ``levels``): electrostatics, exchange, induction (with δHF) and
        dispersion. Open-shell fragments are refused.
    decomposition_basis : str
        Orbital basis of the decomposition (default ``'jun-cc-pvdz'``).
    sapt_memory_limit_mb : float
        Refuse the decomposition (ResourceError) if its largest tensor, estimated
        before anything runs, would exceed this many MB.
    dispersion : sequence of str, optional
        Post-hoc dispersion schemes compared on the same SCF, e.g.
        ``["none", "d3zero", "d3bj", "d4"]`` (``-atm`` variants add the three-body
        term). The Dataset then gets a ``dispersion`` dimension on ``e_int``,
        ``e_int_nocp``, ``e_disp_corr`` (and the forces): one SCF per point serves
        every scheme. DFT levels must then be given without a dispersion suffix;
        non-DFT levels carry values under ``'none'`` only, and a scheme without
        parameters for a functional is reported in ``dispersion_status``.
    scf_threshold_hartree : float
        SCF energy convergence threshold in hartree (default 1e-8: the error of an
        interaction energy is second order in the density error, below 1e-5 kcal/mol).
        Calculations with gradients converge to at least 1e-9, SAPT0 to 1e-10.
    memory_limit_mb : float
        Refuse the scan (ResourceError, before any calculation) when the estimated
        peak memory of one calculation (its largest tensors, see
        :mod:`interkit.engine.cost`) exceeds this many MB (default 16000).
    keep_densities : bool
        Keep the converged SCF density matrix of every counterpoise calculation in its
        store entry (for deformation densities, :mod:`interkit.run.densities`). It does
        not change any number and is not part of the store keys; each entry grows by
        nao² × 8 bytes, × 4/3 as base64 in the JSON entry (measured: 55 kB per
        calculation, 166 kB per point and level, for water–methanol in def2-SVP,
        nao = 72). Needs a ``cache``; entries stored earlier without densities keep
        none (:func:`interkit.compute_point_densities` adds them for one point).
    name : str
        Label of the scan.
    """

    dimer: Dimer
    coordinate: ScanCoordinate = field(default_factory=CentreOfMass)
    distances: Sequence[float] | None = None
    factors: Sequence[float] | None = None
    levels: Sequence[str | LevelOfTheory | CompositeLevel] = ("hf/def2-svp",)
    counterpoise: bool = True
    forces: bool = False
    decomposition: str | None = None
    decomposition_basis: str = DEFAULT_DECOMPOSITION_BASIS
    sapt_memory_limit_mb: float = DEFAULT_SAPT_MEMORY_LIMIT_MB
    dispersion: Sequence[str] | None = None
    scf_threshold_hartree: float = DEFAULT_SCF_THRESHOLD_HARTREE
    name: str = ""
    memory_limit_mb: float = DEFAULT_MEMORY_LIMIT_MB
    keep_densities: bool = False

    def __post_init__(self):
        if not isinstance(self.dimer, Dimer):
            raise InputError(f"dimer: expected an interkit.Dimer, got {type(self.dimer).__name__}")
        if not isinstance(self.coordinate, ScanCoordinate):
            raise InputError(f"coordinate: {self.coordinate!r} is not a scan coordinate")
        self.coordinate.check(self.dimer)
        is_frames = isinstance(self.coordinate, Frames)
        if is_frames:
            if self.distances is not None or self.factors is not None:
                raise InputError("distances/factors: a Frames coordinate gives its own geometries; omit the grid")
        else:
            if (self.distances is None) == (self.factors is None):
                raise InputError("distances/factors: give exactly one of distances (Å) or factors")
        distances = _positive_grid(self.distances, "distances") if self.distances is not None else None
        factors = _positive_grid(self.factors, "factors") if self.factors is not None else None
        object.__setattr__(self, "distances", distances)
        object.__setattr__(self, "factors", factors)
        if isinstance(self.levels, (str, LevelOfTheory, CompositeLevel)):
            levels_in = [self.levels]
        else:
            levels_in = list(self.levels)
        if not levels_in:
            raise InputError("levels: no level of theory given")
        requested = tuple(parse_any_level(x) for x in levels_in)
        for key in ("counterpoise", "forces", "keep_densities"):
            if not isinstance(getattr(self, key), (bool, np.bool_)):
                raise InputError(f"{key}: {getattr(self, key)!r} is not true or false")
        labels = [lv.label for lv in requested]
        for lab in labels:
            if labels.count(lab) > 1:
                raise InputError(f"levels: {lab!r} appears twice")
        composites = tuple(lv for lv in requested if isinstance(lv, CompositeLevel))
        if composites and self.forces:
            raise NotAvailableError(f"forces: not available for composite level {composites[0].label!r}")
        levels = tuple(lv for lv in requested if not isinstance(lv, CompositeLevel))
        if self.forces:
            levels = _levels_for_forces(levels, any(self.dimer.spins))
        levels = computed_levels(levels, composites)
        object.__setattr__(self, "composites", composites)
        object.__setattr__(self, "requested_levels", tuple(labels))
        object.__setattr__(self, "_requested", requested)
        for lv in levels:
            check_basis(lv, self.dimer.symbols)
        object.__setattr__(self, "levels", levels)
        if self.forces and not self.counterpoise:
            raise InputError("forces: forces are counterpoise-corrected; set counterpoise = true")
        self._check_decomposition()
        object.__setattr__(self, "dispersion", _check_dispersion_list(self.dispersion, levels))
        try:
            tol = float(self.scf_threshold_hartree)
        except (TypeError, ValueError):
            raise InputError(f"scf_threshold_hartree: {self.scf_threshold_hartree!r} is not a number") from None
        if not (0 < tol <= 1e-6):
            raise InputError(f"scf_threshold_hartree: {self.scf_threshold_hartree!r} must lie in (0, 1e-6] hartree")
        object.__setattr__(self, "scf_threshold_hartree", tol)
        limit = self.memory_limit_mb
        if isinstance(limit, bool) or not isinstance(limit, (int, float, np.integer, np.floating)) \
                or not math.isfinite(float(limit)) or float(limit) <= 0:
            raise InputError(f"memory_limit_mb: {limit!r} is not a positive number of MB")
        object.__setattr__(self, "memory_limit_mb", float(limit))
        if self.name is not None and not isinstance(self.name, str):
            raise InputError(f"name: {self.name!r} is not a string")
        object.__setattr__(self, "name", self.name or self.dimer.name)
        object.__setattr__(self, "_points", self._build_points())

    def _check_decomposition(self) -> None:
        """Validate the decomposition fields; estimate its size (no calculation runs)."""
        kind = self.decomposition
        if kind is not None and not isinstance(kind, str):
            raise InputError(f"decomposition: {kind!r} is not one of 'none', {', '.join(map(repr, DECOMPOSITIONS))}")
        kind = (kind or "none").strip().lower()
        if kind not in ("none",) + DECOMPOSITIONS:
            raise InputError(
                f"decomposition: {self.decomposition!r} is not one of 'none', {', '.join(map(repr, DECOMPOSITIONS))}")
        basis = self.decomposition_basis
        if not isinstance(basis, str) or not basis.strip():
            raise InputError(f"decomposition_basis: {basis!r} is not a basis-set name")
        limit = self.sapt_memory_limit_mb
        if isinstance(limit, bool) or not isinstance(limit, (int, float, np.integer, np.floating)) \
                or not math.isfinite(float(limit)) or float(limit) <= 0:
            raise InputError(f"sapt_memory_limit_mb: {limit!r} is not a positive number of MB")
        object.__setattr__(self, "decomposition", None if kind == "none" else kind)
        object.__setattr__(self, "decomposition_basis", basis.strip().lower())
        object.__setattr__(self, "sapt_memory_limit_mb", float(limit))
        if kind == "none":
            return
        for label, mult in zip("AB", self.dimer.multiplicities):
            if mult != 1:
                raise NotAvailableError(
                    f"decomposition: fragment {label} has multiplicity {mult}; "
                    "the SAPT0 decomposition needs closed-shell fragments (multiplicity 1)")
        heavy = ecp_assignment(self.decomposition_basis, self.dimer.symbols)
        if heavy:
            raise NotAvailableError(
                f"decomposition_basis: {self.decomposition_basis!r} needs effective core potentials for "
                f"{', '.join(sorted(heavy))}; the SAPT0 decomposition is all-electron only")

    # ------------------------------------------------------------------ points
    def _build_points(self) -> tuple[ScanPoint, ...]:
        coord = self.coordinate
        if isinstance(coord, Frames):
            dimers = coord.dimers(self.dimer)
            values = coord.frame_values(self.dimer)
            ref = coord.measure.value(self.dimer)
            raw = [(v, v / ref if ref else float("nan"), d, f"frames[{k}]")
                   for k, (v, d) in enumerate(zip(values, dimers))]
        else:
            ref = coord.value(self.dimer)
            if self.factors is not None and ref <= 0:
                raise InputError(
                    f"factors: the starting value of the {coord.describe()} is {ref:.4f} Å; "
                    "factors need a positive starting value"
                )
            if self.distances is not None:
                grid = [(d, d / ref if ref > 0 else float("nan"), f"distances[{k}] = {d:g} Å")
                        for k, d in enumerate(self.distances)]
            else:
                grid = [(f * ref, f, f"factors[{k}] = {f:g}") for k, f in enumerate(self.factors)]
            raw = [(v, f, coord.displaced(self.dimer, v), where) for v, f, where in grid]
        values = [r[0] for r in raw]
        for k, v in enumerate(values):
            if any(abs(v - w) < 1e-9 for w in values[:k]):
                raise InputError(f"{raw[k][3]}: two scan points share the value {v:.6f} Å")
        for _v, _f, d, where in raw:
            check_contacts(d, where)
        raw.sort(key=lambda r: r[0])
        return tuple(ScanPoint(k, float(v), float(f), d) for k, (v, f, d, _) in enumerate(raw))

    @property
    def points(self) -> tuple[ScanPoint, ...]:
        """The scan points sorted by increasing coordinate value."""
        return self._points  # type: ignore[attr-defined]

    @property
    def levels_as_given(self) -> tuple:
        """The levels as given (plain and composite, in order; :attr:`requested_levels`
        are their labels), before composites are replaced by their components."""
        return self._requested  # type: ignore[attr-defined]

    @property
    def is_rigid(self) -> bool:
        """True when every point is A fixed and B translated (not Frames)."""
        return not isinstance(self.coordinate, Frames)

    # ------------------------------------------------------------------ (de)serialisation
    def to_dict(self) -> dict:
        """Plain-data description (JSON-safe); :meth:`from_dict` inverts it."""
        return {
            "format": "interkit-scan-spec",
            "version": 1,
            "name": self.name,
            "dimer": self.dimer.to_dict(),
            "coordinate": self.coordinate.to_dict(),
            "distances": list(self.distances) if self.distances is not None else None,
            "factors": list(self.factors) if self.factors is not None else None,
            "levels": [lv.to_dict() for lv in self.levels],
            # the user's list, only when it holds composites (the computed levels above)
            **({"requested_levels": [lv.to_dict() for lv in self.levels_as_given]} if self.composites else {}),
            "counterpoise": bool(self.counterpoise),
            "forces": bool(self.forces),
            "decomposition": self.decomposition,
            "decomposition_basis": self.decomposition_basis,
            "sapt_memory_limit_mb": self.sapt_memory_limit_mb,
            "dispersion": self.dispersion,
            "scf_threshold_hartree": self.scf_threshold_hartree,
            "memory_limit_mb": self.memory_limit_mb,
            # written only when set, so the spec of every other scan reads as before
            **({"keep_densities": True} if self.keep_densities else {}),
        }

    def to_json(self) -> str:
        """JSON text of :meth:`to_dict`."""
        return json.dumps(self.to_dict(), sort_keys=True)

    @classmethod
    def from_dict(cls, data: dict) -> ScanSpec:
        """Rebuild a spec from :meth:`to_dict` output."""
        return cls(
            dimer=Dimer.from_dict(data["dimer"]),
            coordinate=coordinate_from_dict(data["coordinate"]),
            distances=data.get("distances"),
            factors=data.get("factors"),
            levels=[_level_from_dict(x) for x in data.get("requested_levels") or data["levels"]],
            counterpoise=data.get("counterpoise", True),
            forces=data.get("forces", False),
            decomposition=data.get("decomposition"),
            decomposition_basis=data.get("decomposition_basis", DEFAULT_DECOMPOSITION_BASIS),
            sapt_memory_limit_mb=data.get("sapt_memory_limit_mb", DEFAULT_SAPT_MEMORY_LIMIT_MB),
            dispersion=data.get("dispersion"),
            scf_threshold_hartree=data.get("scf_threshold_hartree", DEFAULT_SCF_THRESHOLD_HARTREE),
            name=data.get("name", ""),
            memory_limit_mb=data.get("memory_limit_mb", DEFAULT_MEMORY_LIMIT_MB),
            keep_densities=bool(data.get("keep_densities", False)),
        )

    def to_toml(self) -> str:
        """The spec as TOML text that :func:`interkit.load_spec_toml` reads back to the same
        calculations (geometry and frames written into the text; see
        :mod:`interkit.model.spec_toml_writer`)."""
        from .spec_toml_writer import spec_to_toml

        return spec_to_toml(self)

    @classmethod
    def from_json(cls, text: str) -> ScanSpec:
        """Inverse of :meth:`to_json`."""
        return cls.from_dict(json.loads(text))


# ---------------------------------------------------------------------- TOML files
_TOML_KEYS = {
    "": {"name", "system", "scan", "calculation"},
    "system": {"geometry", "demo", "xyz", "name", "fragment_a", "charges", "multiplicities", "dimer_multiplicity"},
    "scan": {"coordinate", "atoms", "vector", "distances", "factors", "frames", "frames_xyz", "values"},
    "calculation": {"levels", "counterpoise", "forces", "decomposition", "decomposition_basis",
                    "sapt_memory_limit_mb", "dispersion", "scf_threshold_hartree", "memory_limit_mb", "settings",
                    "keep_densities"},
    "calculation.settings": set(LEVEL_SETTINGS),
}


def _levels_for_forces(levels, open_shell: bool) -> tuple[LevelOfTheory, ...]:
    """Levels as computed with forces. Every calculation of one interaction energy uses
    the same integral treatment: analytic MP2 forces exist for fitted closed shells
    (SCF and correlation on one fitting basis) and with exact integrals, so an MP2 level
    of an open-shell dimer runs with exact integrals throughout (its label says so)."""
    from ..errors import NotAvailableError

    out = []
    for lv in levels:
        if lv.method == "mp2":
            if open_shell and (lv.scf_fitted or lv.correlation_fitting):
                if lv.jk_auxbasis or lv.ri_auxbasis:
                    raise NotAvailableError(
                        f"levels: {lv.label!r}: MP2 forces of open-shell fragments use exact integrals; "
                        "drop jk_auxbasis/ri_auxbasis")
                lv = lv.with_exact_integrals()
            elif lv.scf_fitted != bool(lv.correlation_fitting):
                raise NotAvailableError(
                    f"levels: {lv.label!r}: MP2 forces need density_fitting and correlation_fitting "
                    "both true or both false")
            elif lv.ri_auxbasis:
                raise NotAvailableError(
                    f"levels: {lv.label!r}: the DF-MP2 gradient fits the correlation on the SCF's "
                    "fitting basis; drop ri_auxbasis (or set jk_auxbasis)")
        out.append(lv)
    return tuple(out)


def _check_dispersion_list(schemes, levels) -> tuple[str, ...] | None:
    """Validate the ``dispersion`` list of a spec: known, distinct schemes; DFT levels
    without their own suffix. Returns None for no comparison."""
    if schemes is None:
        return None
    if isinstance(schemes, str):
        schemes = [schemes]
    try:
        items = [str(x).strip().lower() for x in schemes]
    except TypeError:
        raise InputError(f"dispersion: {schemes!r} is not a list of scheme names") from None
    if not items:
        return None
    allowed = ("none",) + DISPERSION_SCHEMES
    for item in items:
        if item not in allowed:
            raise InputError(f"dispersion: {item!r} is not one of {', '.join(allowed)}")
        if items.count(item) > 1:
            raise InputError(f"dispersion: {item!r} appears twice")
    if items == ["none"]:
        return None
    for lv in levels:
        if lv.dispersion:
            raise InputError(f"levels: {lv.label!r} carries its own dispersion suffix; give the bare "
                             f"functional when the dispersion list compares schemes")
    if not any(lv.method == "dft" for lv in levels):
        raise InputError("dispersion: the schemes apply to DFT levels only, and no level is DFT")
    return tuple(items)


def _level_from_dict(data: dict):
    if data.get("kind") == "composite":
        return CompositeLevel.from_dict(data)
    return LevelOfTheory.from_dict(data)
