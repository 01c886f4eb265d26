"""Broken-symmetry initial guess: fragment densities placed in the dimer's AO layout,
with the spin of one fragment flipped (its alpha and beta densities swapped)."""

from __future__ import annotations

from collections.abc import Callable
from functools import lru_cache

import numpy as np

from ..model.job import Job
from .molecule import build_molecule

#: SCF energy threshold (hartree) of the fragment calculations behind the guess: the
#: guess only selects the solution; the dimer SCF then converges to ``job.conv_tol``
FRAGMENT_GUESS_CONV_TOL_HARTREE = 1e-7


def fragment_job(job: Job, atoms, charge: int, spin: int) -> Job:
    """One fragment of ``job`` alone in its own basis (same level), 2S = ``spin``."""
    idx = sorted(int(i) for i in atoms)
    return Job(symbols=tuple(job.symbols[i] for i in idx),
               coordinates=tuple(job.coordinates[i] for i in idx),
               ghost=(False,) * len(idx), charge=int(charge), spin=int(spin),
               level=job.level, conv_tol=FRAGMENT_GUESS_CONV_TOL_HARTREE)


def broken_symmetry_guess(job: Job, mol, make_scf: Callable) -> np.ndarray:
    """(2, nao, nao) alpha/beta density of ``mol`` (the dimer of a broken-symmetry job).

    Each fragment is an unrestricted SCF (``make_scf(fragment_mol)``, the job's method:
    UHF or UKS) alone in its own basis with 2S = |fragment_spins|; its densities fill
    the fragment's atom blocks of the dimer (the basis functions of an atom do not
    depend on its neighbours), alpha and beta swapped where ``fragment_spins`` < 0.
    Inter-fragment blocks are zero.
    """
    if len(job.fragment_spins) != 2 or len(job.fragment_charges) != 2 or not job.fragment_a:
        raise ValueError("broken-symmetry guess: the job lacks fragment_a, fragment_charges or fragment_spins")
    in_a = set(job.fragment_a)
    frags = ([i for i in range(len(job.symbols)) if i in in_a],
             [i for i in range(len(job.symbols)) if i not in in_a])
    slices = mol.aoslice_by_atom()
    nao = mol.nao
    dm = np.zeros((2, nao, nao))
    for atoms, charge, signed in zip(frags, job.fragment_charges, job.fragment_spins):
        fmol = build_molecule(fragment_job(job, atoms, charge, abs(signed)))
        fmf = make_scf(fmol)
        fmf.kernel()
        fdm = np.asarray(fmf.make_rdm1())
        if fdm.ndim == 2:  # a closed-shell fragment: half the density in each spin
            fdm = np.stack([fdm / 2, fdm / 2])
        if signed < 0:
            fdm = fdm[::-1]
        fslices = fmol.aoslice_by_atom()
        rows = np.concatenate([np.arange(slices[i][2], slices[i][3]) for i in atoms])
        frows = np.concatenate([np.arange(fslices[k][2], fslices[k][3]) for k in range(len(atoms))])
        for s in range(2):
            dm[s][np.ix_(rows, rows)] = fdm[s][np.ix_(frows, frows)]
    return dm


def _atom_ao_counts(job: Job) -> list[int]:
    """Number of basis functions on each atom of ``job`` (a ghost atom has the same as a
    real one)."""
    return _ao_counts(tuple(job.symbols), job.level.basis, tuple(sorted(dict(job.ecp).items())))


@lru_cache(maxsize=64)
def _ao_counts(symbols: tuple, basis: str, ecp: tuple) -> list[int]:
    from pyscf import gto

    mol = gto.Mole()
    mol.atom = [(s, (0.0, 0.0, 3.0 * i)) for i, s in enumerate(symbols)]
    mol.basis = basis
    if ecp:
        mol.ecp = dict(ecp)
    mol.spin = sum(gto.charge(s) for s in symbols) % 2
    mol.verbose = 0
    mol.build(parse_arg=False)
    return [int(b - a) for _, _, a, b in mol.aoslice_by_atom()]


#: largest difference (angstrom) between the displacements of the atoms of a monomer for
#: its density to be carried over by translation
TRANSLATION_TOLERANCE_ANGSTROM = 1e-6


def embed_density(source: Job, density, target: Job):
    """The converged density of ``source`` (a monomer in its own basis) in the AO layout of
    ``target`` (the same monomer with ghost atoms), or None when they do not match.

    The monomer may sit elsewhere (own-basis monomers are centred at the origin): a
    density in an atom-centred basis is unchanged by a rigid translation, so each atom's
    block moves to the same atom's block in ``target``; rows and columns of the ghost
    atoms are zero. Only a translation is accepted (a rotated monomer is refused), and
    charge, spin, level and the elements must agree.
    """
    real = [i for i, g in enumerate(target.ghost) if not g]
    if any(source.ghost) or len(real) != len(source.symbols) or source.level != target.level \
            or (source.charge, source.spin) != (target.charge, target.spin) \
            or tuple(target.symbols[i] for i in real) != tuple(source.symbols):
        return None
    shift = np.asarray(target.coordinates)[real] - np.asarray(source.coordinates)
    if np.ptp(shift, axis=0).max(initial=0.0) > TRANSLATION_TOLERANCE_ANGSTROM:
        return None
    counts_t = _atom_ao_counts(target)
    start_t = np.concatenate([[0], np.cumsum(counts_t)])
    rows = np.concatenate([np.arange(start_t[i], start_t[i + 1]) for i in real])
    dm = np.asarray(density)
    if dm.shape[-1] != len(rows):
        return None
    out = np.zeros(dm.shape[:-2] + (int(start_t[-1]),) * 2)
    out[..., rows[:, None], rows[None, :]] = dm
    return out
