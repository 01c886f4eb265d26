"""Density-fitting integrals of one geometry and their nuclear derivatives, shared by the
counterpoise calculations of a scan point.

The dimer and both ghosted monomers of a point have the same atoms, positions, basis and
fitting basis (ghost atoms keep theirs); only the densities differ. The three-centre
integrals ``(mu nu|P)``, their derivatives and the two-centre metric ``(P|Q)`` are
therefore computed once per point and kept for the next calculation, within a memory
budget (beyond it they are recomputed block by block, with the same numbers).

Derivatives of every energy term that uses fitted integrals reduce to

    dE/dX = sum_{mu nu P} (mu nu|P)^X Z^P_{mu nu} - sum_{PQ} (P|Q)^X Y_PQ

with ``Z^P`` symmetric in ``mu nu`` and ``Y`` symmetric. Only ``(nabla mu nu|P)`` is
evaluated: the derivative on the fitting function follows from translational
invariance, ``(mu nu|nabla P) = -(nabla mu nu|P) - (mu nabla nu|P)``.
"""

from __future__ import annotations

import hashlib
from collections import OrderedDict
from collections.abc import Callable

import numpy as np
import scipy.linalg
from pyscf import gto, lib
from pyscf.gto.moleintor import getints, make_cintopt

#: memory budget (MB) of the integrals kept between calculations, per process
FITTED_CACHE_MB = 1000
#: largest block of derivative integrals evaluated at once, MB
BLOCK_MB = 200

_CACHE: OrderedDict = OrderedDict()


def basis_fingerprint(mol: gto.Mole) -> bytes:
    """Identity of a set of basis functions: per shell its centre, angular momentum,
    exponents and contraction coefficients (the same for a ghost atom and a real one)."""
    h = hashlib.sha256()
    h.update(f"{mol.nao} {mol.cart} {mol.natm}".encode())
    h.update(np.asarray(mol.atom_coords(), dtype=float).tobytes())
    bas, env = mol._bas, mol._env
    h.update(np.ascontiguousarray(bas[:, [gto.ATOM_OF, gto.ANG_OF, gto.NPRIM_OF, gto.NCTR_OF]]).tobytes())
    for nprim, nctr, pexp, pcoeff in bas[:, [gto.NPRIM_OF, gto.NCTR_OF, gto.PTR_EXP, gto.PTR_COEFF]]:
        h.update(env[pexp:pexp + nprim].tobytes())
        h.update(env[pcoeff:pcoeff + nprim * nctr].tobytes())
    return h.digest()


def clear_cache() -> None:
    """Drop every kept set of integrals."""
    _CACHE.clear()


def cached_bytes() -> int:
    """Memory held by the kept integrals, bytes."""
    return sum(entry.nbytes for entry in _CACHE.values())


