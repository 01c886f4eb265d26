"""Open-shell (UHF, UKS, UMP2) and ECP (LANL2DZ, def2-SVP) interaction energies and forces
against pyscf calculations written here, and forces against central finite differences.

The counterpoise correction is done by hand (Boys and Bernardi, Mol. Phys. 19, 553 (1970)):
E_int = E_AB(AB) - E_A(AB) - E_B(AB), the monomers computed with the partner's atoms as
``ghost-X`` atoms (basis functions, no nucleus, no electrons, no ECP). The force on an
atom is -dE_int/dx.

Treatment reproduced (read from interkit/model/levels.py and interkit/engine/energy.py):
HF and DFT with density-fitted Coulomb and exchange on pyscf's default fitting basis;
open shells (2S != 0) unrestricted, closed shells restricted; DFT on pyscf grid level 3
with NWChem pruning and no density-based pruning of points (``small_rho_cutoff = 0``);
energy-only MP2 density-fitted in both steps with the SCF's fitting object; MP2 with
forces on open shells with exact integrals in both steps; frozen core = the 1s shell of
each real C-Ne atom (common practice), none for the valence-only halogens of the ECP
bases.

Geometries are built here (roughly bound arrangements, not reference structures).
"""

from __future__ import annotations

import numpy as np
import pytest
from pyscf import dft, gto, lib, mp, scf

import interkit as ik

lib.num_threads(1)

# CODATA 2018: Bohr radius 0.529177210903 angstrom, hartree 627.5094740631 kcal/mol
BOHR_PER_ANGSTROM = 1.0 / 0.529177210903
KCAL_PER_HARTREE = 627.5094740631
#: 1 hartree/bohr in kcal/mol/angstrom
KCAL_PER_ANGSTROM_PER_HARTREE_PER_BOHR = KCAL_PER_HARTREE * BOHR_PER_ANGSTROM
CONV = 1e-11
#: agreement of energies (kcal/mol): converged SCFs agree to ~1e-9 hartree
E_TOL_KCAL = 1e-5
#: agreement of forces: 1e-6 hartree/bohr, the bound of tests/test_forces.py
F_TOL = 1e-6 * KCAL_PER_ANGSTROM_PER_HARTREE_PER_BOHR
#: central-difference step (angstrom); truncation error ~ h^2 f''' well below F_TOL
STEP = 4e-4

# methyl radical (doublet, planar) with HF donating a hydrogen bond to the carbon
CH3_HF = """6
methyl radical and hydrogen fluoride, test geometry
C   0.000000  0.000000  0.000000
H   1.080000  0.000000  0.000000
H  -0.540000  0.935307  0.000000
H  -0.540000 -0.935307  0.000000
H   0.100000  0.050000  2.300000
F   0.150000  0.080000  3.220000
"""
# HF donating a hydrogen bond to the halogen of HBr / HI
HBR_HF = """4
hydrogen bromide and hydrogen fluoride, test geometry
Br  0.000000  0.000000  0.000000
H   1.410000  0.000000  0.150000
H   0.050000  0.100000  2.450000
F   0.080000  0.150000  3.370000
"""
HI_HF = """4
hydrogen iodide and hydrogen fluoride, test geometry
I   0.000000  0.000000  0.000000
H   1.610000  0.000000  0.150000
H   0.050000  0.100000  2.700000
F   0.080000  0.150000  3.620000
"""


def open_shell_dimer() -> ik.Dimer:
    return ik.Dimer.from_xyz_string(CH3_HF, fragment_a=[0, 1, 2, 3], multiplicities=(2, 1))


def halide_dimer(xyz: str) -> ik.Dimer:
    return ik.Dimer.from_xyz_string(xyz, fragment_a=[0, 1])


# ------------------------------------------------------------------ the references
def role_molecule(dimer: ik.Dimer, coords: np.ndarray, role: str, basis: str, ecp: bool) -> gto.Mole:
    """The dimer ('AB') or monomer 'A'/'B' in the dimer basis, partner as ghost atoms."""
    atoms, charge, spin = [], 0, 0
    own = {"AB": (0, 1), "A": (0,), "B": (1,)}[role]
    for i, (s, r) in enumerate(zip(dimer.symbols, coords)):
        frag = 0 if i in dimer.fragment_a else 1
        atoms.append((s if frag in own else "ghost-" + s, tuple(r * BOHR_PER_ANGSTROM)))
    for f in own:
        charge += dimer.charges[f]
        spin += dimer.multiplicities[f] - 1  # default dimer spin: high spin, S = S_A + S_B
    # ecp=<basis name>: pyscf puts the basis' ECP on every real atom that has one
    return gto.M(atom=atoms, unit="Bohr", basis=basis, ecp=basis if ecp else None,
                 charge=charge, spin=spin, verbose=0)


