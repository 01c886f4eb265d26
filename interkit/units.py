"""Physical constants and energy conversions (one edition: CODATA 2018).

All energies inside interkit are computed in hartree and stored in kcal/mol; this
module is the only place that knows the conversion factors.
"""

from __future__ import annotations

import numpy as np

CODATA_EDITION = "CODATA 2018"

#: 1 hartree in kcal/mol (CODATA 2018; thermochemical calorie, 4.184 J).
HARTREE_TO_KCAL_PER_MOL = 627.5094740631
#: 1 hartree in kJ/mol (CODATA 2018).
HARTREE_TO_KJ_PER_MOL = 2625.4996394799
#: 1 hartree in eV (CODATA 2018).
HARTREE_TO_EV = 27.211386245988
#: 1 hartree in cm-1 (CODATA 2018).
HARTREE_TO_WAVENUMBER = 219474.6313632
#: 1 bohr in angstrom (CODATA 2018).
BOHR_TO_ANGSTROM = 0.529177210903
ANGSTROM_TO_BOHR = 1.0 / BOHR_TO_ANGSTROM

#: energy units offered for display, as (label, factor from hartree)
ENERGY_UNITS: dict[str, float] = {
    "kcal/mol": HARTREE_TO_KCAL_PER_MOL,
    "kJ/mol": HARTREE_TO_KJ_PER_MOL,
    "eV": HARTREE_TO_EV,
    "cm-1": HARTREE_TO_WAVENUMBER,
    "hartree": 1.0,
}


def convert_energy(values, from_unit: str = "kcal/mol", to_unit: str = "kcal/mol"):
    """Convert energies between the units of :data:`ENERGY_UNITS`.

    Parameters
    ----------
    values : float or array-like
        Energies in ``from_unit``.
    from_unit, to_unit : str
        One of ``kcal/mol``, ``kJ/mol``, ``eV``, ``cm-1``, ``hartree``.

    Returns
    -------
    float or numpy.ndarray
        The energies in ``to_unit``.
    """
    from .errors import InputError

    for name, unit in (("from_unit", from_unit), ("to_unit", to_unit)):
        if unit not in ENERGY_UNITS:
            raise InputError(
                f"{name}: unknown energy unit {unit!r}; choose one of {', '.join(ENERGY_UNITS)}"
            )
    factor = ENERGY_UNITS[to_unit] / ENERGY_UNITS[from_unit]
    if np.isscalar(values):
        return float(values) * factor
    return np.asarray(values, dtype=float) * factor


#: force units offered, as (label, factor from hartree/bohr); built from the energy table
#: above and the bohr, so energies and forces share one set of CODATA 2018 constants
FORCE_UNITS: dict[str, float] = {
    "kcal/mol/angstrom": HARTREE_TO_KCAL_PER_MOL / BOHR_TO_ANGSTROM,
    "kJ/mol/angstrom": HARTREE_TO_KJ_PER_MOL / BOHR_TO_ANGSTROM,
    "kJ/mol/nm": HARTREE_TO_KJ_PER_MOL / (BOHR_TO_ANGSTROM / 10.0),
    "eV/angstrom": HARTREE_TO_EV / BOHR_TO_ANGSTROM,
    "hartree/bohr": 1.0,
}
#: the force unit that goes with each energy unit (a unit switch changes both)
MATCHING_FORCE_UNIT = {"kcal/mol": "kcal/mol/angstrom", "kJ/mol": "kJ/mol/angstrom",
                       "eV": "eV/angstrom", "cm-1": "kcal/mol/angstrom", "hartree": "hartree/bohr"}
#: units as the trade prints them on axes and in tables
UNIT_TEXT = {"kcal/mol": "kcal mol⁻¹", "kJ/mol": "kJ mol⁻¹", "eV": "eV", "cm-1": "cm⁻¹",
             "hartree": "Eₕ", "kcal/mol/angstrom": "kcal mol⁻¹ Å⁻¹",
             "kJ/mol/angstrom": "kJ mol⁻¹ Å⁻¹", "kJ/mol/nm": "kJ mol⁻¹ nm⁻¹",
             "eV/angstrom": "eV Å⁻¹", "hartree/bohr": "Eₕ a₀⁻¹", "angstrom": "Å"}


def convert_force(values, from_unit: str = "kcal/mol/angstrom", to_unit: str = "kcal/mol/angstrom"):
    """Convert forces between the units of :data:`FORCE_UNITS`.

    Parameters
    ----------
    values : float or array-like
        Forces in ``from_unit``.
    from_unit, to_unit : str
        One of ``kcal/mol/angstrom``, ``kJ/mol/angstrom``, ``kJ/mol/nm``,
        ``eV/angstrom``, ``hartree/bohr``.

    Returns
    -------
    float or numpy.ndarray
        The forces in ``to_unit``.
    """
    from .errors import InputError

    for name, unit in (("from_unit", from_unit), ("to_unit", to_unit)):
        if unit not in FORCE_UNITS:
            raise InputError(f"{name}: unknown force unit {unit!r}; choose one of {', '.join(FORCE_UNITS)}")
    factor = FORCE_UNITS[to_unit] / FORCE_UNITS[from_unit]
    if np.isscalar(values):
        return float(values) * factor
    return np.asarray(values, dtype=float) * factor


def unit_text(unit: str) -> str:
    """``unit`` as printed on an axis or a table head (``'kJ/mol'`` -> ``'kJ mol⁻¹'``)."""
    return UNIT_TEXT.get(unit, unit)
