"""Molecules, bases and cost of a SAPT0 calculation (:mod:`interkit.engine.sapt0`).

The dimer and its two monomers in the dimer-centred basis (ghost atoms), the orbital
and fitting bases ('jun-' bases built from pyscf's aug-cc-pVXZ and cc-pVXZ), the
nuclear repulsion between the monomers, and the sizes and memory of a calculation
(:func:`estimate_sapt0_cost`), known before anything runs.
The compute core prints nothing and writes no files.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from pyscf import df, gto

from ..errors import InputError, NotAvailableError
from ..model.geometry import Dimer
from ..units import ANGSTROM_TO_BOHR
from .sapt0_scf import CPHF_MAX_CYCLE

_BYTES = 8.0
_MB = 1024.0 ** 2


# ---------------------------------------------------------------------------- basis sets
def _jun_basis_for(symbol: str, stem: str) -> object:
    """One element of a 'jun-' calendar basis (Papajak, Truhlar, JCTC 7, 3027 (2011)).

    jun-cc-pVXZ is aug-cc-pVXZ without diffuse functions on H and He and without the
    diffuse shell of highest angular momentum on heavier atoms.
    """
    if symbol in ("H", "He"):
        return gto.basis.load(stem, symbol)
    aug = gto.basis.load("aug-" + stem, symbol)
    plain = gto.basis.load(stem, symbol)
    lmax = max(shell[0] for shell in aug)
    n_plain = sum(1 for shell in plain if shell[0] == lmax)
    out, seen = [], 0
    for shell in aug:
        if shell[0] == lmax:
            seen += 1
            if seen > n_plain:
                continue
        out.append(shell)
    return out


def _fit_basis_for(symbol: str, stem: str, kind: str) -> object:
    """Fitting basis for a 'jun-' basis: aug fit on heavy atoms, plain fit on H/He."""
    name = (stem if symbol in ("H", "He") else "aug-" + stem) + "-" + kind
    return gto.basis.load(name, symbol)


def _basis_spec(basis: str, symbols, kind: str | None = None):
    """pyscf basis input (name or per-element dict) for an orbital or fitting basis."""
    low = basis.lower()
    if low.startswith("jun-"):
        stem = low[4:]
        elements = sorted(set(symbols))
        try:
            if kind is None:
                return {s: _jun_basis_for(s, stem) for s in elements}
            return {s: _fit_basis_for(s, stem, kind) for s in elements}
        except Exception as exc:  # pyscf raises several types for unknown bases
            raise InputError(f"basis: {basis!r} cannot be built for elements {elements}") from exc
    return basis


# ------------------------------------------------------------------------- molecules
@dataclass
class _Molecules:
    dimer: gto.Mole
    a: gto.Mole
    b: gto.Mole
    jk_aux: object
    ri_aux: object


def _check_closed_shell(dimer: Dimer) -> None:
    for label, mult in zip("AB", dimer.multiplicities):
        if mult != 1:
            raise NotAvailableError(
                f"sapt0: fragment {label} is open-shell (multiplicity {mult}); "
                "SAPT0 is closed-shell only"
            )


def _make_mol(dimer: Dimer, basis_input, real: set[int], charge: int,
              max_memory_mb: float) -> gto.Mole:
    atoms = []
    for i, (sym, xyz) in enumerate(zip(dimer.symbols, dimer.coordinates)):
        bohr = tuple(float(x) * ANGSTROM_TO_BOHR for x in xyz)
        atoms.append(((sym if i in real else "ghost-" + sym), bohr))
    mol = gto.Mole()
    mol.atom = atoms
    mol.unit = "Bohr"
    if isinstance(basis_input, dict):
        # ghost atoms take the basis of their element
        basis_input = dict(basis_input)
        basis_input.update({"ghost-" + s: b for s, b in list(basis_input.items())})
    mol.basis = basis_input
    mol.charge = charge
    mol.spin = 0
    mol.symmetry = False
    mol.verbose = 0
    mol.max_memory = float(max_memory_mb)
    try:
        mol.build(parse_arg=False)
    except RuntimeError as exc:
        raise InputError(f"basis: {exc}".splitlines()[0]) from exc
    return mol


def _aux_input(basis: str, symbols, given: str | None, kind: str, mol: gto.Mole):
    if given is not None:
        spec = given
    elif basis.lower().startswith("jun-"):
        spec = _basis_spec(basis, symbols, kind)
    else:
        spec = df.make_auxbasis(mol, mp2fit=(kind == "ri"))
    if isinstance(spec, dict):
        spec = dict(spec)
        spec.update({"ghost-" + s: b for s, b in list(spec.items()) if not s.startswith("ghost")})
    return spec


def _build_molecules(dimer: Dimer, basis: str, jk_auxbasis: str | None,
                     ri_auxbasis: str | None, max_memory_mb: float) -> _Molecules:
    _check_closed_shell(dimer)
    if not isinstance(basis, str) or not basis.strip():
        raise InputError(f"basis: {basis!r} is not a basis-set name")
    spec = _basis_spec(basis, dimer.symbols)
    everything = set(range(dimer.natoms))
    mol_ab = _make_mol(dimer, spec, everything, sum(dimer.charges), max_memory_mb)
    mol_a = _make_mol(dimer, spec, set(dimer.fragment_a), dimer.charges[0], max_memory_mb)
    mol_b = _make_mol(dimer, spec, set(dimer.fragment_b), dimer.charges[1], max_memory_mb)
    jk = _aux_input(basis, dimer.symbols, jk_auxbasis, "jkfit", mol_ab)
    ri = _aux_input(basis, dimer.symbols, ri_auxbasis, "ri", mol_ab)
    return _Molecules(mol_ab, mol_a, mol_b, jk, ri)


def _n_aux(mol: gto.Mole, auxbasis) -> int:
    try:
        return int(df.addons.make_auxmol(mol, auxbasis).nao_nr())
    except Exception as exc:  # unknown fitting basis names raise several types
        raise InputError(f"auxbasis: {auxbasis!r} cannot be built for this dimer") from exc


# ------------------------------------------------------------------------- cost model
def _cost(mols: _Molecules) -> dict:
    nbas = int(mols.dimer.nao_nr())
    naux_jk = _n_aux(mols.dimer, mols.jk_aux)
    naux_ri = _n_aux(mols.dimer, mols.ri_aux)
    occ_a = mols.a.nelectron // 2
    occ_b = mols.b.nelectron // 2
    vir_a, vir_b = nbas - occ_a, nbas - occ_b
    tensors = {
        # JK fitting tensor held unpacked (naux, nbas, nbas) plus the packed copy of pyscf
        "JK three-index": naux_jk * nbas * nbas * _BYTES * 1.5 / _MB,
        # RI half-transformed factors (naux, occ, nbas) of both monomers and (ar|Q), (bs|Q)
        "RI three-index": naux_ri * (occ_a + occ_b) * nbas * _BYTES * 3 / _MB,
        # dispersion integrals, amplitudes and one exchange-dispersion intermediate
        "dispersion amplitude": 3 * occ_a * vir_a * occ_b * vir_b * _BYTES / _MB,
    }
    largest = max(tensors, key=tensors.get)
    flops = (naux_ri * (occ_a * vir_a * occ_b * vir_b) * 5.0
             + naux_jk * nbas * nbas * (occ_a + occ_b) * 2.0 * (CPHF_MAX_CYCLE // 10 + 10))
    return {
        "nbasis": nbas,
        "naux_jk": naux_jk,
        "naux_ri": naux_ri,
        "nocc_a": occ_a,
        "nocc_b": occ_b,
        "nvir_a": vir_a,
        "nvir_b": vir_b,
        "tensor_mb": tensors,
        "largest_tensor": largest,
        "peak_memory_mb": float(tensors[largest]),
        "flops_estimate": float(flops),
    }


def estimate_sapt0_cost(dimer: Dimer, basis: str = "jun-cc-pvdz", *,
                        jk_auxbasis: str | None = None,
                        ri_auxbasis: str | None = None) -> dict:
    """Sizes and memory of a SAPT0 calculation, without running it.

    Parameters
    ----------
    dimer : Dimer
        Closed-shell fragments (geometry in angstrom).
    basis : str
        Orbital basis (``'jun-cc-pvdz'`` is built from pyscf's aug-cc-pVDZ/cc-pVDZ).
    jk_auxbasis, ri_auxbasis : str, optional
        Fitting bases for Coulomb/exchange and for dispersion; defaults as in
        :func:`sapt0_terms`.

    Returns
    -------
    dict
        ``nbasis``, ``naux_jk``, ``naux_ri``, ``nocc_a``, ``nocc_b``, ``nvir_a``,
        ``nvir_b`` (counts), ``tensor_mb`` (MB per large tensor), ``largest_tensor``
        (its name), ``peak_memory_mb`` (MB of the largest tensor) and
        ``flops_estimate`` (rough count of floating-point operations).
    """
    mols = _build_molecules(dimer, basis, jk_auxbasis, ri_auxbasis, 4000.0)
    return _cost(mols)


def _nuclear_repulsion_between(mol_a: gto.Mole, mol_b: gto.Mole) -> float:
    za, zb = mol_a.atom_charges(), mol_b.atom_charges()
    ra, rb = mol_a.atom_coords(), mol_b.atom_coords()
    total = 0.0
    for i in np.nonzero(za)[0]:
        for j in np.nonzero(zb)[0]:
            total += za[i] * zb[j] / np.linalg.norm(ra[i] - rb[j])
    return float(total)