def n_frozen(mol: gto.Mole) -> int:
    """1s core of real C-Ne atoms (ghosts carry no electrons)."""
    return sum(1 for i in range(mol.natm) if 6 <= mol.atom_charge(i) <= 10)


def reference(mol: gto.Mole, method: str, xc: str | None = None, gradient: bool = False,
              exact: bool = False):
    """(total energy hartree, gradient hartree/bohr or None) of one counterpoise
    calculation; ``exact``: no density fitting in the SCF and the MP2 step."""
    open_shell = mol.spin != 0
    if method == "dft":
        mf = dft.UKS(mol) if open_shell else dft.RKS(mol)
        mf.xc = xc
        mf.grids.level = 3
        mf.grids.prune = dft.gen_grid.nwchem_prune
        mf.small_rho_cutoff = 0.0
    else:
        mf = scf.UHF(mol) if open_shell else scf.RHF(mol)
    if not exact:
        mf = mf.density_fit()
    mf.conv_tol = CONV
    mf.kernel()
    assert mf.converged
    energy = mf.e_tot
    if method == "mp2":
        if exact:
            solver = mp.UMP2(mf) if open_shell else mp.RMP2(mf)
        else:
            solver = mp.dfump2.DFUMP2(mf) if open_shell else mp.dfmp2.DFMP2(mf)
        solver.frozen = n_frozen(mol) or None
        solver.kernel()
        energy += solver.e_corr
        if gradient:
            return energy, solver.nuc_grad_method().kernel()
        return energy, None
    if not gradient:
        return energy, None
    g = mf.nuc_grad_method()
    if method == "dft":
        g.grid_response = True
    return energy, g.kernel()


def reference_e_int(dimer, coords, basis, method, xc=None, ecp=False, gradient=False, forces_level=None):
    """Counterpoise interaction energy (kcal/mol) and, with ``gradient``, force
    (kcal/mol/angstrom) by hand, with the treatment of a level with forces if
    ``forces_level`` (default: ``gradient``)."""
    e = {}
    g = {}
    # the plan gives MP2 with forces on an open-shell dimer exact integrals in the SCF
    # and the MP2 step of all three calculations
    exact = method == "mp2" and (gradient if forces_level is None else forces_level)
    for role in ("AB", "A", "B"):
        mol = role_molecule(dimer, coords, role, basis, ecp)
        e[role], g[role] = reference(mol, method, xc, gradient, exact)
    e_int = (e["AB"] - e["A"] - e["B"]) * KCAL_PER_HARTREE
    if not gradient:
        return e_int, None
    force = -(g["AB"] - g["A"] - g["B"]) * KCAL_PER_ANGSTROM_PER_HARTREE_PER_BOHR
    return e_int, force


def finite_difference_force(dimer, basis, method, atom, axis, xc=None, ecp=False) -> float:
    """-dE_int/dx (kcal/mol/angstrom) by central differences of the hand-made reference
    energies with the treatment of a level with forces."""
    energies = []
    for sign in (1, -1):
        c = np.array(dimer.coordinates, dtype=float)
        c[atom, axis] += sign * STEP
        energies.append(reference_e_int(dimer, c, basis, method, xc, ecp, forces_level=True)[0])
    return -(energies[0] - energies[1]) / (2 * STEP)


def interkit_scan(dimer, level, forces):
    spec = ik.ScanSpec(dimer=dimer, factors=[1.0], levels=[level], forces=forces, scf_threshold_hartree=CONV)
    ds = ik.run_scan(spec, executor="serial", progress=False)
    assert (ds["status"] != "failed").all(), ds["status_detail"].values
    # factor 1.0 of the default coordinate is the input geometry
    assert np.allclose(ds["coordinates"].values[0], dimer.coordinates, atol=1e-12)
    return ds


# ------------------------------------------------------------------ open shells
OPEN_SHELL_CASES = [("hf/6-31g", "hf", None), ("mp2/6-31g", "mp2", None), ("b3lyp/sto-3g", "dft", "b3lyp")]


@pytest.mark.parametrize("level,method,xc", OPEN_SHELL_CASES, ids=["UHF", "UMP2", "UKS"])
def test_open_shell_interaction_energy_equals_hand_made_counterpoise(level, method, xc):
    dimer = open_shell_dimer()
    ds = interkit_scan(dimer, level, forces=False)
    basis = level.split("/")[1]
    # source: pyscf calculations of the three counterpoise terms written above (DF SCF,
    # DF-UMP2 with the SCF's fitting object for energy-only MP2)
    want, _ = reference_e_int(dimer, np.array(dimer.coordinates), basis, method, xc)
    assert float(ds["e_int"].values[0, 0]) == pytest.approx(want, abs=E_TOL_KCAL)
    # the open-shell calculations were unrestricted: <S^2> of a doublet is about 0.75
    s2 = ds["spin_square"].sel(role="dimer").values.item()
    assert 0.75 <= s2 < 0.8