class FittedIntegrals:
    """Three-centre integrals of a basis and a fitting basis, with derivatives.

    Attributes
    ----------
    mol, auxmol : pyscf Mole
    nao, naux : int
    blocks : list of (int, int, int, int)
        Fitting-shell ranges and the fitting-function ranges they cover.
    metric : array (naux, naux)
        ``(P|Q)``.
    """

    def __init__(self, mol: gto.Mole, auxmol: gto.Mole, keep_derivatives: bool):
        self.mol, self.auxmol = mol, auxmol
        self.nao, self.naux = mol.nao, auxmol.nao
        self._pmol = mol + auxmol
        aux_loc = auxmol.ao_loc
        per_function = 3 * self.nao**2 * 8
        blksize = max(1, int(BLOCK_MB * 1e6 / per_function))
        self.blocks = []
        start = 0
        while start < auxmol.nbas:
            stop = start + 1
            while stop < auxmol.nbas and aux_loc[stop + 1] - aux_loc[start] <= blksize:
                stop += 1
            self.blocks.append((start, stop, int(aux_loc[start]), int(aux_loc[stop])))
            start = stop
        self.metric = auxmol.intor("int2c2e", aosym="s1")
        self.metric_ip1 = auxmol.intor("int2c2e_ip1", comp=3)  # (nabla P|Q)
        self.low = scipy.linalg.cholesky(self.metric, lower=True)  # (P|Q) = L L^T
        self.keep_derivatives = keep_derivatives
        self._ip1: dict = {}
        self.aux_atom = np.empty(self.naux, dtype=int)
        for a, (_, _, p0, p1) in enumerate(auxmol.aoslice_by_atom()):
            self.aux_atom[p0:p1] = a
        self.ao_atom = np.empty(self.nao, dtype=int)
        for a, (_, _, p0, p1) in enumerate(mol.aoslice_by_atom()):
            self.ao_atom[p0:p1] = a

    @property
    def nbytes(self) -> int:
        return (self.metric.nbytes + self.metric_ip1.nbytes + self.low.nbytes
                + sum(a.nbytes for a in self._ip1.values()))

    def _int3c(self, intor: str, aosym: str, block, first_pair: bool = False):
        nbas = self.mol.nbas
        s0, s1 = (0, self.auxmol.nbas) if block is None else block
        shls = (0, 1, 0, 1, nbas + s0, nbas + s1) if first_pair else (0, nbas, 0, nbas, nbas + s0, nbas + s1)
        name = self.mol._add_suffix(intor)
        opt = make_cintopt(self.mol._atm, self.mol._bas, self.mol._env, name)
        return getints(name, self._pmol._atm, self._pmol._bas, self._pmol._env, shls,
                       aosym=aosym, cintopt=opt)

    def to_fitting(self, b: np.ndarray) -> np.ndarray:
        """``L^-T b`` along the first axis: coefficients ``(P|Q)^-1 (Q|..)`` of the
        fitting functions from whitened quantities ``L^-1 (Q|..)``."""
        shape = b.shape
        out = scipy.linalg.solve_triangular(self.low.T, b.reshape(shape[0], -1), lower=False)
        return out.reshape(shape)

    def whiten(self, b: np.ndarray) -> np.ndarray:
        """``L^-1 b`` along the first axis."""
        shape = b.shape
        return scipy.linalg.solve_triangular(self.low, b.reshape(shape[0], -1), lower=True).reshape(shape)

    def whitened_tensor(self, with_df=None) -> np.ndarray:
        """``L^-1 (P|mu nu)``, (naux, nao_pair): the SCF's own fitted tensor when it is that
        (checked on one basis-function pair), otherwise computed here."""
        cderi = getattr(with_df, "_cderi", None)
        if isinstance(cderi, np.ndarray) and cderi.shape == (self.naux, self.nao * (self.nao + 1) // 2):
            probe = self._int3c("int3c2e", "s1", None, first_pair=True)[0, 0]
            if np.allclose(self.low @ cderi[:, 0], probe, rtol=1e-10, atol=1e-12):
                return cderi
        return self.whiten(np.ascontiguousarray(self._int3c("int3c2e", "s2ij", None).T))

    def ip1_block(self, index: int) -> np.ndarray:
        """``(nabla mu nu|P)`` of one block as (3, P, nu, mu), mu carrying the derivative."""
        if index in self._ip1:
            return self._ip1[index]
        s0, s1, _, _ = self.blocks[index]
        raw = self._int3c("int3c2e_ip1", "s1", (s0, s1))  # (3, mu, nu, P)
        out = np.ascontiguousarray(raw.transpose(0, 3, 2, 1))
        if self.keep_derivatives:
            self._ip1[index] = out
        return out

    def derivative(self, z_block: Callable[[int, int], np.ndarray], y: np.ndarray | None) -> np.ndarray:
        """``sum (mu nu|P)^X Z^P - sum (P|Q)^X Y`` for every atom, shape (natm, 3).

        ``z_block(p0, p1)`` returns the symmetric ``Z^P`` of fitting functions p0..p1 as
        (p1-p0, nao, nao); ``y`` is symmetric (naux, naux) or None.
        """
        natm = self.mol.natm
        w_ao = np.zeros((3, self.nao))
        w_aux = np.zeros((3, self.naux))
        for index, (_, _, p0, p1) in enumerate(self.blocks):
            d = self.ip1_block(index)
            z = z_block(p0, p1)
            t = np.einsum("xpnm,pnm->xpm", d, z)
            w_ao += t.sum(axis=1)
            w_aux[:, p0:p1] = t.sum(axis=2)
        grad = np.zeros((natm, 3))
        # basis functions: -2 sum_{mu on A} ; fitting functions: +2 sum_{P on A}
        np.add.at(grad, self.ao_atom, -2.0 * w_ao.T)
        np.add.at(grad, self.aux_atom, 2.0 * w_aux.T)
        if y is not None:
            m = np.einsum("xpq,pq->px", self.metric_ip1, y)
            np.add.at(grad, self.aux_atom, 2.0 * m)
        return grad


def fitted_integrals(mol: gto.Mole, auxmol: gto.Mole) -> FittedIntegrals:
    """The integrals of ``mol``'s basis and ``auxmol``'s fitting basis, from the process
    cache when an earlier calculation of the same point left them there."""
    key = (basis_fingerprint(mol), basis_fingerprint(auxmol))
    entry = _CACHE.get(key)
    if entry is not None:
        _CACHE.move_to_end(key)
        entry.mol, entry.auxmol = mol, auxmol
        return entry
    derivative_bytes = 3 * mol.nao**2 * auxmol.nao * 8
    metric_bytes = 5 * auxmol.nao**2 * 8
    budget = FITTED_CACHE_MB * 1e6
    keep = metric_bytes + derivative_bytes <= budget / 2  # room for a second fitting basis
    entry = FittedIntegrals(mol, auxmol, keep)
    if entry.nbytes + (derivative_bytes if keep else 0) > budget:
        return entry  # nothing kept
    # a new point: older integrals will not be used again
    while _CACHE and cached_bytes() + entry.nbytes + (derivative_bytes if keep else 0) > budget:
        _CACHE.popitem(last=False)
    _CACHE[key] = entry
    while len(_CACHE) > 2:
        _CACHE.popitem(last=False)
    return entry


def unpacked(cderi: np.ndarray, p0: int, p1: int) -> np.ndarray:
    """Rows p0..p1 of a packed (naux, nao_pair) tensor as (p1-p0, nao, nao)."""
    return lib.unpack_tril(np.ascontiguousarray(cderi[p0:p1]))


def right_apply(m: np.ndarray, a: np.ndarray) -> np.ndarray:
    """``m[p] @ a`` for every p, as one matrix product: m (b, k, l), a (l, n) -> (b, k, n)."""
    b, k, _ = m.shape
    return (np.ascontiguousarray(m).reshape(b * k, -1) @ a).reshape(b, k, a.shape[1])


def left_apply(a: np.ndarray, m: np.ndarray) -> np.ndarray:
    """``a @ m[p]`` for every p: a (n, k), m (b, k, l) -> (b, n, l)."""
    return np.matmul(a, m)


# the SCF's fitted three-index tensor L^-1 (P|mu nu) of the last basis and fitting basis
# (process-local): the dimer and both ghosted monomers of a point build the same one
_SCF_TENSOR: dict = {"key": None, "cderi": None}


def share_scf_tensor(mf):
    """Before a density-fitted SCF: give ``mf.with_df`` the fitted tensor an earlier
    calculation of the same basis and fitting basis built (pyscf's ``DF.build`` then
    skips it; the numbers are the same array). Returns what :func:`keep_scf_tensor`
    needs afterwards, or None for a calculation without density fitting."""
    from pyscf.df import addons

    with_df = getattr(mf, "with_df", None)
    if with_df is None or with_df._cderi is not None:
        return None
    auxmol = addons.make_auxmol(mf.mol, with_df.auxbasis)
    key = (basis_fingerprint(mf.mol), basis_fingerprint(auxmol))
    if _SCF_TENSOR["key"] == key:
        with_df._cderi = _SCF_TENSOR["cderi"]
    else:  # another point: free the old tensor before the new one is built
        _SCF_TENSOR.update(key=None, cderi=None)
    return key, auxmol


def keep_scf_tensor(mf, token) -> None:
    """After the SCF: keep its in-memory fitted tensor for the next calculation and give
    ``with_df`` its fitting molecule (the gradient code reads it)."""
    if token is None:
        return
    key, auxmol = token
    with_df = mf.with_df
    if with_df.auxmol is None:
        with_df.auxmol = auxmol
    if isinstance(with_df._cderi, np.ndarray):
        _SCF_TENSOR.update(key=key, cderi=with_df._cderi)


def release_scf_tensor() -> None:
    """Free the kept SCF fitted tensor."""
    _SCF_TENSOR.update(key=None, cderi=None)
