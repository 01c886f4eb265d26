"""A pyscf NumInt that keeps atomic-orbital values on the DFT grid between SCF cycles.

pyscf evaluates every basis function (and its gradient) on every grid point in every
SCF cycle; for the small and medium dimers of interaction-energy scans that evaluation
is about a third of the exchange-correlation cost. When the values fit in a memory
budget, this class computes them in the first cycle and reuses them afterwards. The
numbers are unchanged (tests compare against plain pyscf to 1e-10 hartree).

The cached blocks live in buffers that are kept per process and reused by the next
calculation, so a worker running a scan touches fresh memory only once.
"""

from __future__ import annotations

import numpy as np
from pyscf.dft import numint

#: per-calculation memory budget for cached orbital values, MB
DEFAULT_CACHE_MB = 1200
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


def _pooled_copy(ao: np.ndarray, index: int) -> np.ndarray | None:
    """Copy into pooled aligned memory with the same strides (pyscf's kernels expect
    both); None if the array is not a dense block of memory."""
    span = sum((n - 1) * abs(st) for n, st in zip(ao.shape, ao.strides)) + ao.itemsize
    if ao.size == 0 or span != ao.nbytes or any(st < 0 for st in ao.strides):
        return None
    out = np.ndarray(ao.shape, dtype=ao.dtype, buffer=_pool_buffer(index, ao.size), strides=ao.strides)
    np.copyto(out, ao)
    return out


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
        coords = grids.coords
        signature = (deriv, nao, blksize, non0tab is None)
        cached = _POOL.get("cache")
        if (self.max_cache_mb > 0 and cached is not None and coords is not None and cached[0] is coords
                and cached[1] == signature and cached[2] == _basis_fingerprint(mol)):
            yield from cached[3]
            return
        blocks: list | None = [] if self.max_cache_mb > 0 else None
        if blocks is not None:
            _POOL["cache"] = None  # its buffers are about to be overwritten
        size = 0.0
        limit = self.max_cache_mb * 1e6
        for ao, mask, weight, pts in super().block_loop(mol, grids, nao, deriv, max_memory, non0tab,
                                                         blksize, buf):
            if blocks is not None:
                size += ao.nbytes
                copy = _pooled_copy(ao, len(blocks)) if size <= limit else None
                if copy is None:
                    blocks = None
                else:
                    blocks.append((copy, mask, weight, pts))
            yield ao, mask, weight, pts
        if blocks is not None and grids.coords is coords and coords is not None:
            _POOL["cache"] = (coords, signature, _basis_fingerprint(mol), blocks)


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
