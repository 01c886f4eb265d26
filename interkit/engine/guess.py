"""Broken-symmetry initial guess: fragment densities placed in the dimer's AO layout,
with the spin of one fragment flipped (its alpha and beta densities swapped)."""

from __future__ import annotations

from collections.abc import Callable

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
