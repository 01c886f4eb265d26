"""Orientation scans from TOML files (see :func:`load_orientation_toml` for the layout)."""

from __future__ import annotations

import os
import tomllib

from ..errors import InputError, excerpt
from .coordinates import AtomPair, CentreOfMass, Vector
from .orientation import GridAxis, Offset, OrientationGrid, Rotation, Separation
from .orientation_sampling import OrientationSample

_AXIS_KEYS = {
    "rotation": {"kind", "name", "about", "pivot", "degrees"},
    "offset": {"kind", "name", "normal", "toward", "angstrom"},
    "separation": {"kind", "name", "measure", "atoms", "vector", "angstrom"},
    "sampling": {"kind", "name", "count", "seed", "method"},
}
_TOP_KEYS = {"name", "system", "calculation", "orientation"}


def _need(table: dict, key: str, where: str):
    if key not in table:
        raise InputError(f"{where}.{key}: missing")
    return table[key]


def _axis(table, k: int) -> GridAxis:
    where = f"orientation.axis[{k}]"
    if not isinstance(table, dict):
        raise InputError(f"{where}: not a table ([[orientation.axis]])")
    kind = table.get("kind")
    if kind not in _AXIS_KEYS:
        raise InputError(f"{where}.kind: {kind!r} is not one of {', '.join(_AXIS_KEYS)}")
    for key in table:
        if key not in _AXIS_KEYS[kind]:
            raise InputError(f"{where}.{key}: not a key of a {kind} axis "
                             f"(allowed: {', '.join(sorted(_AXIS_KEYS[kind]))})")
    name = table.get("name")
    try:
        if kind == "rotation":
            pivot = table.get("pivot", "com-b")
            return Rotation(_need(table, "about", where), _need(table, "degrees", where),
                            tuple(pivot) if isinstance(pivot, list) else pivot, name)
        if kind == "offset":
            return Offset(_need(table, "normal", where), _need(table, "angstrom", where),
                          _need(table, "toward", where), name)
        if kind == "separation":
            measure = table.get("measure", "centre-of-mass")
            if measure == "centre-of-mass":
                coord = CentreOfMass()
            elif measure == "atom-pair":
                atoms = _need(table, "atoms", where)
                if not isinstance(atoms, list) or len(atoms) != 2:
                    raise InputError(f"atoms: {atoms!r} is not a pair of atom indices")
                coord = AtomPair(*atoms)
            elif measure == "vector":
                vec = _need(table, "vector", where)
                if not isinstance(vec, list):
                    raise InputError(f"vector: {vec!r} is not a list of three numbers")
                coord = Vector(tuple(vec))
            else:
                raise InputError(f"measure: {measure!r} is not one of centre-of-mass, atom-pair, vector")
            return Separation(_need(table, "angstrom", where), coord, name)
        return OrientationSample(_need(table, "count", where), _need(table, "seed", where),
                                 table.get("method", "sobol"), name)
    except InputError as exc:
        text = str(exc)
        raise InputError(text if text.startswith(where) else f"{where}: {text}") from None


def orientation_from_mapping(data: dict, base_dir: str | os.PathLike = ".") -> tuple[OrientationGrid, dict]:
    """The grid and the ScanSpec options (``levels``, ``forces``, ...) of a mapping in the
    layout of :func:`load_orientation_toml`."""
    from .spec_file import spec_from_mapping

    for key in data:
        if key not in _TOP_KEYS:
            raise InputError(f"orientation file key {key!r} is not recognised (allowed: {', '.join(sorted(_TOP_KEYS))})")
    table = data.get("orientation")
    if not isinstance(table, dict):
        raise InputError("orientation: table [orientation] with [[orientation.axis]] entries is missing")
    for key in table:
        if key != "axis":
            raise InputError(f"orientation.{key}: not recognised (allowed: axis)")
    axes = table.get("axis")
    if not isinstance(axes, list) or not 1 <= len(axes) <= 2:
        raise InputError(f"orientation.axis: give one or two [[orientation.axis]] tables "
                         f"(got {len(axes) if isinstance(axes, list) else repr(axes)})")
    # system and calculation read as in a scan file (one placeholder point at the start geometry)
    base = {k: v for k, v in data.items() if k != "orientation"}
    base["scan"] = {"coordinate": "centre-of-mass", "factors": [1.0]}
    spec = spec_from_mapping(base, base_dir)
    grid = OrientationGrid(spec.dimer, [_axis(a, k) for k, a in enumerate(axes)])
    options = spec.to_dict()
    kept = ("counterpoise", "forces", "decomposition", "decomposition_basis", "sapt_memory_limit_mb",
            "dispersion", "scf_threshold_hartree", "memory_limit_mb", "keep_densities", "name")
    out = {k: options[k] for k in kept if k in options}
    out["levels"] = list(spec.levels)
    return grid, out


def load_orientation_toml(path: str | os.PathLike) -> tuple[OrientationGrid, dict]:
    """Read an orientation scan from a TOML file: the grid and the ScanSpec options.

    Layout (``[system]`` and ``[calculation]`` as in a scan file, see
    :func:`interkit.load_spec_toml`; atoms 0-based)::

        name = "water turn"
        [system]
        demo = "water_methanol"
        [calculation]
        levels = ["hf/sto-3g"]
        [[orientation.axis]]              # first axis
        kind = "rotation"
        about = [0, 0, 1]                 # a vector, or two atoms [i, j]
        pivot = "com-b"                   # B's centre of mass, an atom, or a contact [i, j]
        degrees = [0, 15, 30]
        [[orientation.axis]]              # optional second axis, applied after the first
        kind = "separation"
        measure = "centre-of-mass"        # or "atom-pair" (atoms = [i, j]) or "vector" (vector = [x, y, z])
        angstrom = [2.8, 3.0, 3.2]

    Other kinds: ``offset`` (``normal``, ``toward``: vectors or atom pairs;
    ``angstrom``: in-plane offsets) and ``sampling`` (``count``, ``seed``,
    ``method`` = "sobol" or "random"). Every axis may carry ``name``, its dimension name.
    """
    path = os.fspath(path)
    if not os.path.isfile(path):
        raise InputError(f"orientation file: {path!r} does not exist")
    try:
        with open(path, "rb") as fh:
            data = tomllib.loads(fh.read().decode("utf-8-sig"))
    except UnicodeDecodeError:
        raise InputError(f"orientation file {path!r}: not a UTF-8 text file (TOML)") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"orientation file {path!r}: not valid TOML ({excerpt(exc, 80)})") from None
    return orientation_from_mapping(data, os.path.dirname(os.path.abspath(path)))
