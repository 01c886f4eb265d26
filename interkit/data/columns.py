"""The column-naming convention of every CSV table interkit writes or reads.

Rule: a column name is lower-case ``snake_case``; a column holding a quantity with a
fixed unit ends in the unit, spelled as a suffix (:data:`UNIT_SUFFIXES`):

=====================  ==========================  =====================================
unit                   suffix                      example
=====================  ==========================  =====================================
angstrom               ``_angstrom``               ``distance_angstrom``
kcal/mol               ``_kcal_per_mol``           ``e_int_kcal_per_mol``
kJ/mol                 ``_kj_per_mol``             ``e_int_kj_per_mol``
eV                     ``_ev``                     ``e_int_ev``
cm-1                   ``_per_cm``                 ``e_int_per_cm``
hartree                ``_hartree``                ``e_int_hartree``
kcal/mol/angstrom      ``_kcal_per_mol_per_angstrom``  ``force_along_kcal_per_mol_per_angstrom``
kJ/mol/angstrom        ``_kj_per_mol_per_angstrom``    ``force_along_kj_per_mol_per_angstrom``
kJ/mol/nm              ``_kj_per_mol_per_nm``          ``force_along_kj_per_mol_per_nm``
eV/angstrom            ``_ev_per_angstrom``            ``force_along_ev_per_angstrom``
hartree/bohr           ``_hartree_per_bohr``           ``force_along_hartree_per_bohr``
second                 ``_s``                      ``wall_time_s``
degree                 ``_degree``                 ``angle_degree``
=====================  ==========================  =====================================

Dimensionless numbers (``factor``, ``rank``, ``n_compared``) and text (``curve``,
``level``, ``dispersion``, ``variable``, ``unit``, ``status``) carry no suffix. The
quantity stem is the Dataset variable name (``e_int``, ``bsse``, ``e_elst`` ...).
``curve`` is the folded curve label (``b3lyp-d3bj/def2-svp``, as ``interkit compare
--reference`` takes it); ``level`` and ``dispersion`` are the Dataset's coordinates. A
long ("tidy") table, one value per row, is the one place where the unit sits in a
column (``variable``, ``value``, ``unit``), since one column holds many quantities.
Lines starting with ``#`` are comments.

Every curve table interkit writes reads back as a reference curve
(:func:`read_curve_table`, used by :func:`interkit.analysis.comparison.reference_from_csv`).
"""

from __future__ import annotations

import csv
import re
from pathlib import Path

import numpy as np

from ..errors import InputError, excerpt

#: unit -> column suffix (see the module docstring)
UNIT_SUFFIXES = {
    "angstrom": "angstrom",
    "kcal/mol": "kcal_per_mol",
    "kJ/mol": "kj_per_mol",
    "eV": "ev",
    "cm-1": "per_cm",
    "hartree": "hartree",
    "kcal/mol/angstrom": "kcal_per_mol_per_angstrom",
    "kJ/mol/angstrom": "kj_per_mol_per_angstrom",
    "kJ/mol/nm": "kj_per_mol_per_nm",
    "eV/angstrom": "ev_per_angstrom",
    "hartree/bohr": "hartree_per_bohr",
    "s": "s",
    "degree": "degree",
}
_NAME = re.compile(r"^[a-z][a-z0-9]*(_[a-z0-9]+)*$")
DISTANCE_COLUMN = "distance_angstrom"
ENERGY_COLUMN = "e_int_kcal_per_mol"


def column_name(stem: str, unit: str | None = None) -> str:
    """Column name of quantity ``stem`` in ``unit`` (None or ``'1'``: no suffix).

    >>> column_name("e_int", "kJ/mol")
    'e_int_kj_per_mol'
    """
    if unit in (None, "", "1"):
        return stem
    if unit not in UNIT_SUFFIXES:
        raise InputError(f"unit: {unit!r} has no column suffix (known: {', '.join(UNIT_SUFFIXES)})")
    return f"{stem}_{UNIT_SUFFIXES[unit]}"


def is_conventional(name: str) -> bool:
    """True if ``name`` is lower-case snake_case (the shape every column name has)."""
    return bool(_NAME.match(name))


def energy_columns(header: list[str], stem: str = "e_int") -> dict[str, str]:
    """Columns of ``header`` holding ``stem`` in an energy unit: column -> unit."""
    from ..units import ENERGY_UNITS

    return {column_name(stem, u): u for u in ENERGY_UNITS if column_name(stem, u) in header}


def force_columns(header: list[str], stem: str = "force_along") -> dict[str, str]:
    """Columns of ``header`` holding ``stem`` in a force unit: column -> unit."""
    from ..units import FORCE_UNITS

    return {column_name(stem, u): u for u in FORCE_UNITS if column_name(stem, u) in header}


def _rows(p: Path) -> list[tuple[int, list[str]]]:
    try:
        text = p.read_text(encoding="utf-8-sig")  # a byte-order mark is accepted
    except OSError as exc:
        raise InputError(f"reference file {str(p)!r}: cannot be read ({exc.strerror})") from None
    except UnicodeDecodeError:
        raise InputError(f"reference file {str(p)!r}: not a UTF-8 text (CSV) file") from None
    if "\x00" in text:
        raise InputError(f"reference file {str(p)!r}: not a text (CSV) file (it contains NUL bytes)")
    out = []
    for lineno, row in enumerate(csv.reader(text.splitlines()), start=1):
        if not row or not "".join(row).strip() or row[0].lstrip().startswith("#"):
            continue
        out.append((lineno, [c.strip() for c in row]))
    return out


