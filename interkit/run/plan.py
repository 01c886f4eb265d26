"""Turn a ScanSpec into independent calculation jobs (pure, no pyscf calls).

Counterpoise (Boys–Bernardi) at every scan point and level needs three calculations in
the dimer basis: the dimer, A with B's atoms as ghosts, and B with A's atoms as ghosts.
The monomers in their own basis (for the uncorrected energy and the BSSE) are placed at
a canonical position (centroid at the origin), so a rigid scan computes each only once.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from ..model.job import (
    DECOMPOSITION_CONV_TOL_HARTREE,
    DECOMPOSITION_ROLE,
    NUMERICAL_FORCE_STEP_ANGSTROM,
    Job,
    ScanPlan,
    _rounded,
    force_method,
)
from ..model.levels import LevelOfTheory
from ..model.spec import ScanSpec
from .feasibility import check_feasibility


def _job_for(dimer, atoms, ghost_atoms, charge, spin, level, conv_tol, centre=False,
             outputs=("energy",), **extra) -> Job:
    idx = list(atoms) + list(ghost_atoms)
    idx.sort()
    coords = np.asarray(dimer.coordinates)[idx]
    if centre:
        coords = coords - coords.mean(axis=0)
    ghosts = set(ghost_atoms)
    return Job(
        symbols=tuple(dimer.symbols[i] for i in idx),
        coordinates=_rounded(coords),
        ghost=tuple(i in ghosts for i in idx),
        charge=int(charge),
        spin=int(spin),
        level=level,
        conv_tol=conv_tol,
        outputs=tuple(outputs),
        **extra,
    )


def _dimer_spin_fields(d0) -> dict:
    """Job fields of the dimer calculation beyond high spin: a broken-symmetry guess."""
    if not d0.broken_symmetry:
        return {}
    from ..model.spin import BROKEN_SYMMETRY_GUESS, broken_symmetry_spins

    return {"fragment_a": tuple(int(i) for i in d0.fragment_a),
            "fragment_charges": tuple(int(q) for q in d0.charges),
            "fragment_spins": broken_symmetry_spins(d0.spins), "guess": BROKEN_SYMMETRY_GUESS}


def _cp_jobs(spec: ScanSpec, geometry, level: LevelOfTheory, outputs, suffix: str = "") -> dict[str, Job]:
    """The dimer and (with counterpoise) both ghosted monomers at one geometry."""
    d0 = spec.dimer
    a, b = d0.fragment_a, d0.fragment_b
    (qa, qb), (sa, sb) = d0.charges, d0.spins
    # the dimer's own spin (high spin unless dimer_multiplicity says otherwise);
    # the ghosted monomers keep their fragment's spin
    jobs = {"dimer" + suffix: _job_for(geometry, a + b, (), qa + qb, d0.spin, level, spec.scf_threshold_hartree,
                                       outputs=outputs, **_dimer_spin_fields(d0))}
    if spec.counterpoise:
        jobs["a_dimer_basis" + suffix] = _job_for(geometry, a, b, qa, sa, level, spec.scf_threshold_hartree, outputs=outputs)
        jobs["b_dimer_basis" + suffix] = _job_for(geometry, b, a, qb, sb, level, spec.scf_threshold_hartree, outputs=outputs)
    if getattr(spec, "keep_densities", False) and not suffix:
        # the records then carry the density matrices (same keys, same numbers)
        jobs = {role: dataclasses.replace(job, keep_density=True) for role, job in jobs.items()}
    return jobs


def plan_scan(spec: ScanSpec, check: bool = True) -> ScanPlan:
    """Build the job list of ``spec``.

    Every point gets the dimer and, with counterpoise, both ghosted monomers; both
    monomers in their own basis are added (once per distinct monomer geometry).
    Atom order is kept in ghosted jobs so per-atom results map one to one.

    Parameters
    ----------
    spec : ScanSpec
    check : bool
        Run the feasibility checks first (:func:`interkit.run.feasibility.check_feasibility`:
        dispersion parameters, size estimates against the spec's limits); their report
        is ``plan.feasibility``. Only code that inspects keys of a plan it will not run
        (provenance checks of a saved scan) passes False.

    Raises
    ------
    InputError, NotAvailableError, ResourceError
        From the feasibility checks, before anything is computed.
    """
    feasibility = check_feasibility(spec) if check else {}
    jobs: dict[str, Job] = {}
    table: dict[tuple[int, int], dict[str, str]] = {}
    d0 = spec.dimer
    a, b = d0.fragment_a, d0.fragment_b
    qa, qb = d0.charges
    sa, sb = d0.spins
    h = NUMERICAL_FORCE_STEP_ANGSTROM
    for li, level in enumerate(spec.levels):
        method = force_method(level) if spec.forces else "none"
        outputs = ("energy", "gradient") if method.startswith("analytic") else ("energy",)
        for point in spec.points:
            dim = point.dimer
            candidates = {}

            candidates.update(_cp_jobs(spec, dim, level, outputs))
            if method == "numerical":
                u = spec.coordinate.direction(dim)
                candidates.update(_cp_jobs(spec, dim.translated_b(h * u), level, ("energy",), "_plus"))
                candidates.update(_cp_jobs(spec, dim.translated_b(-h * u), level, ("energy",), "_minus"))
            own_geometry = d0 if spec.is_rigid else dim
            candidates["a_own_basis"] = _job_for(own_geometry, a, (), qa, sa, level, spec.scf_threshold_hartree, centre=True)
            candidates["b_own_basis"] = _job_for(own_geometry, b, (), qb, sb, level, spec.scf_threshold_hartree, centre=True)
            entry = {}
            for role, job in candidates.items():
                jobs.setdefault(job.key, job)
                entry[role] = job.key
            table[(li, point.index)] = entry
    decomposition = {}
    if spec.decomposition == "sapt0":
        for point in spec.points:
            job = decomposition_job(spec, point.dimer)
            jobs.setdefault(job.key, job)
            decomposition[point.index] = job.key
    return ScanPlan(spec, jobs, table, decomposition, feasibility)


def decomposition_level(spec: ScanSpec) -> LevelOfTheory:
    """The level of a SAPT0 job: Hartree–Fock (density-fitted) in the decomposition basis."""
    return LevelOfTheory("hf", spec.decomposition_basis)


def decomposition_job(spec: ScanSpec, geometry) -> Job:
    """The SAPT0 job of one geometry: every atom real, the fragment split and charges
    as data, Hartree–Fock in the dimer-centred decomposition basis."""
    d0 = spec.dimer
    return Job(
        symbols=tuple(geometry.symbols),
        coordinates=_rounded(geometry.coordinates),
        ghost=(False,) * geometry.natoms,
        charge=int(sum(d0.charges)),
        spin=0,
        level=decomposition_level(spec),
        conv_tol=min(spec.scf_threshold_hartree, DECOMPOSITION_CONV_TOL_HARTREE),
        outputs=(DECOMPOSITION_ROLE,),
        fragment_a=tuple(int(i) for i in d0.fragment_a),
        fragment_charges=tuple(int(q) for q in d0.charges),
        memory_limit_mb=spec.sapt_memory_limit_mb,
    )
