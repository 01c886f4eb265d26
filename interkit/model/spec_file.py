"""Scan specs from TOML files and plain mappings (see :func:`load_spec_toml` for the layout)."""

from __future__ import annotations

import os
import tomllib

from ..errors import InputError, excerpt
from .composite import apply_any_settings
from .composite import parse_level as parse_any_level
from .coordinates import AtomPair, CentreOfMass, Frames, ScanCoordinate, Vector
from .geometry import Dimer
from .levels import LEVEL_SETTINGS, LevelOfTheory
from .spec import (
    _TOML_KEYS,
    DEFAULT_DECOMPOSITION_BASIS,
    DEFAULT_MEMORY_LIMIT_MB,
    DEFAULT_SAPT_MEMORY_LIMIT_MB,
    DEFAULT_SCF_THRESHOLD_HARTREE,
    ScanSpec,
)


def _check_keys(table: dict, section: str) -> None:
    allowed = _TOML_KEYS[section]
    for key in table:
        if key not in allowed:
            where = f"{section}.{key}" if section else key
            raise InputError(f"spec key {where!r} is not recognised (allowed: {', '.join(sorted(allowed))})")


def spec_from_mapping(data: dict, base_dir: str | os.PathLike = ".") -> ScanSpec:
    """Build a spec from the TOML layout (see :func:`load_spec_toml`)."""
    _check_keys(data, "")
    for section in ("system", "scan", "calculation"):
        if section not in data:
            raise InputError(f"spec: table [{section}] is missing")
        if not isinstance(data[section], dict):
            raise InputError(f"spec: {section!r} must be a table")
        _check_keys(data[section], section)
    system, scan, calc = data["system"], data["scan"], data["calculation"]
    kwargs = {k: system[k] for k in ("fragment_a", "charges", "multiplicities", "dimer_multiplicity")
              if k in system}
    given = [key for key in ("geometry", "demo", "xyz") if key in system]
    if len(given) != 1:
        raise InputError("system: give exactly one of system.geometry (an XYZ file), system.xyz "
                         f"(XYZ text) or system.demo (given: {', '.join(given) or 'none'})")
    what = {"geometry": "file name", "demo": "demo system name", "xyz": "block of XYZ text"}
    for key in given:
        if not isinstance(system[key], str):
            raise InputError(f"system.{key}: {repr(system[key])[:60]} is not a {what[key]}")
    if "geometry" in system:
        path = os.path.join(os.fspath(base_dir), str(system["geometry"]))
        dimer = Dimer.from_xyz(path, **kwargs)
    elif "xyz" in system:
        dimer = _dimer_from_text(system["xyz"], str(data.get("name") or "dimer"), kwargs)
    else:
        from .demo import load_demo

        dimer = load_demo(str(system["demo"]), **kwargs)
    if "name" in system:  # the dimer's own label (default: file name, demo name or the scan's name)
        if not isinstance(system["name"], str):
            raise InputError(f"system.name: {system['name']!r} is not a string")
        import dataclasses

        dimer = dataclasses.replace(dimer, name=system["name"])
    kind = scan.get("coordinate", "centre-of-mass")
    if kind == "centre-of-mass":
        coordinate: ScanCoordinate = CentreOfMass()
    elif kind == "atom-pair":
        atoms = scan.get("atoms")
        if not isinstance(atoms, list) or len(atoms) != 2:
            raise InputError(f"scan.atoms: {atoms!r} is not a pair of atom indices")
        coordinate = AtomPair(*atoms)
    elif kind == "vector":
        vector = scan.get("vector", ())
        if not isinstance(vector, list):
            raise InputError(f"scan.vector: {vector!r} is not a list of three numbers")
        coordinate = Vector(tuple(vector))
    elif kind == "frames":
        coordinate = _frames(scan, base_dir)
    else:
        raise InputError(
            f"scan.coordinate: {kind!r} is not one of centre-of-mass, atom-pair, vector, frames"
        )
    levels = calc.get("levels")
    if levels is None:
        raise InputError("calculation.levels: missing; give e.g. [\"hf/def2-svp\"]")
    if not isinstance(levels, list):
        raise InputError(f"calculation.levels: {levels!r} is not a list of 'method/basis' strings")
    levels = _levels_with_settings(levels, calc.get("settings", {}))
    return ScanSpec(
        dimer=dimer,
        coordinate=coordinate,
        distances=scan.get("distances"),
        factors=scan.get("factors"),
        levels=levels,
        counterpoise=calc.get("counterpoise", True),
        forces=calc.get("forces", False),
        decomposition=calc.get("decomposition"),
        decomposition_basis=calc.get("decomposition_basis", DEFAULT_DECOMPOSITION_BASIS),
        sapt_memory_limit_mb=calc.get("sapt_memory_limit_mb", DEFAULT_SAPT_MEMORY_LIMIT_MB),
        dispersion=calc.get("dispersion"),
        scf_threshold_hartree=calc.get("scf_threshold_hartree", DEFAULT_SCF_THRESHOLD_HARTREE),
        name=data.get("name", ""),
        memory_limit_mb=calc.get("memory_limit_mb", DEFAULT_MEMORY_LIMIT_MB),
        keep_densities=calc.get("keep_densities", False),
    )