def _number(p: Path, lineno: int, row: list[str], col: str, i: int, empty_ok: bool) -> float:
    if i >= len(row) or not row[i]:
        if empty_ok:
            return float("nan")  # a missing point (exports leave failed points empty)
        raise InputError(f"{p.name} line {lineno}: column {col!r} is empty")
    try:
        return float(row[i])
    except ValueError:
        raise InputError(f"{p.name} line {lineno}: column {col!r} value {excerpt(row[i])} is not a number") from None


def _curve_label(level: str, scheme: str) -> str:
    if not scheme or scheme == "none" or not level:
        return level
    from ..model.composite import parse_level
    from .dispersion import scheme_label

    return scheme_label(parse_level(level), scheme)


def read_curve_table(path, curve: str | None = None,
                     variable: str = "e_int") -> tuple[np.ndarray, np.ndarray, str]:
    """Read one curve of a CSV table that follows the column convention.

    Accepted layouts: a wide table (``distance_angstrom`` and ``e_int_<unit>``, any
    energy unit of :data:`interkit.units.ENERGY_UNITS`), optionally with several curves
    named by ``curve`` or by ``level`` [and ``dispersion``]; or a tidy table
    (``distance_angstrom``, ``variable``, ``value``, ``unit``, ``level`` [,
    ``dispersion``]). Empty or ``nan`` energies are missing points and are dropped.

    Parameters
    ----------
    path : str or pathlib.Path
    curve : str, optional
        Folded label of the curve to take when the table holds several; by default the
        most accurate wavefunction level (the rule of
        :func:`interkit.model.levels.default_reference`).
    variable : str
        Energy variable (the stem of the column).

    Returns
    -------
    distance_angstrom, energy_kcal_per_mol : numpy.ndarray
        All rows of the curve in file order (energies may be NaN).
    label : str
        The curve's label ('' for a single-curve table without labels).
    """
    from ..units import convert_energy

    p = Path(path)
    rows = _rows(p)
    if not rows:
        raise InputError(f"{p.name}: no header line with columns {DISTANCE_COLUMN!r}, "
                         f"{column_name(variable, 'kcal/mol')!r}")
    (head_line, header), body = rows[0], rows[1:]
    if DISTANCE_COLUMN not in header:
        raise InputError(f"{p.name} line {head_line}: header lacks column {DISTANCE_COLUMN!r} (found {excerpt(', '.join(header))})")
    i_r = header.index(DISTANCE_COLUMN)
    tidy = {"variable", "value", "unit"} <= set(header)
    energy = energy_columns(header, variable)
    if not tidy and not energy:
        raise InputError(f"{p.name} line {head_line}: header lacks column "
                         f"{column_name(variable, 'kcal/mol')!r} (found {excerpt(', '.join(header))})")
    if not tidy and len(energy) > 1:
        raise InputError(f"{p.name} line {head_line}: columns {sorted(energy)} give {variable} twice")

    def label_of(row):
        if "curve" in header:
            return row[header.index("curve")] if header.index("curve") < len(row) else ""
        level = row[header.index("level")] if "level" in header and header.index("level") < len(row) else ""
        scheme = row[header.index("dispersion")] if "dispersion" in header and \
            header.index("dispersion") < len(row) else ""
        return _curve_label(level, scheme)

    picked: dict[str, list[tuple[float, float]]] = {}
    for lineno, row in body:
        if tidy:
            iv, ival, iu = (header.index(c) for c in ("variable", "value", "unit"))
            if iv >= len(row) or row[iv] != variable:
                continue
            e = _number(p, lineno, row, "value", ival, empty_ok=True)
            unit = row[iu] if iu < len(row) else ""
            if np.isfinite(e):
                try:
                    e = convert_energy(e, unit, "kcal/mol")
                except InputError:
                    raise InputError(f"{p.name} line {lineno}: column 'unit' value {unit!r} "
                                     "is not an energy unit") from None
        else:
            col, unit = next(iter(energy.items()))
            e = _number(p, lineno, row, col, header.index(col), empty_ok=True)
            e = convert_energy(e, unit, "kcal/mol") if np.isfinite(e) else e
        r = _number(p, lineno, row, DISTANCE_COLUMN, i_r, empty_ok=False)
        if not np.isfinite(r) or r <= 0:
            raise InputError(f"{p.name} line {lineno}: column {DISTANCE_COLUMN!r} value {r!r} "
                             "is not a positive distance")
        picked.setdefault(label_of(row), []).append((r, e))
    labels = [lab for lab, pts in picked.items() if any(np.isfinite(e) for _, e in pts)]
    if curve is not None:
        if curve not in picked:
            raise InputError(f"reference curve: {curve!r} is not a curve of {p.name} ({', '.join(picked)})")
        label = curve
    elif len(picked) <= 1:
        label = next(iter(picked), "")
    else:
        from ..model.levels import default_reference

        label = default_reference(labels or list(picked))
    pts = picked.get(label, [])
    r = np.array([x for x, _ in pts], dtype=float)
    e = np.array([y for _, y in pts], dtype=float)
    return r, e, label
