"""Build a pyscf Mole from a job: ghost atoms, basis and def2 effective core potentials."""

from __future__ import annotations

from pyscf import gto

from ..model.geometry import atomic_number
from ..run.plan import Job
from ..units import ANGSTROM_TO_BOHR

#: def2 basis sets use effective core potentials from rubidium (Z = 37) onwards
DEF2_ECP_FIRST_Z = 37


def ecp_for(basis: str, symbols) -> dict[str, str]:
    """ECP assignment a def2 basis needs for the given real-atom symbols."""
    if not basis.lower().startswith("def2-"):
        return {}
    return {s: basis for s in set(symbols) if atomic_number(s) >= DEF2_ECP_FIRST_Z}


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
    real = [s for s, g in zip(job.symbols, job.ghost) if not g]
    ecp = ecp_for(job.level.basis, real)
    if ecp:
        mol.ecp = ecp
    mol.charge = job.charge
    mol.spin = job.spin
    mol.symmetry = False
    mol.verbose = 0
    mol.max_memory = max_memory_mb
    mol.build(parse_arg=False)
    return mol
