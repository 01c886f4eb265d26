"""TOML text of a scan spec, in the layout :func:`interkit.model.spec_file.load_spec_toml` reads.

The text is self-contained: the geometry is written into the file (``[system] xyz``, an
XYZ block in angstrom) rather than as a path to an XYZ file, and so are the frames of a
:class:`~interkit.model.coordinates.Frames` scan (``[scan] frames_xyz``, a multi-frame
XYZ block), so one file (or one Dataset attribute) is the whole spec: it can be mailed,
archived beside the data and run on a cluster without its side files. Coordinates are
written with every digit of the float (Python ``repr``), so the spec read back makes
the same geometries, the same points and so the same store keys.

Levels are written as their labels (``"mp2/def2-svp (exact scf, all-electron)"``), which
:func:`~interkit.model.levels.parse_level` reads back to the same settings. Only a small
subset of TOML is written (strings, booleans, numbers, arrays, tables, multi-line literal
strings), so no TOML-writing library is needed.
"""

from __future__ import annotations

import json
import math

from ..errors import InputError
from .coordinates import AtomPair, CentreOfMass, Frames, Vector

#: first line of every written spec
HEADER = "# interkit scan spec; lengths in angstrom, memory in MB, SCF threshold in hartree"


def _string(text: str) -> str:
    """A TOML basic string (JSON string escapes are valid TOML escapes)."""
    return json.dumps(str(text), ensure_ascii=False).replace("\x7f", "\\u007f")


def _number(value) -> str:
    if isinstance(value, bool):
        raise InputError(f"spec: {value!r} is not a number")
    if isinstance(value, int):
        return str(value)
    x = float(value)
    if not math.isfinite(x):
        raise InputError(f"spec: {x!r} cannot be written to a TOML spec (not finite)")
    return repr(x)


def _value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return _string(value)
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_value(v) for v in value) + "]"
    return _number(value)


def _coordinate(c) -> str:
    """Ten decimals when they give the float back exactly (aligned columns), else every digit."""
    x = float(c)
    text = f"{x:.10f}"
    return f"{text if float(text) == x else repr(x):>22s}"


def _xyz_block(symbols, coordinates, comment: str) -> str:
    """XYZ lines of one frame, every float digit kept."""
    lines = [str(len(symbols)), comment]
    for s, xyz in zip(symbols, coordinates):
        lines.append(f"{s:<2s} " + " ".join(_coordinate(c) for c in xyz))
    return "\n".join(lines) + "\n"


def _multiline(text: str) -> str:
    """A TOML multi-line literal string (XYZ text has no ``'''``)."""
    if "'''" in text:
        raise InputError("spec: an XYZ block contains ''' and cannot be written as a TOML literal string")
    return "'''\n" + text + "'''"


def _scan_table(spec) -> list[str]:
    coord = spec.coordinate
    out = []
    if isinstance(coord, Frames):
        out.append('coordinate = "frames"')
        if isinstance(coord.measure, AtomPair):
            out.append(f"atoms = {_value([coord.measure.i, coord.measure.j])}")
        elif not isinstance(coord.measure, CentreOfMass):
            raise InputError(f"spec: frames measured by {coord.measure.describe()} cannot be written to "
                             "a TOML spec (it takes a centre-of-mass or atom-pair measure)")
        if coord.values is not None:
            out.append(f"values = {_value(list(coord.values))}")
        blocks = "".join(_xyz_block(spec.dimer.symbols, frame, f"frame {k}")
                         for k, frame in enumerate(coord.frames))
        out.append(f"frames_xyz = {_multiline(blocks)}")
        return out
    if isinstance(coord, CentreOfMass):
        out.append('coordinate = "centre-of-mass"')
    elif isinstance(coord, AtomPair):
        out += ['coordinate = "atom-pair"', f"atoms = {_value([coord.i, coord.j])}"]
    elif isinstance(coord, Vector):
        out += ['coordinate = "vector"', f"vector = {_value(list(coord.v))}"]
    else:
        raise InputError(f"spec: coordinate {coord!r} cannot be written to a TOML spec")
    if spec.distances is not None:
        out.append(f"distances = {_value(list(spec.distances))}")
    else:
        out.append(f"factors = {_value(list(spec.factors))}")
    return out


def spec_to_toml(spec) -> str:
    """The TOML text of ``spec`` (see the module docstring for the layout).

    Parameters
    ----------
    spec : ScanSpec

    Returns
    -------
    str
        TOML that :func:`interkit.load_spec_toml` (or ``interkit scan``) reads back to a spec
        with the same calculations (the same store keys).
    """
    if type(spec).__name__ != "ScanSpec":  # no import of .spec: it imports this module
        raise InputError(f"spec: expected an interkit.ScanSpec, got {type(spec).__name__}")
    d = spec.dimer
    system = [f"xyz = {_multiline(_xyz_block(d.symbols, d.coordinates, 'geometry, angstrom'))}",
              f"name = {_value(d.name)}",
              f"fragment_a = {_value(list(d.fragment_a))}",
              f"charges = {_value(list(d.charges))}",
              f"multiplicities = {_value(list(d.multiplicities))}"]
    if d.dimer_multiplicity is not None:
        system.append(f"dimer_multiplicity = {_value(int(d.dimer_multiplicity))}")
    # a scan with composites lists them as given (their components are not written)
    labels = list(spec.requested_levels) if spec.composites else [lv.label for lv in spec.levels]
    calc = [f"levels = {_value(labels)}",
            f"counterpoise = {_value(bool(spec.counterpoise))}",
            f"forces = {_value(bool(spec.forces))}"]
    if spec.decomposition is not None:
        calc.append(f"decomposition = {_value(spec.decomposition)}")
    calc += [f"decomposition_basis = {_value(spec.decomposition_basis)}",
             f"sapt_memory_limit_mb = {_value(spec.sapt_memory_limit_mb)}"]
    if spec.dispersion is not None:
        calc.append(f"dispersion = {_value(list(spec.dispersion))}")
    calc += [f"scf_threshold_hartree = {_value(spec.scf_threshold_hartree)}",
             f"memory_limit_mb = {_value(spec.memory_limit_mb)}"]
    parts = [HEADER, f"name = {_value(spec.name)}", "", "[system]", *system, "",
             "[scan]", *_scan_table(spec), "", "[calculation]", *calc]
    return "\n".join(parts) + "\n"
