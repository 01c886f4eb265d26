"""Studies from a folder: XYZ files plus one CSV table of reference energies.

Layout of the folder::

    my-set/
        water_dimer.xyz          # one geometry: scanned at the grid of its CSV rows
        methane_curve.xyz        # several frames: a curve, one point per frame
        references.csv           # the only .csv file of the folder

The system of an XYZ file is named after the file (without ``.xyz``). The CSV table
(comma-separated, a header line first; blank lines and lines starting with ``#`` are
skipped) has the columns

=====================  ==========================================================
``system``             the XYZ file's name without ``.xyz``
``distance_angstrom``  coordinate value of the point (centre-of-mass distance), or
``factor``             multiple of the file's starting value (one of the two per row)
``reference_energy``   reference interaction energy (negative = bound)
``unit``               its unit: kcal/mol, kJ/mol, eV, cm-1 or hartree
``category``           free-form label (the same on every row of a system)
=====================  ==========================================================

A single-geometry system is scanned along the centre-of-mass distance at the factors
(or distances) of its rows, at factor 1 when it has none; a multi-frame system at its
frames, and its rows must name frames (by distance within 0.001 Å, or by factor).
Nothing is downloaded: the folder holds what the user brought.
"""

from __future__ import annotations

import csv
import math
import os
from dataclasses import dataclass

from ..errors import InputError
from ..units import ENERGY_UNITS, convert_energy
from .coordinates import CentreOfMass, Frames
from .geometry import Dimer, read_xyz
from .study import ReferenceValue, Study, StudySystem, check_system_name

CSV_COLUMNS = ("system", "distance_angstrom", "factor", "reference_energy", "unit", "category")
_REQUIRED = ("system", "reference_energy", "unit")


@dataclass(frozen=True)
class _Row:
    line: int
    system: str
    distance: float | None
    factor: float | None
    e_kcal: float
    category: str | None


def _number(text: str, path: str, line: int, column: str) -> float:
    try:
        value = float(text)
    except ValueError:
        value = math.nan
    if not math.isfinite(value):
        raise InputError(f"{path}: row {line}, column {column!r}: {text!r} is not a finite number")
    return value


def read_reference_csv(path: str | os.PathLike) -> list[_Row]:
    """Rows of a reference table (see the module docstring); energies in kcal/mol.

    A bad row raises :class:`~interkit.errors.InputError` with one line naming the
    file, the row (line number in the file, the header being line 1 when it is the
    first line) and the column.
    """
    path = os.fspath(path)
    try:
        with open(path, encoding="utf-8-sig", newline="") as fh:
            lines = fh.read().splitlines()
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: cannot read the reference table ({type(exc).__name__})") from None
    numbered = [(k + 1, text) for k, text in enumerate(lines) if text.strip() and not text.lstrip().startswith("#")]
    if not numbered:
        raise InputError(f"{path}: the reference table is empty (expected a header line)")
    header_line, header_text = numbered[0]
    header = [h.strip() for h in next(csv.reader([header_text]))]
    for col in header:
        if col not in CSV_COLUMNS:
            raise InputError(f"{path}: row {header_line}, column {col!r}: not a column of a reference table "
                             f"(columns: {', '.join(CSV_COLUMNS)})")
    for col in _REQUIRED:
        if col not in header:
            raise InputError(f"{path}: row {header_line}: the column {col!r} is missing")
    if "distance_angstrom" not in header and "factor" not in header:
        raise InputError(f"{path}: row {header_line}: give a column 'distance_angstrom' or 'factor'")
    rows = []
    for line, text in numbered[1:]:
        cells = [c.strip() for c in next(csv.reader([text]))]
        if len(cells) != len(header):
            raise InputError(f"{path}: row {line}: {len(cells)} cells for {len(header)} columns")
        cell = dict(zip(header, cells))
        system = cell["system"]
        try:
            check_system_name(system)
        except InputError:
            raise InputError(f"{path}: row {line}, column 'system': {system!r} is not a system name") from None
        dist = cell.get("distance_angstrom", "")
        fac = cell.get("factor", "")
        if bool(dist) == bool(fac):
            column = "distance_angstrom" if "distance_angstrom" in header else "factor"
            raise InputError(f"{path}: row {line}, column {column!r}: give exactly one of distance_angstrom "
                             "or factor")
        distance = _number(dist, path, line, "distance_angstrom") if dist else None
        factor = _number(fac, path, line, "factor") if fac else None
        for col, value in (("distance_angstrom", distance), ("factor", factor)):
            if value is not None and value <= 0:
                raise InputError(f"{path}: row {line}, column {col!r}: {value:g} is not positive")
        unit = cell["unit"]
        if unit not in ENERGY_UNITS:
            raise InputError(f"{path}: row {line}, column 'unit': {unit!r} is not one of "
                             f"{', '.join(ENERGY_UNITS)}")
        energy = _number(cell["reference_energy"], path, line, "reference_energy")
        category = cell.get("category") if "category" in header else None
        rows.append(_Row(line, system, distance, factor, convert_energy(energy, unit, "kcal/mol"), category))
    return rows


