"""The rigid-body optimiser at MP2/aug-cc-pVDZ with counterpoise on the water dimer (slow).

Start: the S22 water dimer (ase.data.s22, Jurečka et al., PCCP 8, 1985 (2006)) with B
moved 0.3 Å along O···O and turned by 15°. Reference optimum: computed here, a SciPy
BFGS run (scipy.optimize.minimize) on the same counterpoise-corrected energy function
in translation + rotation-vector coordinates from the unperturbed S22 geometry,
converged to a gradient of 1e-3 kcal/mol/Å (and kcal/mol/rad), ten times tighter than
the optimiser run checked here (5e-3 in force and torque).

Published: O···O = 2.90 Å at CCSD(T)/CBS (Halkier et al., Theor. Chem. Acc. 97, 150
(1997); REFERENCES.md). Counterpoise-optimised MP2/aug-cc-pVDZ gives a longer O···O,
roughly 2.93-2.95 Å with relaxed monomers (recalled from memory): counterpoise removes
the basis-set superposition that shortens the bond, and the double-zeta correlation
energy is incomplete; rigid S22 monomers may add a little. Allowed here, fixed before
the run: 2.90-2.99 Å. (Measured when written: 2.978 Å, at the long end of that range.)
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import s22_dimer
from scipy.optimize import minimize

from interkit.model.rigid import left_jacobian, moved_b
from interkit.run.optimise import RigidBodyEnergy, optimise_dimer

LEVEL = "mp2/aug-cc-pvdz"


def _hbond(d):
    """(O···O distance in Å, O-H···O angle in degrees) of a water dimer."""
    x, sym = d.coordinates, d.symbols
    frag = d.fragment_labels
    best = None
    for h in (i for i, s in enumerate(sym) if s == "H"):
        for o in (j for j, s in enumerate(sym) if s == "O" and frag[j] != frag[h]):
            r = np.linalg.norm(x[h] - x[o])
            if best is None or r < best[0]:
                best = (r, h, o)
    _, h, o_acc = best
    o_don = next(j for j, s in enumerate(sym) if s == "O" and frag[j] == frag[h])
    u, v = x[o_don] - x[h], x[o_acc] - x[h]
    angle = np.degrees(np.arccos(u @ v / np.linalg.norm(u) / np.linalg.norm(v)))
    return float(np.linalg.norm(x[o_acc] - x[o_don])), float(angle)


@pytest.mark.slow
@pytest.mark.timeout(3600)  # dozens of MP2/aug-cc-pVDZ gradients: beyond the 900 s default
def test_mp2_optimum_matches_a_tight_reference_and_the_published_distance(tmp_path):
    store = tmp_path / "store"
    d0 = s22_dimer("Water_dimer")
    fn = RigidBodyEnergy(LEVEL, cache=store)

    def fg(x):
        ev = fn(moved_b(d0, x[:3], x[3:]))
        return ev.e_int, np.concatenate([-ev.force, -left_jacobian(x[3:]).T @ ev.torque])

    ref = minimize(fg, np.zeros(6), jac=True, method="BFGS", options={"gtol": 1e-3, "maxiter": 100})
    assert ref.success, ref.message
    r_ref, a_ref = _hbond(moved_b(d0, ref.x[:3], ref.x[3:]))
    oo = d0.coordinates[3] - d0.coordinates[0]
    start = moved_b(d0, 0.3 * oo / np.linalg.norm(oo), np.deg2rad(15.0) * np.array([0.0, 0.0, 1.0]))
    res = optimise_dimer(start, LEVEL, cache=store, force_tol_kcal_per_mol_per_angstrom=5e-3,
                         torque_tol_kcal_per_mol=5e-3, energy_tol_kcal_per_mol=1e-5)
    assert res.converged
    r_opt, a_opt = _hbond(res.dimer)
    assert abs(r_opt - r_ref) < 0.02
    assert abs(a_opt - a_ref) < 2.0
    assert 2.90 <= r_opt <= 2.99
    print(f"MP2/aDZ+CP: O...O {r_opt:.4f} Å (reference {r_ref:.4f}), O-H...O {a_opt:.2f}° "
          f"(reference {a_ref:.2f}), E_int {res.e_int_kcal_per_mol:.4f} kcal/mol "
          f"(reference {ref.fun:.4f}), {res.evaluations} evaluations (reference {ref.nfev})")
