"""Feasibility of a scan: the checks that need the electronic-structure libraries.

Constructing a :class:`~interkit.model.spec.ScanSpec` only checks the form of its input
(and looks up element and basis-set data). What needs pyscf or the dispersion libraries
runs here, when the plan is made (:func:`interkit.run.plan.plan_scan`), which
``run_scan``, the launcher and ``interkit scan`` do before any calculation, so errors
still come before work:

* every post-hoc dispersion correction a level carries has parameters for its functional
  (a missing library is reported as such, not as missing parameters);
* the size of every calculation (:func:`interkit.engine.cost.check_resources`) and of
  the SAPT0 decomposition lies within the spec's limits;
* the fitting basis pyscf picks for a density-fitted SCF (``jk_auxbasis`` not given)
  covers every element: pyscf names one partner set for the whole molecule (e.g.
  ``cc-pvdz-jkfit``), which fails at run time for an element it lacks (He);
* CCSD(T) on a large dimer basis gets a warning with the measured cost.
"""

from __future__ import annotations

import warnings

from ..engine.cost import check_resources
from ..engine.dispersion import check_dispersion_parameters
from ..engine.sapt0_setup import estimate_sapt0_cost
from ..errors import InputError, InterkitWarning, ResourceError
from ..model.spec import ScanSpec

#: CCSD(T) warning threshold in dimer basis functions. Measured here on one core
#: (pyscf 2.14, frozen core): 48 functions 1.5 s, 82 functions 12.5 s, 100 functions
#: 23 s per calculation; the cost grows roughly as N^6-N^7 beyond that, so 200
#: functions means tens of minutes to hours per calculation, three per scan point.
CCSD_T_WARN_BASIS_FUNCTIONS = 200


def decomposition_cost(spec: ScanSpec) -> dict | None:
    """Size estimate of one SAPT0 calculation of ``spec`` (see
    :func:`interkit.engine.sapt0_setup.estimate_sapt0_cost`), or None without a
    decomposition.

    Raises
    ------
    InputError
        The decomposition basis cannot be built for the dimer's elements.
    ResourceError
        The estimate exceeds ``spec.sapt_memory_limit_mb``.
    """
    if spec.decomposition is None:
        return None
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            cost = estimate_sapt0_cost(spec.dimer, spec.decomposition_basis)
    except Exception as exc:  # pyscf raises several types for unknown basis sets
        raise InputError(
            f"decomposition_basis: {spec.decomposition_basis!r} cannot be built for the elements "
            f"{', '.join(sorted(set(spec.dimer.symbols)))}") from exc
    if cost["peak_memory_mb"] > spec.sapt_memory_limit_mb:
        raise ResourceError(
            f"sapt_memory_limit_mb: the SAPT0 decomposition in {spec.decomposition_basis} needs about "
            f"{cost['peak_memory_mb']:.0f} MB ({cost['largest_tensor']} tensor), above the limit of "
            f"{spec.sapt_memory_limit_mb:g} MB")
    return cost


def check_default_fitting_basis(level, symbols) -> None:
    """Raise InputError when pyscf's own choice of the SCF fitting basis for ``level``
    (no ``jk_auxbasis`` given) has no functions for one of the elements ``symbols``."""
    if not level.scf_fitted or level.jk_auxbasis:
        return
    from pyscf import gto
    from pyscf.df.addons import predefined_auxbasis

    from ..model.levels import _basis_has_element

    xc = level.functional if level.method == "dft" else "HF"
    elements = sorted(set(symbols))
    mol = gto.Mole()
    mol.atom = [(e, (0.0, 0.0, 3.0 * k)) for k, e in enumerate(elements)]
    mol.basis, mol.spin, mol.verbose = level.basis, None, 0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            name = predefined_auxbasis(mol, level.basis, xc)
        except Exception:  # no partner set known: pyscf generates one per element
            return
    if not isinstance(name, str):
        return
    lacking = [e for e in elements if not _basis_has_element(name, e)]
    if lacking:
        raise InputError(f"level {level.label} jk_auxbasis: pyscf's fitting basis for {level.basis}, "
                         f"{name!r}, has no functions for {', '.join(lacking)}; give jk_auxbasis "
                         "(e.g. 'def2-universal-jkfit') or density_fitting = false")


def check_feasibility(spec: ScanSpec) -> dict:
    """Run every check of this module on ``spec``.

    Returns
    -------
    dict
        ``levels``: the size estimate of each level (by label), ``decomposition``: that
        of one SAPT0 calculation or None.

    Raises
    ------
    InputError, NotAvailableError, ResourceError
        One line naming the field and the value, before any calculation.
    """
    for lv in spec.levels:
        if lv.method == "dft" and lv.dispersion:
            check_dispersion_parameters(lv.functional, lv.dispersion)
        check_default_fitting_basis(lv, spec.dimer.symbols)
    costs = check_resources(spec)
    for lv in spec.levels:
        nbasis = costs[lv.label].get("nbasis") or 0
        if lv.method == "ccsd(t)" and nbasis > CCSD_T_WARN_BASIS_FUNCTIONS:
            warnings.warn(
                f"level {lv.label}: the dimer has {nbasis} basis functions; CCSD(T) above "
                f"{CCSD_T_WARN_BASIS_FUNCTIONS} takes tens of minutes to hours per calculation "
                "(three per scan point)", InterkitWarning, stacklevel=3)
    return {"levels": costs, "decomposition": decomposition_cost(spec)}
