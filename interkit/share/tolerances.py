"""How far a recomputation of a saved scan may lie from it, per variable.

Tolerances are absolute, per variable, in the variable's own units (see
:func:`tolerances`). They follow from the convergence thresholds of the calculations,
not from the size of the values, because a recomputation differs from the original
only by where each SCF stopped (a fresh calculation starts from a different initial
density than a point computed after its neighbour).
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass

import xarray as xr

from ..errors import InputError
from ..units import HARTREE_TO_KCAL_PER_MOL

#: variables never compared: timings and texts that describe a run, not its numbers
NOT_COMPARED = frozenset({"wall_time_s", "scf_cycles", "sapt_wall_time_s", "status_detail", "sapt_status_detail",
                          "job_key", "symbol", "fragment", "force_method"})

#: SCF energy threshold of calculations with gradients (``engine.energy`` converges
#: them to at least this, whatever the spec says)
GRADIENT_CONV_TOL_HARTREE = 1e-9
#: Total energies of HF and DFT levels may move by this many SCF energy thresholds
#: (``scf_threshold_hartree``): the SCF stops when successive energies differ by less than
#: ``scf_threshold_hartree`` and SCF energies are variational (error second order in the orbitals).
#: Measured here (pyscf 2.14, HF dimer, def2-SVP, ``scf_threshold_hartree`` 1e-8): a point computed
#: from scratch and the same point computed from its neighbour's density differ by at
#: most 2.3e-9 hartree (HF, PBE0, B3LYP).
SCF_TOTAL_FACTOR = 100.0
#: Total energies of correlated levels (MP2, SCS-MP2, CCSD(T)) may move by this multiple
#: of ``sqrt(scf_threshold_hartree)`` hartree: the correlation energy is not variational in the
#: orbitals, so it carries the orbital error at first order, and pyscf's orbital-gradient
#: threshold defaults to ``sqrt(scf_threshold_hartree)``. Measured as above (rigid and frame scans):
#: up to 6.9e-7 hartree for MP2 and SCS-MP2 (5.5e-4 kcal/mol in the interaction energy),
#: against 1e-5 hartree allowed at the default threshold.
CORRELATED_TOTAL_FACTOR = 0.1
#: Absolute tolerance on per-atom forces (kcal/mol/angstrom). Gradients are linear in the
#: density error, which follows the orbital-gradient threshold (pyscf's default is the
#: square root of the energy threshold, ~3e-5 at 1e-9). Measured as above: per-atom
#: forces differ by up to 3.4e-3 kcal/mol/angstrom (HF/STO-3G), 6e-4 (def2-SVP).
FORCE_TOLERANCE = 0.02
#: Electrostatic (Hellmann–Feynman) forces and the Pulay remainder: the electrostatic force
#: is not variational, so it carries the density error at first order with nuclear-charge
#: prefactors. Measured as above: up to 3.3e-2 kcal/mol/angstrom (HF/STO-3G).
FORCE_SPLIT_TOLERANCE = 0.2
#: lever arm (angstrom) turning the force tolerance into a torque tolerance: atoms of a
#: small fragment lie within a few angstrom of its centre of mass
TORQUE_ARM_ANGSTROM = 5.0
#: SAPT0 terms (kcal/mol): their SCFs converge to 1e-10 hartree; the terms are linear in
#: the orbital error (~1e-5); measured as above: identical to 1e-12 kcal/mol
SAPT_TOLERANCE = 1e-4
#: dispersion corrections are analytic functions of the geometry
DISPERSION_CORRECTION_TOLERANCE = 1e-6
#: geometry is rebuilt from the spec; job coordinates are rounded to 1e-10 angstrom
GEOMETRY_TOLERANCE = 1e-8
#: <S^2> of a recomputed unrestricted calculation (first order in the density error;
#: an SCF converged to 1e-8 hartree has density errors of about 1e-4)
SPIN_SQUARE_TOLERANCE = 1e-3


@dataclass(frozen=True)
class Tolerance:
    """Largest accepted absolute deviation of one variable, with its reason."""

    value: float
    units: str
    reason: str
    #: a name for the levels this tolerance applies to (e.g. "SCF levels")
    group: str = ""
    #: level label -> its own Tolerance, where the levels differ (energies)
    per_level: dict | None = None



def _conv_tol(ds: xr.Dataset) -> float:
    try:
        return float(json.loads(ds.attrs["spec_json"]).get("scf_threshold_hartree", 1e-8))
    except (KeyError, ValueError, TypeError, AttributeError):
        return 1e-8


def _level_methods(ds: xr.Dataset) -> dict[str, str]:
    """Level label -> method (``hf``, ``dft``, ``mp2``, ...) from the stored spec."""
    from ..model.levels import LevelOfTheory

    try:
        levels = json.loads(ds.attrs["spec_json"])["levels"]
        out = {LevelOfTheory.from_dict(d).label: LevelOfTheory.from_dict(d).method for d in levels}
    except (KeyError, ValueError, TypeError, InputError):
        return {}
    if ds.attrs.get("composite_recipe_json"):
        # rows derived from component jobs, and composites (correlated: combinations of
        # correlation energies, each first order in the orbital error)
        from ..model.composite import CompositeLevel, parse_level

        for label in (str(x) for x in ds["level"].values):
            if label not in out:
                try:
                    lv = parse_level(label)
                except InputError:
                    continue
                out[label] = "composite" if isinstance(lv, CompositeLevel) else lv.method
    return out


def tolerances(ds: xr.Dataset) -> dict[str, Tolerance]:
    """The tolerance of every comparable variable of ``ds`` (see :func:`compared_variables`).

    Energies follow the spec's SCF threshold ``scf_threshold_hartree``, per level: a total energy of
    an HF or DFT level may move by ``SCF_TOTAL_FACTOR * scf_threshold_hartree`` hartree (1e-6 at the
    default 1e-8), one of a correlated level by ``CORRELATED_TOTAL_FACTOR *
    sqrt(scf_threshold_hartree)`` (1e-5); an interaction energy (three calculations) by three times
    that, in kcal/mol (1.9e-3 and 1.9e-2 kcal/mol). Forces follow the gradient threshold
    (fixed values, see the module constants); numerical forces (central differences)
    inherit the interaction-energy tolerance divided by the step.
    """
    from ..model.job import NUMERICAL_FORCE_STEP_ANGSTROM

    tol = _conv_tol(ds)
    h = NUMERICAL_FORCE_STEP_ANGSTROM
    scf_total = SCF_TOTAL_FACTOR * tol
    cor_total = CORRELATED_TOTAL_FACTOR * math.sqrt(tol)
    classes = {
        "SCF levels": (scf_total, f"{SCF_TOTAL_FACTOR:g} x SCF threshold {tol:g} hartree (variational)"),
        "correlated levels": (cor_total, f"{CORRELATED_TOTAL_FACTOR:g} x sqrt(SCF threshold {tol:g}) hartree "
                                         "(correlation energy is first order in the orbital error)"),
    }
    methods = _level_methods(ds)
    level_labels = [str(x) for x in ds["level"].values] if "level" in ds.coords else []
    numerical = {}
    if "force_method" in ds.variables and "level" in ds["force_method"].dims:
        numerical = {str(lv): str(m).startswith("numerical")
                     for lv, m in zip(ds["force_method"]["level"].values, ds["force_method"].values)}

    grad_tol = min(tol, GRADIENT_CONV_TOL_HARTREE)
    force_reason = f"per-atom gradients, SCF threshold {grad_tol:g} hartree (first order in the density error)"

    def group_of(label: str) -> str:
        return "SCF levels" if methods.get(label, "hf") in ("hf", "dft") else "correlated levels"

    def energy_tolerance(kind: str, units: str) -> Tolerance:
        per = {}
        for label in level_labels:
            group = group_of(label)
            total, why = classes[group]
            if kind == "total":
                per[label] = Tolerance(total, "hartree", why, group)
            elif kind == "e_int":
                per[label] = Tolerance(3 * total * HARTREE_TO_KCAL_PER_MOL, units,
                                       f"3 calculations x {why}", group)
            elif numerical.get(label):
                per[label] = Tolerance(3 * total * HARTREE_TO_KCAL_PER_MOL / h, units,
                                       f"numerical force: the interaction-energy tolerance over the step {h} "
                                       "angstrom", group + ", numerical forces")
            else:
                per[label] = Tolerance(FORCE_TOLERANCE, units, force_reason, group + ", analytic forces")
        loosest = max(per.values(), key=lambda t: t.value) if per else Tolerance(
            3 * scf_total * HARTREE_TO_KCAL_PER_MOL if kind != "total" else scf_total, units, classes["SCF levels"][1])
        return Tolerance(loosest.value, loosest.units, loosest.reason, loosest.group, per or None)

    out: dict[str, Tolerance] = {}
    for name in compared_variables(ds):
        units = str(ds[name].attrs.get("units", ""))
        if name == "e_total_hartree":
            t = energy_tolerance("total", "hartree")
        elif name == "force_along":
            t = energy_tolerance("force_along", units)
        elif name.startswith(("force_hf", "force_pulay", "fragment_force_hf", "fragment_force_pulay")):
            t = Tolerance(FORCE_SPLIT_TOLERANCE, units,
                          "electrostatic (Hellmann-Feynman) force: not variational, first order in the density error")
        elif name.startswith(("forces", "fragment_force")):
            t = Tolerance(FORCE_TOLERANCE, units, force_reason)
        elif name == "fragment_torque":
            t = Tolerance(FORCE_TOLERANCE * TORQUE_ARM_ANGSTROM, units,
                          f"force tolerance x {TORQUE_ARM_ANGSTROM:g} angstrom lever arm")
        elif name.startswith("sapt_") or name in ("e_elst", "e_exch", "e_ind", "e_disp", "e_sapt0", "e_ssapt0"):
            t = Tolerance(SAPT_TOLERANCE, units, "SAPT0 SCFs converge to 1e-10 hartree; terms are first order in it")
        elif name.startswith("e_disp_corr"):
            t = Tolerance(DISPERSION_CORRECTION_TOLERANCE, units, "analytic function of the geometry")
        elif name == "spin_square":
            t = Tolerance(SPIN_SQUARE_TOLERANCE, units, "<S^2> is first order in the SCF density error")
        elif units == "angstrom" or units == "1":
            t = Tolerance(GEOMETRY_TOLERANCE, units, "rebuilt from the spec (coordinates rounded to 1e-10 angstrom)")
        elif ds[name].dtype.kind in "bUSO":
            t = Tolerance(0.0, "", "points that failed in one scan only")
        else:   # e_int, e_int_nocp, bsse and any later energy along the levels
            t = energy_tolerance("e_int", units or "kcal/mol")
        out[name] = t
    return out


def compared_variables(ds: xr.Dataset) -> list[str]:
    """Variables of ``ds`` that a recomputation must reproduce: every data variable
    along ``distance`` except timings and descriptive texts (:data:`NOT_COMPARED`)."""
    out = []
    for name, var in ds.data_vars.items():
        if name in NOT_COMPARED or "distance" not in var.dims:
            continue
        if var.dtype.kind in "fiub" or name in ("status", "sapt_status"):
            out.append(str(name))
    return out
