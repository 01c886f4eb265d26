"""Rigid-body optimiser: gradient conventions against finite differences, convergence,
rigid monomers, a monotone trajectory, resume from the store, the trajectory file.

Geometry: the S22 water dimer from ase.data.s22 (Jurečka et al., PCCP 8, 1985 (2006)),
B moved by 0.3 Å along O···O and turned by 15°. Level HF/STO-3G: cheap, the checks here
are of the optimiser, not of the level.
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import s22_dimer

import interkit as ik
from interkit.data.rigid_trajectory import open_trajectory, save_trajectory, trajectory_dimer
from interkit.model.rigid import left_jacobian, moved_b, rotation_matrix
from interkit.run.optimise import RigidBodyEnergy, optimise_dimer

LEVEL = "hf/sto-3g"


def _start():
    d = s22_dimer("Water_dimer")
    oo = d.coordinates[3] - d.coordinates[0]
    return moved_b(d, 0.3 * oo / np.linalg.norm(oo), np.deg2rad(15.0) * np.array([0.0, 0.0, 1.0]))


def _internal(d, idx):
    x = d.coordinates[list(idx)]
    return np.linalg.norm(x[:, None] - x[None], axis=2)


def test_left_jacobian_matches_finite_difference_of_rotations():
    # definition: R(w + dw) = R(J dw) R(w) to first order (Lie-group identity, common practice)
    w = np.array([0.3, -0.5, 0.8])
    jac = left_jacobian(w)
    for k in range(3):
        dw = np.zeros(3)
        dw[k] = 1e-6
        lhs = rotation_matrix(w + dw) @ rotation_matrix(w).T
        omega = np.array([lhs[2, 1] - lhs[1, 2], lhs[0, 2] - lhs[2, 0], lhs[1, 0] - lhs[0, 1]]) / 2 / 1e-6
        assert np.allclose(omega, jac[:, k], atol=1e-5)


def test_gradient_is_minus_force_and_torque(tmp_path):
    # the optimiser's gradient convention: dE/dt = -F_B, dE/dw = -tau_B (about B's centre
    # of mass), checked by central differences of the CP energy (step 1e-3 Å / rad;
    # truncation error ~1e-6 kcal/mol per unit, well below the 2e-3 tolerance)
    fn = RigidBodyEnergy(LEVEL, cache=tmp_path / "store")
    d0 = _start()
    ev = fn(d0)
    h = 1e-3
    ez = [fn(moved_b(d0, rotation=(0.0, 0.0, s * h))).e_int for s in (1, -1)]
    ex = [fn(moved_b(d0, shift=(s * h, 0.0, 0.0))).e_int for s in (1, -1)]
    assert (ez[0] - ez[1]) / (2 * h) == pytest.approx(-ev.torque[2], abs=2e-3)
    assert (ex[0] - ex[1]) / (2 * h) == pytest.approx(-ev.force[0], abs=2e-3)


def test_optimiser_converges_rigidly_and_resumes_from_the_store(tmp_path):
    store = tmp_path / "store"
    start = _start()
    res = optimise_dimer(start, LEVEL, cache=store)
    tr = res.trajectory
    assert res.converged and tr.attrs["converged"]
    # thresholds met at the final geometry (the documented defaults)
    assert float(tr["force_norm"][-1]) <= 0.02 and float(tr["torque_norm"][-1]) <= 0.02
    assert bool(tr["accepted"][-1])
    # the settings that change the result are recorded
    assert tr.attrs["force_tol_kcal_per_mol_per_angstrom"] == 0.02 and tr.attrs["torque_tol_kcal_per_mol"] == 0.02
    assert tr.attrs["energy_tol_kcal_per_mol"] == 1e-4 and "level_settings_json" in tr.attrs
    # accepted energies never rise by more than the documented noise allowance (1e-6 kcal/mol)
    e_acc = tr["e_int"].values[tr["accepted"].values]
    assert np.all(np.diff(e_acc) <= 1e-6)
    assert e_acc[-1] < e_acc[0] - 0.05
    # monomers rigid, A fixed (to rounding)
    for idx in (start.fragment_a, start.fragment_b):
        assert np.abs(_internal(res.dimer, idx) - _internal(start, idx)).max() < 1e-10
    assert np.array_equal(res.dimer.coordinates[:3], start.coordinates[:3])
    # resume: the same call finds every evaluation in the store, computes nothing
    again = optimise_dimer(start, LEVEL, cache=store)
    assert again.trajectory.attrs["calculations_computed"] == 0
    assert again.evaluations == res.evaluations
    assert np.array_equal(again.dimer.coordinates, res.dimer.coordinates)
    # trajectory file round trip; the optimum is a Dimer that starts a scan
    path = tmp_path / "traj.nc"
    save_trajectory(tr, path)
    back = open_trajectory(path)
    assert back["accepted"].dtype == bool and back.attrs["converged"] is True
    np.testing.assert_array_equal(back["e_int"].values, tr["e_int"].values)
    final = trajectory_dimer(back)
    assert np.array_equal(final.coordinates, res.dimer.coordinates)
    spec = ik.ScanSpec(dimer=final, coordinate=ik.AtomPair(0, 3), factors=[1.0, 1.1], levels=[LEVEL])
    assert spec.points[0].distance == pytest.approx(np.linalg.norm(final.coordinates[3] - final.coordinates[0]))


def test_optimiser_refuses_levels_without_analytic_forces_and_bad_settings():
    with pytest.raises(ik.NotAvailableError, match="level"):
        optimise_dimer(_start(), "ccsd(t)/sto-3g", cache=None)
    with pytest.raises(ik.InputError, match="max_steps"):
        optimise_dimer(_start(), LEVEL, max_steps=0, cache=None)
    with pytest.raises(ik.InputError, match="force_tol_kcal_per_mol_per_angstrom"):
        optimise_dimer(_start(), LEVEL, force_tol_kcal_per_mol_per_angstrom=-1, cache=None)


def test_an_interrupted_optimisation_keeps_its_steps(tmp_path):
    class Interrupted(RigidBodyEnergy):
        def __call__(self, dimer):
            if self.evaluations == 2:
                raise KeyboardInterrupt
            return super().__call__(dimer)

    with pytest.raises(KeyboardInterrupt) as info:
        optimise_dimer(_start(), LEVEL, energy=Interrupted(LEVEL, cache=tmp_path / "store"))
    tr = info.value.trajectory
    assert tr.sizes["step"] == 2 and not tr.attrs["converged"]
    assert np.isfinite(tr["e_int"].values).all()
