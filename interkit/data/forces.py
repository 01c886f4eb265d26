"""Counterpoise-corrected forces of a scan, assembled from per-calculation gradients.

The force on every atom is minus the gradient of the counterpoise-corrected interaction
energy, ``-(g_AB - g_A[AB basis] - g_B[AB basis])``, ghost rows included (a ghost's
basis functions move with its atom). Its projection on the scan direction summed over
fragment B is ``force_along``: positive pushes the fragments apart (repulsive), and it
is ``-dE_int/dR``, so it crosses zero at the minimum of the curve.

The Hellmann–Feynman (electrostatic) part, ``force_hf``, is the same combination of the
electrostatic forces of nuclei and electron density on the nuclei; ``force_pulay`` is the
rest, which vanishes in a complete basis.
"""

from __future__ import annotations

import numpy as np

from ..model.job import NUMERICAL_FORCE_STEP_ANGSTROM, ScanPlan, force_method
from ..units import BOHR_TO_ANGSTROM, HARTREE_TO_KCAL_PER_MOL

#: hartree/bohr -> kcal/mol/angstrom
FORCE_UNIT = HARTREE_TO_KCAL_PER_MOL / BOHR_TO_ANGSTROM
FORCE_ATTRS = {"units": "kcal/mol/angstrom"}


def _combined(records: dict, entry: dict, field: str, suffix: str = "") -> np.ndarray | None:
    """``X(dimer) - X(A in dimer basis) - X(B in dimer basis)`` of a per-atom field."""
    parts = []
    for role in ("dimer", "a_dimer_basis", "b_dimer_basis"):
        rec = records.get(entry.get(role + suffix, ""))
        if rec is None or rec.get("status") == "failed" or rec.get(field) is None:
            return None
        parts.append(np.asarray(rec[field], dtype=float))
    return parts[0] - parts[1] - parts[2]


def force_variables(plan: ScanPlan, records: dict, converged: np.ndarray) -> dict:
    """Dataset variables (name -> (dims, data, attrs)) of the forces of a scan."""
    spec = plan.spec
    nl, npnt, natm = len(spec.levels), len(spec.points), spec.dimer.natoms
    frag = {"A": list(spec.dimer.fragment_a), "B": list(spec.dimer.fragment_b)}
    forces = np.full((nl, npnt, natm, 3), np.nan)
    f_es = np.full((nl, npnt, natm, 3), np.nan)
    along = np.full((nl, npnt), np.nan)
    direction = np.stack([spec.coordinate.direction(p.dimer) for p in spec.points])
    methods = []
    h = NUMERICAL_FORCE_STEP_ANGSTROM
    for li, level in enumerate(spec.levels):
        method = force_method(level)
        methods.append(method if method != "numerical" else
                       f"numerical (central difference of the CP energy along the coordinate, h = {h} Å)")
        for pi in range(npnt):
            if not converged[li, pi]:
                continue
            entry = plan.table[(li, pi)]
            if method == "numerical":
                plus = _combined(records, entry, "energy_hartree", "_plus")
                minus = _combined(records, entry, "energy_hartree", "_minus")
                if plus is not None and minus is not None:
                    along[li, pi] = -(float(plus) - float(minus)) / (2 * h) * HARTREE_TO_KCAL_PER_MOL
                continue
            grad = _combined(records, entry, "gradient_hartree_per_bohr")
            if grad is None:
                continue
            forces[li, pi] = -grad * FORCE_UNIT
            es = _combined(records, entry, "electrostatic_force_hartree_per_bohr")
            if es is not None:
                f_es[li, pi] = es * FORCE_UNIT
            along[li, pi] = forces[li, pi, frag["B"]].sum(axis=0) @ direction[pi]
    pulay = forces - f_es
    es_along = np.einsum("lpx,px->lp", f_es[:, :, frag["B"]].sum(axis=2), direction)
    pulay_along = np.einsum("lpx,px->lp", pulay[:, :, frag["B"]].sum(axis=2), direction)
    net = np.stack([forces[:, :, frag[e]].sum(axis=2) for e in ("A", "B")], axis=2)
    # electrostatic forces of an approximate density need not sum to zero: keep both fragments
    net_es = np.stack([f_es[:, :, frag[e]].sum(axis=2) for e in ("A", "B")], axis=2)
    net_pulay = np.stack([pulay[:, :, frag[e]].sum(axis=2) for e in ("A", "B")], axis=2)
    torque = np.full((nl, npnt, 2, 3), np.nan)
    masses = spec.dimer.masses()
    for pi, point in enumerate(spec.points):
        for k, e in enumerate(("A", "B")):
            idx = frag[e]
            com = (masses[idx, None] * point.dimer.coordinates[idx]).sum(axis=0) / masses[idx].sum()
            arm = point.dimer.coordinates[idx] - com
            torque[:, pi, k] = np.cross(arm[None], forces[:, pi, idx]).sum(axis=1)
    four = ("level", "distance", "atom", "xyz")
    return {
        "forces": (four, forces, dict(FORCE_ATTRS, long_name="counterpoise-corrected force on each atom")),
        "force_hf": (four, f_es, dict(FORCE_ATTRS, long_name="electrostatic (Hellmann-Feynman) force")),
        "force_pulay": (four, pulay, dict(FORCE_ATTRS, long_name="Pulay force (analytic minus electrostatic)")),
        "force_along": (("level", "distance"), along,
                        dict(FORCE_ATTRS, long_name="net force on B along the coordinate (positive = repulsive)")),
        "force_hf_along": (("level", "distance"), es_along,
                           dict(FORCE_ATTRS, long_name="electrostatic force on B along the coordinate")),
        "force_pulay_along": (("level", "distance"), pulay_along,
                              dict(FORCE_ATTRS, long_name="Pulay force on B along the coordinate")),
        "fragment_force": (("level", "distance", "end", "xyz"), net,
                           dict(FORCE_ATTRS, long_name="net force on each fragment")),
        "fragment_force_hf": (("level", "distance", "end", "xyz"), net_es,
                              dict(FORCE_ATTRS, long_name="net electrostatic (Hellmann-Feynman) force on each fragment")),
        "fragment_force_pulay": (("level", "distance", "end", "xyz"), net_pulay,
                                 dict(FORCE_ATTRS, long_name="net Pulay force on each fragment")),
        "fragment_torque": (("level", "distance", "end", "xyz"), torque,
                            {"units": "kcal/mol", "long_name": "torque on each fragment about its centre of mass"}),
        "force_direction": (("distance", "xyz"), direction,
                            {"units": "1", "long_name": "unit vector along which B moves (A to B)"}),
        "force_method": (("level",), np.array(methods, dtype=str), {"long_name": "how forces were obtained"}),
    }