def read_study_folder(folder: str | os.PathLike, levels, name: str | None = None,
                      fragments: dict[str, list[int]] | None = None,
                      charges: dict[str, tuple[int, int]] | None = None, **settings) -> Study:
    """Build a study from a folder of XYZ files and one CSV of reference energies.

    Parameters
    ----------
    folder : path-like
        See the module docstring for the layout.
    levels : sequence of str or LevelOfTheory
        Levels of every scan.
    name : str, optional
        Study name (default: the folder's name).
    fragments : dict, optional
        System name -> 0-based atom indices of fragment A (default: split by connectivity).
    charges : dict, optional
        System name -> (charge A, charge B) (default neutral).
    **settings
        Further :class:`~interkit.model.study.Study` fields (dispersion, counterpoise...).
    """
    folder = os.fspath(folder)
    if not os.path.isdir(folder):
        raise InputError(f"study folder: {folder!r} is not a folder")
    entries = sorted(os.listdir(folder))
    xyz = [f for f in entries if f.lower().endswith(".xyz")]
    tables = [f for f in entries if f.lower().endswith(".csv")]
    if not xyz:
        raise InputError(f"study folder {folder!r}: no .xyz file")
    if len(tables) > 1:
        raise InputError(f"study folder {folder!r}: {len(tables)} .csv files ({', '.join(tables)}); keep one "
                         "table of reference energies")
    csv_path = os.path.join(folder, tables[0]) if tables else None
    rows = read_reference_csv(csv_path) if csv_path else []
    names = {os.path.splitext(f)[0]: f for f in xyz}
    by_system: dict[str, list[_Row]] = {}
    for row in rows:
        if row.system not in names:
            raise InputError(f"{csv_path}: row {row.line}, column 'system': {row.system!r} has no XYZ file "
                             f"in the folder ({', '.join(sorted(names))})")
        by_system.setdefault(row.system, []).append(row)
    fragments, charges = fragments or {}, charges or {}
    systems = []
    for sys_name, file in names.items():
        path = os.path.join(folder, file)
        own = by_system.get(sys_name, [])
        category = _category(own, csv_path)
        frames = read_xyz(path)
        dimer = Dimer.from_xyz(path, fragments.get(sys_name), charges.get(sys_name, (0, 0)), name=sys_name)
        refs = [ReferenceValue(r.e_kcal, r.distance, r.factor, f"{csv_path}: row {r.line}") for r in own]
        if len(frames) > 1:
            systems.append(StudySystem(sys_name, dimer, Frames(path), category=category, reference=refs))
            continue
        kinds = {("factor" if r.factor is not None else "distance") for r in own}
        if len(kinds) > 1:
            row = own[-1]
            raise InputError(f"{csv_path}: row {row.line}, column 'factor': system {sys_name!r} mixes "
                             "distances and factors; use one kind per single-geometry system")
        grid = sorted({r.factor if r.factor is not None else r.distance for r in own}) or [1.0]
        key = "distances" if kinds == {"distance"} else "factors"
        systems.append(StudySystem(sys_name, dimer, CentreOfMass(), category=category, reference=refs,
                                   **{key: grid}))
    return Study(name or os.path.basename(os.path.abspath(folder)), systems, levels, **settings)


def _category(rows: list[_Row], csv_path: str | None) -> str:
    cats = [(r.line, r.category or "") for r in rows]
    if not cats:
        return ""
    first = cats[0][1]
    for line, cat in cats[1:]:
        if cat != first:
            raise InputError(f"{csv_path}: row {line}, column 'category': {cat!r} differs from {first!r} "
                             "on an earlier row of the same system")
    return first