def _dimer_from_text(text: str, name: str, kwargs: dict) -> Dimer:
    from .geometry import parse_xyz

    frames = parse_xyz(text, "system.xyz")
    if len(frames) != 1:
        raise InputError(f"system.xyz: {len(frames)} frames; give one geometry (frames go in scan.frames_xyz)")
    f = frames[0]
    return Dimer.from_atoms(f.symbols, f.coordinates, kwargs.get("fragment_a"), kwargs.get("charges", (0, 0)),
                            kwargs.get("multiplicities", (1, 1)), name, kwargs.get("dimer_multiplicity"))


def _frames(scan: dict, base_dir) -> Frames:
    """The Frames coordinate of a ``[scan]`` table: ``frames`` (a multi-frame XYZ file) or
    ``frames_xyz`` (the frames as XYZ text), measured by ``atoms`` or the centres of mass."""
    given = [key for key in ("frames", "frames_xyz") if key in scan]
    if len(given) != 1:
        raise InputError("scan.frames: a frames scan needs exactly one of scan.frames (a multi-frame XYZ "
                         f"file) or scan.frames_xyz (XYZ text) (given: {', '.join(given) or 'none'})")
    key = given[0]
    if not isinstance(scan[key], str):
        raise InputError(f"scan.{key}: {repr(scan[key])[:60]} is not "
                         f"{'the name of an XYZ file' if key == 'frames' else 'a block of XYZ text'}")
    if "atoms" in scan and (not isinstance(scan["atoms"], list) or len(scan["atoms"]) != 2):
        raise InputError(f"scan.atoms: {scan['atoms']!r} is not a pair of atom indices")
    measure = AtomPair(*scan["atoms"]) if "atoms" in scan else CentreOfMass()
    if key == "frames":
        return Frames(os.path.join(os.fspath(base_dir), str(scan["frames"])), measure, scan.get("values"))
    from .geometry import parse_xyz

    frames = parse_xyz(scan["frames_xyz"], "scan.frames_xyz")
    return Frames([f.coordinates for f in frames], measure, scan.get("values"),
                  symbols=[f.symbols for f in frames])


