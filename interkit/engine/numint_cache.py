"""A pyscf NumInt that keeps atomic-orbital values on the DFT grid between SCF cycles.

pyscf evaluates every basis function (and its gradient) on every grid point in every
SCF cycle; for the small and medium dimers of interaction-energy scans that evaluation
is about a third of the exchange-correlation cost. This class evaluates the values of
as many grid batches as a memory budget holds straight into kept memory in the first
cycle and replays them afterwards; batches beyond the budget are evaluated in every
cycle, as pyscf does. The numbers are unchanged (tests compare against plain pyscf to
1e-10 hartree).

The cached blocks live in buffers that are kept per process and reused by the next
calculation, so a worker running a scan touches fresh memory only once.
"""

from __future__ import annotations

import numpy as np
from pyscf import lib
from pyscf.dft import numint
from pyscf.dft.gen_grid import BLKSIZE

#: per-calculation memory budget for cached orbital values, MB
DEFAULT_CACHE_MB = 4000
#: the budget calculations of this process start with (set_cache_budget)
_BUDGET = {"mb": float(DEFAULT_CACHE_MB)}


def set_cache_budget(mb: float) -> float:
    """Set this process's budget (MB) for cached orbital values of new calculations;
    return the previous one. The cache only saves time: numbers do not depend on it."""
    old = _BUDGET["mb"]
    _BUDGET["mb"] = max(0.0, float(mb))
    return old


def cache_budget() -> float:
    """This process's budget (MB) for cached orbital values."""
    return _BUDGET["mb"]

# process-wide pool of aligned buffers and the one cache that currently uses them:
# (grid coordinates array, block signature, basis fingerprint, blocks)
_POOL: dict = {"cache": None, "buffers": []}


def _pool_buffer(index: int, size: int) -> np.ndarray:
    buffers = _POOL["buffers"]
    if index < len(buffers) and buffers[index].size >= size:
        return buffers[index][:size]
    fresh = numint._empty_aligned(size)
    if index < len(buffers):
        buffers[index] = fresh
    else:
        buffers.append(fresh)
    return fresh


def release_pool() -> None:
    """Free the process-wide buffers and the cache using them."""
    _POOL["cache"] = None
    _POOL["buffers"] = []


def _basis_fingerprint(mol) -> bytes:
    """Identity of the basis functions: per shell its centre, angular momentum, exponents
    and contraction coefficients (the same for a ghost atom and a real one)."""
    import hashlib

    h = hashlib.sha256()
    h.update(f"{mol.nao} {mol.cart}".encode())
    for i in range(mol.nbas):
        h.update(np.asarray(mol.atom_coord(mol.bas_atom(i))).tobytes())
        h.update(np.int64(mol.bas_angular(i)).tobytes())
        h.update(np.asarray(mol.bas_exp(i)).tobytes())
        h.update(np.asarray(mol.bas_ctr_coeff(i)).tobytes())
    return h.digest()