# atoms/components checked by finite differences: the radical's carbon and the H-bonded H
FD_COMPONENTS = [(0, 2), (4, 0)]


@pytest.mark.parametrize("level,method,xc", OPEN_SHELL_CASES[:2], ids=["UHF", "UMP2"])
def test_open_shell_forces_equal_pyscf_gradients_and_finite_differences(level, method, xc):
    dimer = open_shell_dimer()
    ds = interkit_scan(dimer, level, forces=True)
    basis = level.split("/")[1]
    forces = ds["forces"].values[0, 0]
    # source: pyscf's analytic gradients of the hand-made counterpoise terms (UMP2 with
    # exact integrals, the treatment the plan gives open-shell MP2 forces)
    e_int, want = reference_e_int(dimer, np.array(dimer.coordinates), basis, method, xc, gradient=True)
    assert float(ds["e_int"].values[0, 0]) == pytest.approx(e_int, abs=E_TOL_KCAL)
    np.testing.assert_allclose(forces, want, atol=F_TOL)
    for atom, axis in FD_COMPONENTS:
        fd = finite_difference_force(dimer, basis, method, atom, axis, xc)
        assert forces[atom, axis] == pytest.approx(fd, abs=F_TOL), (atom, axis)


@pytest.mark.slow
def test_open_shell_uks_forces_equal_finite_differences():
    # UKS: pyscf's grid response treats ghost-atom grids differently, so the independent
    # reference is the finite difference of hand-made UKS energies (grid moving with atoms)
    dimer = open_shell_dimer()
    ds = interkit_scan(dimer, "b3lyp/sto-3g", forces=True)
    forces = ds["forces"].values[0, 0]
    assert np.abs(forces.sum(axis=0)).max() < 1e-4  # translation invariance
    for atom, axis in FD_COMPONENTS:
        fd = finite_difference_force(dimer, "sto-3g", "dft", atom, axis, "b3lyp")
        assert forces[atom, axis] == pytest.approx(fd, abs=F_TOL), (atom, axis)


# ------------------------------------------------------------------ ECPs
# def2-SVP carries an ECP from Rb on (Weigend and Ahlrichs, PCCP 7, 3297 (2005)): iodine
# yes, bromine all-electron; LANL2DZ has ECPs on both (Hay and Wadt, J. Chem. Phys. 82,
# 270 and 299 (1985))
ECP_CASES = [(HBR_HF, "lanl2dz"), (HI_HF, "lanl2dz"), (HBR_HF, "def2-svp"), (HI_HF, "def2-svp")]
ECP_IDS = ["HBr-lanl2dz", "HI-lanl2dz", "HBr-def2-svp", "HI-def2-svp"]
#: valence electrons of the halogen with each basis' core (LANL2DZ: 7 for Br and I;
#: def2-SVP: Br all-electron 35, I 53 - 28 = 25)
HALOGEN_ELECTRONS = {("Br", "lanl2dz"): 7, ("I", "lanl2dz"): 7, ("Br", "def2-svp"): 35, ("I", "def2-svp"): 25}


@pytest.mark.parametrize("xyz,basis", ECP_CASES, ids=ECP_IDS)
def test_ecp_energies_and_forces_equal_pyscf_and_finite_differences(xyz, basis):
    from interkit.engine.molecule import build_molecule
    from interkit.run.plan import plan_scan

    dimer = halide_dimer(xyz)
    level = f"hf/{basis}"
    ds = interkit_scan(dimer, level, forces=True)
    halogen = dimer.symbols[0]
    # the dimer calculation carries the halogen's ECP: its electron count says so
    spec = ik.ScanSpec(dimer=dimer, factors=[1.0], levels=[level], forces=True, scf_threshold_hartree=CONV)
    plan = plan_scan(spec)
    mol = build_molecule(plan.jobs[plan.table[(0, 0)]["dimer"]])
    assert mol.nelectron == HALOGEN_ELECTRONS[(halogen, basis)] + 1 + 10
    coords = np.array(dimer.coordinates)
    # source: pyscf's DF-RHF energies and analytic gradients with the basis' ECP
    e_int, want = reference_e_int(dimer, coords, basis, "hf", ecp=True, gradient=True)
    ref_mol = role_molecule(dimer, coords, "AB", basis, ecp=True)
    assert ref_mol.nelectron == mol.nelectron
    assert float(ds["e_int"].values[0, 0]) == pytest.approx(e_int, abs=E_TOL_KCAL)
    forces = ds["forces"].values[0, 0]
    np.testing.assert_allclose(forces, want, atol=F_TOL)
    # the force on the halogen (the ECP centre) along the contact, by central differences
    fd = finite_difference_force(dimer, basis, "hf", 0, 2, ecp=True)
    assert forces[0, 2] == pytest.approx(fd, abs=F_TOL)