def _levels_with_settings(items: list, common) -> list[LevelOfTheory]:
    """Levels of a TOML ``levels`` list: strings, or inline tables ``{level = "...",
    <setting> = ...}``; the ``[calculation.settings]`` table applies to every level,
    an inline table's own settings override it."""
    if not isinstance(common, dict):
        raise InputError(f"calculation.settings: {common!r} must be a table")
    _check_keys(common, "calculation.settings")
    out = []
    for k, item in enumerate(items):
        own = {}
        if isinstance(item, dict):
            own = dict(item)
            text = own.pop("level", None)
            if not isinstance(text, str):
                raise InputError(f"calculation.levels[{k}]: an inline table needs level = \"method/basis\"")
            for key in own:
                if key not in LEVEL_SETTINGS:
                    raise InputError(f"calculation.levels[{k}].{key}: not a level setting "
                                     f"(allowed: {', '.join(LEVEL_SETTINGS)})")
        elif isinstance(item, str):
            text = item
        else:
            raise InputError(f"calculation.levels[{k}]: {item!r} is not a 'method/basis' string")
        level = parse_any_level(text)
        out.append(apply_any_settings(level, {**common, **own}))
    return out


def load_spec_toml(path: str | os.PathLike) -> ScanSpec:
    """Read a scan spec from a TOML file.

    Layout (paths are relative to the spec file)::

        name = "water-methanol"
        [system]
        geometry = "water_methanol.xyz"     # or: demo = "water_methanol", or the geometry
                                            # itself: xyz = '''<XYZ text>''' (as written by
                                            # ScanSpec.to_toml / interkit spec)
        name = "water-methanol"             # optional label of the dimer
        charges = [0, 0]
        multiplicities = [1, 1]             # 2S+1 of fragments A and B
        dimer_multiplicity = 1              # optional; default high spin, S = S_A + S_B;
                                            # the lowest spin |S_A - S_B| is computed as a
                                            # broken-symmetry determinant (other values refused)
        [scan]
        coordinate = "atom-pair"            # centre-of-mass | atom-pair | vector | frames
        atoms = [1, 5]
        factors = [0.9, 1.0, 1.2, 1.5, 2.0] # or distances = [...] in angstrom
                                            # frames: frames = "path.xyz" (multi-frame file)
                                            # or frames_xyz = '''<XYZ frames>''', with
                                            # optional atoms = [i, j] and values = [...]
        [calculation]
        levels = ["hf/def2-svp", { level = "mp2/cc-pvdz", frozen_core = false }]
        counterpoise = true
        decomposition = "sapt0"             # optional: SAPT0 components at every point
        decomposition_basis = "jun-cc-pvdz" # optional
        sapt_memory_limit_mb = 8000         # optional
        memory_limit_mb = 16000             # optional: refuse calculations estimated above it
        keep_densities = false              # optional: keep density matrices in the store
        [calculation.settings]              # optional: numerical settings of every level
        density_fitting = true              # fitted SCF Coulomb/exchange
        frozen_core = true                  # MP2, SCS-MP2, CCSD(T)
        correlation_fitting = true          # fitted MP2/SCS-MP2 (CCSD(T) is always exact)
        grid_level = 2                      # DFT grid, 0-9
        grid_pruning = "nwchem"             # nwchem | sg1 | treutler | none
        jk_auxbasis = "def2-universal-jkfit"  # SCF fitting basis (omit: pyscf's match)
        ri_auxbasis = "cc-pvdz-ri"          # MP2 fitting basis (omit: the SCF's)

    A level in ``levels`` is a ``"method/basis"`` string or an inline table with
    ``level`` and its own settings, which override ``[calculation.settings]``.
    Settings that do not apply to a level's method are ignored for it.
    """
    path = os.fspath(path)
    if not os.path.isfile(path):
        raise InputError(f"spec file: {path!r} does not exist")
    try:
        with open(path, "rb") as fh:
            data = tomllib.loads(fh.read().decode("utf-8-sig"))   # a byte-order mark is allowed
    except UnicodeDecodeError:
        raise InputError(f"spec file {path!r}: not a UTF-8 text file (TOML)") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"spec file {path!r}: not valid TOML ({excerpt(exc, 80)})") from None
    return spec_from_mapping(data, os.path.dirname(os.path.abspath(path)))
