"""Build a pyscf Mole from a job: ghost atoms, basis and effective core potentials."""

from __future__ import annotations

from pyscf import gto

from ..model.job import Job
from ..model.levels import ecp_assignment
from ..units import ANGSTROM_TO_BOHR


def ecp_for(basis: str, symbols) -> dict[str, str]:
    """ECP assignment of the given real-atom symbols: every element whose definition of
    ``basis`` in pyscf's library carries an effective core potential (LANL2DZ, SBKJC,
    CRENBL, cc-pVXZ-PP, def2 from Rb on, ...)."""
    return ecp_assignment(basis, list(symbols))


def build_molecule(job: Job, max_memory_mb: int = 4000) -> gto.Mole:
    """pyscf Mole of a job (ghosts keep basis, grid and fitting functions).

    Coordinates are handed over in bohr, converted with interkit's CODATA 2018 constant:
    pyscf's own angstrom conversion uses an older edition. Atom order is kept, ghosts
    included, so per-atom results map one to one.
    """
    atoms = []
    for sym, xyz, ghost in zip(job.symbols, job.coordinates, job.ghost):
        bohr = tuple(float(x) * ANGSTROM_TO_BOHR for x in xyz)
        atoms.append((("ghost-" + sym) if ghost else sym, bohr))
    mol = gto.Mole()
    mol.atom = atoms
    mol.unit = "Bohr"
    mol.basis = job.level.basis
    # keyed by element symbol: ghost atoms ("ghost-I") get basis functions and no ECP
    ecp = dict(job.ecp)
    if ecp:
        mol.ecp = ecp
    mol.charge = job.charge
    mol.spin = job.spin
    mol.symmetry = False
    mol.verbose = 0
    mol.max_memory = max_memory_mb
    mol.build(parse_arg=False)
    return mol