class CachingNumInt(numint.NumInt):
    """NumInt whose ``block_loop`` replays stored AO blocks for the same grid and basis.

    The stored blocks are shared by every calculation in the process that uses the same
    grid object and the same basis functions: the dimer and both ghosted monomers of a
    scan point (ghost atoms keep their basis functions and grids).
    """

    def __init__(self, max_cache_mb: float | None = None):
        super().__init__()
        self.max_cache_mb = _BUDGET["mb"] if max_cache_mb is None else max_cache_mb

    @property
    def _ao_cache(self):
        return _POOL.get("cache")

    @_ao_cache.setter
    def _ao_cache(self, value) -> None:
        _POOL["cache"] = value

    def block_loop(self, mol, grids, nao=None, deriv=0, max_memory=2000, non0tab=None, blksize=None,
                   buf=None):
        """pyscf's block loop, with the first blocks (as many as the budget holds) kept
        and replayed for the same grid and basis; the rest are evaluated as pyscf does."""
        if grids.coords is None:
            grids.build(with_non0tab=True)
        if nao is None:
            nao = mol.nao
        default_mask = non0tab is None  # in the cache signature, as before: a caller's own mask is not replayed
        coords = grids.coords
        ngrids = coords.shape[0]
        comp = (deriv + 1) * (deriv + 2) * (deriv + 3) // 6
        if blksize is None:  # pyscf's choice of the batch size
            blksize = int(max_memory * 1e6 / ((comp + 1) * nao * 8 * BLKSIZE))
            blksize = max(4, min(blksize, ngrids // BLKSIZE + 1, 1200)) * BLKSIZE
        if non0tab is None and mol is grids.mol:
            non0tab = grids.non0tab
        if non0tab is None:
            non0tab = np.empty(((ngrids + BLKSIZE - 1) // BLKSIZE, mol.nbas), dtype=np.uint8)
            non0tab[:] = numint.NBINS + 1
        signature = (deriv, nao, blksize, ngrids, default_mask)
        fingerprint = _basis_fingerprint(mol) if self.max_cache_mb > 0 else b""
        cached = _POOL.get("cache")
        kept: list = []
        if (self.max_cache_mb > 0 and cached is not None and cached[0] is coords
                and cached[1] == signature and cached[2] == fingerprint):
            kept = cached[3]
            yield from kept
            start = len(kept) * blksize
            store = False
        else:
            start = 0
            store = self.max_cache_mb > 0
            if store:
                _POOL["cache"] = None  # its buffers are about to be overwritten
        allow_sparse = ngrids % numint.ALIGNMENT_UNIT == 0 and nao > numint.SWITCH_SIZE
        limit = self.max_cache_mb * 1e6
        used = 0.0
        blocks: list = []
        full = False
        for ip0, ip1 in lib.prange(start, ngrids, blksize):
            size = comp * (ip1 - ip0) * nao
            keep = store and not full and used + size * 8 <= limit
            if keep:  # evaluated straight into kept memory
                out = _pool_buffer(len(blocks), size)
                used += size * 8
            else:
                full = True
                if buf is None:
                    buf = numint._empty_aligned(comp * blksize * nao)
                out = buf
            ao = self.eval_ao(mol, coords[ip0:ip1], deriv=deriv, non0tab=non0tab[ip0 // BLKSIZE:],
                              cutoff=grids.cutoff, out=out)
            mask = non0tab[ip0 // BLKSIZE:]
            if not allow_sparse and not numint._sparse_enough(mask):
                mask = None  # a dense block: pyscf's dense kernels
            block = (ao, mask, grids.weights[ip0:ip1], coords[ip0:ip1])
            if keep:
                blocks.append(block)
            yield block
        if store and blocks and grids.coords is coords:
            _POOL["cache"] = (coords, signature, fingerprint, blocks)


#: memory budget (MB) for orbital values on the atom grids of a DFT gradient, kept for
#: the next calculation at the same point (values beyond it are recomputed)
GRID_RESPONSE_CACHE_MB = 1000

# the one set of atom-grid data currently kept: grid coordinates array (identity),
# grid-atom positions and charges, basis fingerprint, derivative order, per-atom entries
_RESPONSE: dict = {"key": None, "atoms": [], "bytes": 0}


def release_response_cache() -> None:
    """Free the kept atom-grid data of DFT gradients."""
    _RESPONSE.update(key=None, atoms=[], bytes=0)


def response_cache_bytes() -> int:
    """Memory held by the kept atom-grid data, bytes."""
    return sum(sum(a.nbytes for a in entry if isinstance(a, np.ndarray)) for entry in _RESPONSE["atoms"])


def grid_response_blocks(ni, mol, grids, deriv: int):
    """Per grid atom: (coords, weights, weight derivatives (natm, 3, n), orbital values).

    The weights and their derivatives depend only on the grid; the orbital values only
    on the basis functions, so the dimer and both ghosted monomers of a point (one grid
    object, one set of basis functions) share them. The values are those of pyscf's
    ``grids_response_cc`` and ``eval_ao``.
    """
    from pyscf.dft import gen_grid
    from pyscf.grad.rks import grids_response_cc

    gmol = grids.mol
    key = (np.asarray(gmol.atom_coords()).tobytes(), np.asarray(gmol.atom_charges()).tobytes(),
           _basis_fingerprint(mol), deriv)
    same = _RESPONSE["key"] is not None and _RESPONSE["key"][0] is grids.coords and _RESPONSE["key"][1:] == key
    if same and grids.coords is not None:
        atoms = _RESPONSE["atoms"]
        for coords, weight, weight1, ao in atoms:
            if ao is None:
                mask = gen_grid.make_mask(mol, coords)
                ao = ni.eval_ao(mol, coords, deriv=deriv, non0tab=mask, cutoff=grids.cutoff)
            yield coords, weight, weight1, ao
        return
    release_response_cache()
    limit = GRID_RESPONSE_CACHE_MB * 1e6
    npts = 0 if grids.weights is None else grids.weights.size
    used = gmol.natm * 3 * npts * 8  # weight derivatives, about
    store = grids.coords is not None and used <= limit / 2
    atoms: list = []
    for coords, weight, weight1 in grids_response_cc(grids):
        mask = gen_grid.make_mask(mol, coords)
        ao = ni.eval_ao(mol, coords, deriv=deriv, non0tab=mask, cutoff=grids.cutoff)
        keep = store and used + ao.nbytes <= limit
        if keep:
            used += ao.nbytes
        if store:
            atoms.append((coords, weight, weight1, ao if keep else None))
        yield coords, weight, weight1, ao
    if store:
        _RESPONSE.update(key=(grids.coords,) + key, atoms=atoms, bytes=used)
