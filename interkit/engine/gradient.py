"""Analytic nuclear gradients of one job and the Hellmann–Feynman (electrostatic) force.

Gradients cover every atom of the job, ghosts included: a ghost atom carries basis
functions (and DFT grid points) that move with it, so the counterpoise-corrected
gradient of the interaction energy is the dimer gradient minus the two ghosted-monomer
gradients, row by row.

Hellmann–Feynman split: for an exact wavefunction the force on nucleus I is the
electrostatic force of the other nuclei and of the electron density,

    F_I^es = -dV_nn/dR_I + Z_I * E_el(R_I),

with E_el the electric field of the electrons at the nucleus. With atom-centred basis
sets the analytic force differs from it by the Pulay term (the basis functions move
with the nuclei); the difference vanishes as the basis approaches completeness.
"""

from __future__ import annotations

import numpy as np
from pyscf import gto, mp, scf
from pyscf.grad import rhf as rhf_grad

from ..levels import LevelOfTheory
from .dispersion import dispersion_energy_and_gradient


def electrostatic_forces(mol: gto.Mole, dm) -> np.ndarray:
    """Hellmann–Feynman forces (hartree/bohr, shape (natm, 3)) of a density on the nuclei.

    Parameters
    ----------
    mol : pyscf Mole
        Ghost atoms (charge 0) get zero rows.
    dm : array
        AO density matrix (a (2, nao, nao) spin pair is summed).
    """
    dm = np.asarray(dm)
    if dm.ndim == 3:
        dm = dm[0] + dm[1]
    force = -rhf_grad.grad_nuc(mol)
    charges = mol.atom_charges()
    ecp_atoms = set(mol._ecpbas[:, gto.ATOM_OF]) if mol.has_ecp() else set()
    for ia in range(mol.natm):
        if charges[ia] == 0 and ia not in ecp_atoms:
            continue
        with mol.with_rinv_at_nucleus(ia):
            # <d/dr i| 1/|r-R_I| |j>: the field operator of nucleus I, by integration by parts
            vrinv = mol.intor("int1e_iprinv", comp=3) * -charges[ia]
            if ia in ecp_atoms:
                vrinv += mol.intor("ECPscalar_iprinv", comp=3)
        grad_e = np.einsum("xij,ij->x", vrinv + vrinv.transpose(0, 2, 1), dm)
        force[ia] -= grad_e
    return force


def _ghost_aware_grids(mf):
    """A copy of the SCF grids whose molecule reports element charges for ghost atoms.

    pyscf's Becke grid response looks up atomic radii by ``mol.atom_charges()``, which is
    zero for ghost atoms, while the energy's partition uses the element's radius; the
    mismatch puts ~1e-4 hartree/bohr errors on ghosted gradients. The copy is used only
    for the grid response, never for nuclear terms.
    """
    from pyscf.data.elements import _std_symbol_without_ghost
    from pyscf.data.elements import charge as element_charge

    grids = mf.grids.copy()
    gmol = mf.mol.copy()
    z = np.array([element_charge(_std_symbol_without_ghost(x)) for x in gmol.elements])
    gmol.atom_charges = lambda: z.copy()
    grids.mol = gmol
    return grids


def scf_gradient(mf, level: LevelOfTheory) -> np.ndarray:
    """Analytic gradient (hartree/bohr) of a converged HF or DFT calculation, with exact
    grid response for DFT."""
    if hasattr(getattr(mf, "_numint", None), "max_cache_mb"):
        mf._numint.max_cache_mb = 0  # the gradient uses other grids: no caching there
    g = mf.nuc_grad_method()
    g.verbose = 0
    if level.method == "dft":
        g.grid_response = True
        g.grids = _ghost_aware_grids(mf)
    return np.asarray(g.kernel(), dtype=float)


def mp2_gradient(mf, frozen: int | None) -> tuple[float, np.ndarray]:
    """Conventional (not density-fitted) MP2 correlation energy and total gradient."""
    solver = mp.UMP2(mf) if mf.mol.spin != 0 else mp.MP2(mf)
    solver.frozen = frozen or None
    solver.verbose = 0
    solver.kernel()
    g = solver.nuc_grad_method()
    g.verbose = 0
    return float(solver.e_corr), np.asarray(g.kernel(), dtype=float)


def dispersion_gradient(job, natm: int) -> tuple[float, np.ndarray]:
    """Dispersion energy and gradient (zero rows for ghosts) of a job's level."""
    grad = np.zeros((natm, 3))
    if not job.level.dispersion:
        return 0.0, grad
    real = job.real_atoms
    e, g = dispersion_energy_and_gradient([job.symbols[i] for i in real],
                                          [job.coordinates[i] for i in real],
                                          job.level.functional, job.level.dispersion)
    grad[real] = g
    return e, grad


def conventional_reference(mol, level: LevelOfTheory, conv_tol: float):
    """A non-density-fitted RHF/UHF for conventional MP2 gradients."""
    mf = scf.UHF(mol) if mol.spin != 0 else scf.RHF(mol)
    mf.conv_tol = conv_tol
    mf.verbose = 0
    return mf
