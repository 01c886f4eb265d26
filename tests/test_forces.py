"""Counterpoise-corrected forces: analytic gradients against central finite differences,
translational and rotational invariance, the zero of the force at the energy minimum, and
the Hellmann–Feynman (electrostatic) split against the basis-set limit.

Geometries: S22 dimers from ase.data.s22 (Jurečka et al., PCCP 8, 1985 (2006)).
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import s22_dimer

import interkit as ik
import interkit.analysis
import interkit.plan
from interkit.units import BOHR_TO_ANGSTROM, HARTREE_TO_KCAL_PER_MOL

#: 1 hartree/bohr in kcal/mol/angstrom
EH_PER_BOHR = HARTREE_TO_KCAL_PER_MOL / BOHR_TO_ANGSTROM
#: required agreement of analytic and finite-difference derivatives (the issue's bound)
TOLERANCE = 1e-6 * EH_PER_BOHR
#: central-difference step, angstrom (truncation error ~ STEP^2, well below TOLERANCE)
STEP = 4e-4
CONV_TOL = 1e-11


def _scan(dimer, level, coordinate=None, forces=True, **grid):
    coordinate = coordinate or ik.CentreOfMass()
    if not grid:
        grid = {"distances": [coordinate.value(dimer)]}
    spec = ik.ScanSpec(dimer=dimer, coordinate=coordinate, levels=[level], forces=forces, conv_tol=CONV_TOL,
                       **grid)
    ds = ik.run_scan(spec, executor="serial", progress=False)
    assert (ds["status"] != "failed").all(), ds["status_detail"].values
    return ds


def _e_int(dimer, level, forces) -> float:
    return float(_scan(dimer, level, forces=forces)["e_int"].values[0, 0])


# (S22 dimer, level, atoms checked per component, energies from gradient jobs?)
CASES = [
    ("Water_dimer", "hf/def2-svp", [(0, 0), (1, 1), (3, 0), (4, 2)], False),
    ("Ammonia_dimer", "hf/def2-svp", [(0, 0), (5, 1)], False),
    ("Water_dimer", "b3lyp-d3bj/def2-svp", [(0, 0), (5, 2)], False),
    # MP2 forces use conventional MP2 (DF-MP2 has no analytic gradient): compare with
    # the energies of the same conventional calculations
    ("Water_dimer", "mp2/def2-svp", [(0, 0), (4, 1)], True),
]


@pytest.mark.parametrize("name,level,components,energies_from_gradient_jobs", CASES,
                         ids=[f"{c[0]}-{c[1]}" for c in CASES])
def test_analytic_forces_match_finite_differences(name, level, components, energies_from_gradient_jobs):
    dimer = s22_dimer(name)
    coord = ik.CentreOfMass()
    ds = _scan(dimer, level, coord)
    forces = ds["forces"].values[0, 0]
    assert np.abs(forces.sum(axis=0)).max() < 1e-6  # translation invariance
    # along the coordinate
    r0 = coord.value(dimer)
    e_plus = _e_int(coord.displaced(dimer, r0 + STEP), level, energies_from_gradient_jobs)
    e_minus = _e_int(coord.displaced(dimer, r0 - STEP), level, energies_from_gradient_jobs)
    numerical = -(e_plus - e_minus) / (2 * STEP)
    assert float(ds["force_along"].values[0, 0]) == pytest.approx(numerical, abs=TOLERANCE)
    # per atom, per Cartesian component
    for atom, axis in components:
        shifted = []
        for sign in (1, -1):
            c = np.array(dimer.coordinates)
            c[atom, axis] += sign * STEP
            shifted.append(_e_int(dimer.with_coordinates(c), level, energies_from_gradient_jobs))
        numerical = -(shifted[0] - shifted[1]) / (2 * STEP)
        assert forces[atom, axis] == pytest.approx(numerical, abs=TOLERANCE), (atom, axis)


def test_forces_sum_to_zero_and_exert_no_net_torque():
    # HF: the energy is exactly invariant under rigid rotation (DFT grids are not)
    dimer = s22_dimer("Ammonia_dimer")
    ds = _scan(dimer, "hf/def2-svp", ik.CentreOfMass(), factors=[0.9, 1.2])
    f = ds["forces"].values[0]
    r = ds["coordinates"].values
    assert np.abs(f.sum(axis=1)).max() < 1e-6  # translation invariance
    # rotation invariance, to the precision of converged gradients (~1e-7 hartree/bohr)
    assert np.abs(np.cross(r, f).sum(axis=1)).max() < 1e-3
    # the net force on A is minus the net force on B
    net = ds["fragment_force"].values[0]
    assert np.allclose(net[:, 0], -net[:, 1], atol=1e-6)


def test_force_vanishes_at_the_minimum_of_the_energy_curve():
    dimer = s22_dimer("Water_dimer")
    dist = dimer.intermolecular_distances()
    ia, jb = np.unravel_index(np.argmin(dist), dist.shape)
    pair = ik.AtomPair(dimer.fragment_a[ia], dimer.fragment_b[jb])
    factors = [0.85, 0.9, 0.95, 1.0, 1.05, 1.1, 1.2, 1.35]
    ds = _scan(dimer, "hf/def2-svp", pair, factors=factors)
    r = ds["distance"].values
    e = ds["e_int"].values[0]
    f = ds["force_along"].values[0]
    r_min = ik.analysis.find_minimum(r, e).r_min_angstrom
    r_zero = ik.analysis.force_zero_crossing(r, f)
    assert abs(r_zero - r_min) <= 0.05
    # force_along > 0 inside the minimum (repulsive), < 0 outside
    assert f[0] > 0 and f[-1] < 0
    # and it agrees with -dE/dR of a smooth fit at the interior points
    fit = ik.analysis.derivative_force(r, e)
    # (a spline through points 0.1 Å apart: its slope is good to a few per cent)
    assert np.allclose(fit[2:-2], f[2:-2], rtol=0.05, atol=0.15)


def test_numerical_forces_for_levels_without_analytic_gradients():
    dimer = s22_dimer("Water_dimer")
    coord = ik.CentreOfMass()
    ds = _scan(dimer, "scs-mp2/def2-svp", coord)
    assert str(ds["force_method"].values[0]).startswith("numerical")
    assert np.isnan(ds["forces"].values).all()  # per-atom forces are not claimed
    r0 = coord.value(dimer)
    h = ik.plan.NUMERICAL_FORCE_STEP_ANGSTROM
    e = [float(_scan(coord.displaced(dimer, r0 + s), "scs-mp2/def2-svp", coord, forces=False)["e_int"].values[0, 0])
         for s in (h, -h)]
    # the same central difference from separate energy scans: plumbing, sign and units
    assert float(ds["force_along"].values[0, 0]) == pytest.approx(-(e[0] - e[1]) / (2 * h), abs=1e-4)
    # and close to the analytic MP2 force (SCS only rescales the correlation energy)
    mp2 = _scan(dimer, "mp2/def2-svp", coord)
    assert float(ds["force_along"].values[0, 0]) == pytest.approx(float(mp2["force_along"].values[0, 0]), abs=1.0)


def test_hellmann_feynman_force_approaches_the_analytic_force_as_the_basis_grows():
    """H2, RHF: the Pulay term shrinks from STO-3G to def2-SVP to aug-cc-pVTZ and the
    electrostatic force approaches the analytic one (REFERENCES.md lists 0.078, 0.0096
    and 0.0042 hartree/bohr, measured with pyscf: a trend check, our own numbers)."""
    from pyscf import gto, scf

    from interkit.engine.gradient import electrostatic_forces

    pulay = []
    for basis in ("sto-3g", "def2-svp", "aug-cc-pvtz"):
        mol = gto.M(atom="H 0 0 0; H 0 0 0.74", basis=basis, verbose=0)
        mf = scf.RHF(mol).run(conv_tol=1e-11)
        analytic = -mf.nuc_grad_method().kernel()
        es = electrostatic_forces(mol, mf.make_rdm1())
        assert np.allclose(es.sum(axis=0), 0.0, atol=1e-10)
        pulay.append(abs(analytic[1, 2] - es[1, 2]))
    assert pulay[0] > pulay[1] > pulay[2]
    assert pulay == pytest.approx([0.078, 0.0096, 0.0042], rel=0.05)


def test_electrostatic_force_is_charge_times_field_of_the_density():
    """An independent route: finite differences of the electrostatic potential of the
    electrons and the other nuclei at a nucleus, times its charge."""
    from pyscf import gto, scf

    from interkit.engine.gradient import electrostatic_forces

    mol = gto.M(atom="O 0 0 0; H 0 0.76 0.59; H 0 -0.76 0.59", basis="def2-svp", verbose=0)
    mf = scf.RHF(mol).run(conv_tol=1e-11)
    dm = mf.make_rdm1()
    es = electrostatic_forces(mol, dm)
    coords = mol.atom_coords()
    charges = mol.atom_charges()

    def potential(point, skip):
        with mol.with_rinv_origin(point):
            v = -np.einsum("ij,ij", mol.intor("int1e_rinv"), dm)
        for k in range(mol.natm):
            if k != skip:
                v += charges[k] / np.linalg.norm(point - coords[k])
        return v

    h = 1e-4
    for atom in range(mol.natm):
        field = np.array([-(potential(coords[atom] + h * e, atom) - potential(coords[atom] - h * e, atom)) / (2 * h)
                          for e in np.eye(3)])
        assert np.allclose(charges[atom] * field, es[atom], atol=1e-6)


def test_force_variables_roundtrip_and_units(tmp_path):
    ds = _scan(s22_dimer("Water_dimer"), "hf/def2-svp", ik.CentreOfMass(), factors=[1.0, 1.3])
    for name in ("forces", "force_hf", "force_pulay", "force_along", "fragment_force"):
        assert ds[name].attrs["units"] == "kcal/mol/angstrom"
    np.testing.assert_allclose(ds["force_hf"] + ds["force_pulay"], ds["forces"], atol=1e-10)
    # per-fragment sums of the split, projected on the coordinate, match the B values
    along_b = np.einsum("lpx,px->lp", ds["fragment_force_hf"].values[:, :, 1], ds["force_direction"].values)
    np.testing.assert_allclose(along_b, ds["force_hf_along"].values, atol=1e-10)
    np.testing.assert_allclose(ds["fragment_force_hf"] + ds["fragment_force_pulay"], ds["fragment_force"], atol=1e-10)
    ik.save_scan(ds, tmp_path / "f.nc")
    back = ik.open_scan(tmp_path / "f.nc")
    import xarray as xr

    xr.testing.assert_identical(back, ds)


def test_pulay_part_of_the_interaction_force_shrinks_with_the_basis():
    """The same trend for a dimer (S22 water dimer, HF, counterpoise-corrected): the
    Pulay part of the net force on B shrinks from def2-SVP to def2-TZVP to aug-cc-pVTZ
    while the analytic force itself changes much less (practice: Pulay forces vanish only
    in the basis-set limit, slowly for atoms with core electrons)."""
    dimer = s22_dimer("Water_dimer")
    pulay, full = [], []
    for basis in ("def2-svp", "def2-tzvp", "aug-cc-pvtz"):
        ds = _scan(dimer, f"hf/{basis}", ik.CentreOfMass())
        pulay.append(abs(float(ds["force_pulay_along"].values[0, 0])))
        full.append(float(ds["force_along"].values[0, 0]))
    assert pulay[0] > pulay[1] > pulay[2]
    assert max(full) - min(full) < 0.1 * pulay[0]
