"""Studies from one TOML file (see :func:`load_study_toml` for the layout)."""

from __future__ import annotations

import os
import tomllib

from ..errors import InputError, excerpt
from .spec_file import spec_from_mapping
from .study import ReferenceValue, Study, check_system_name

_STUDY_KEYS = {"name", "calculation", "systems"}
_CALCULATION_KEYS = {"levels", "counterpoise", "forces", "dispersion", "scf_threshold_hartree",
                     "memory_limit_mb", "settings"}
_SYSTEM_TABLE_KEYS = {"geometry", "demo", "fragment_a", "charges", "multiplicities", "dimer_multiplicity"}
_SCAN_TABLE_KEYS = {"coordinate", "atoms", "vector", "distances", "factors", "frames", "values"}
_SYSTEM_KEYS = {"name", "category", "reference_kcal_per_mol"} | _SYSTEM_TABLE_KEYS | _SCAN_TABLE_KEYS


def _unknown(table: dict, allowed: set, where: str) -> None:
    for key in table:
        if key not in allowed:
            raise InputError(f"study key {where}{key!r} is not recognised (allowed: {', '.join(sorted(allowed))})")


def study_from_mapping(data: dict, base_dir: str | os.PathLike = ".") -> Study:
    """Build a study from the TOML layout of :func:`load_study_toml`."""
    if not isinstance(data, dict):
        raise InputError("study: expected a table")
    _unknown(data, _STUDY_KEYS, "")
    name = data.get("name")
    if not isinstance(name, str) or not name.strip():
        raise InputError(f"name: {name!r} is not a non-empty string (the study's name)")
    calc = data.get("calculation")
    if not isinstance(calc, dict):
        raise InputError("calculation: the table [calculation] is missing")
    _unknown(calc, _CALCULATION_KEYS, "calculation.")
    systems = data.get("systems")
    if not isinstance(systems, list) or not systems:
        raise InputError("systems: give at least one [[systems]] table")
    specs, categories, references = [], [], []
    for k, entry in enumerate(systems):
        where = f"systems[{k}]"
        if not isinstance(entry, dict):
            raise InputError(f"{where}: {entry!r} is not a table")
        _unknown(entry, _SYSTEM_KEYS, f"{where}.")
        sys_name = entry.get("name")
        try:
            check_system_name(sys_name)
        except InputError as exc:
            raise InputError(f"{where}.name: {exc}") from None
        where = f"systems[{k}] {sys_name!r}"
        mapping = {"name": sys_name,
                   "system": {key: entry[key] for key in _SYSTEM_TABLE_KEYS if key in entry},
                   "scan": {key: entry[key] for key in _SCAN_TABLE_KEYS if key in entry},
                   "calculation": calc}
        try:
            spec = spec_from_mapping(mapping, base_dir)
        except InputError as exc:
            raise InputError(f"{where}: {exc}") from None
        category = entry.get("category", "")
        if not isinstance(category, str):
            raise InputError(f"{where}.category: {category!r} is not a string")
        specs.append(spec)
        categories.append(category)
        references.append(_references(entry, spec, where))
    try:
        return Study.from_specs(name, specs, categories, references)
    except InputError as exc:
        raise InputError(f"study {name!r}: {exc}") from None


def _references(entry: dict, spec, where: str) -> list[ReferenceValue]:
    """Reference values of one system: ``reference_kcal_per_mol`` lists one value per
    grid entry (or per frame), in the order given; NaN-free numbers only."""
    values = entry.get("reference_kcal_per_mol")
    if values is None:
        return []
    if not isinstance(values, list):
        raise InputError(f"{where}.reference_kcal_per_mol: {values!r} is not a list of numbers")
    if spec.factors is not None:
        grid, kind = list(spec.factors), "factor"
    elif spec.distances is not None:
        grid, kind = list(spec.distances), "distance_angstrom"
    else:
        grid, kind = spec.coordinate.frame_values(spec.dimer), "distance_angstrom"
    if len(values) != len(grid):
        raise InputError(f"{where}.reference_kcal_per_mol: {len(values)} values for {len(grid)} points")
    out = []
    for j, (v, g) in enumerate(zip(values, grid)):
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            raise InputError(f"{where}.reference_kcal_per_mol[{j}]: {v!r} is not a number (kcal/mol)")
        out.append(ReferenceValue(float(v), source=f"{where}.reference_kcal_per_mol[{j}]", **{kind: g}))
    return out


def load_study_toml(path: str | os.PathLike) -> Study:
    """Read a study from a TOML file.

    Layout (paths are relative to the file)::

        name = "my-contacts"
        [calculation]                       # shared by every system
        levels = ["hf/def2-svp", "b3lyp-d3bj/def2-svp"]
        dispersion = ["none", "d3bj"]       # optional post-hoc schemes (DFT levels bare)
        counterpoise = true
        [calculation.settings]              # optional, as in a scan spec file
        grid_level = 3

        [[systems]]
        name = "water-dimer"
        category = "hydrogen bond"          # free-form; statistics are grouped by it
        geometry = "water_dimer.xyz"        # or: demo = "water_methanol"
        fragment_a = [0, 1, 2]              # optional (default: split by connectivity)
        charges = [0, 0]
        coordinate = "atom-pair"            # centre-of-mass | atom-pair | vector | frames
        atoms = [0, 3]
        factors = [0.9, 1.0, 1.2]           # or distances = [...] in angstrom
        reference_kcal_per_mol = [-4.3, -5.0, -4.0]   # optional, one per grid value

        [[systems]]
        name = "methane-dimer"
        category = "dispersion"
        geometry = "methane_dimer.xyz"
        factors = [1.0]                     # a single point

    A system with ``coordinate = "frames"`` and ``frames = "curve.xyz"`` scans the
    geometries of a multi-frame XYZ file (its ``reference_kcal_per_mol`` then lists one
    value per frame).
    """
    path = os.fspath(path)
    if not os.path.isfile(path):
        raise InputError(f"study file: {path!r} does not exist")
    try:
        with open(path, "rb") as fh:
            data = tomllib.loads(fh.read().decode("utf-8-sig"))
    except UnicodeDecodeError:
        raise InputError(f"study file {path!r}: not a UTF-8 text file (TOML)") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"study file {path!r}: not valid TOML ({excerpt(exc, 80)})") from None
    try:
        return study_from_mapping(data, os.path.dirname(os.path.abspath(path)))
    except InputError as exc:
        raise InputError(f"study file {path!r}: {exc}") from None
