"""Size and memory estimates of the calculations of a level, before anything runs.

The estimate builds the dimer's pyscf molecule and fitting bases (basis-set parsing
only: no integrals, no SCF) and counts basis functions, fitting functions and occupied
and virtual orbitals. From these it sizes the large arrays each step holds, in MB
(8-byte floats):

* SCF: the fitted three-index tensor ``(P|mu nu)`` (packed pairs), or the four-index
  integrals (8-fold symmetric) when the SCF is not fitted and they fit in pyscf's
  in-memory budget; DFT: orbital values on the grid, as far as they are kept, and
  pyscf's work arrays of one block of grid points (its block size grows with the
  memory budget, up to ``GRID_BLOCK_CAP`` blocks of ``BLKSIZE`` points);
* MP2: the fitted ``(ia|P)`` tensor, or ``(ia|jb)`` with exact integrals;
* CCSD(T): the ``(ab|cd)`` and ``(ia|bc)`` integrals and the amplitudes with their
  iteration copies;
* forces: fitted-integral derivatives, the MP2 gradient's orbital-pair tensors, or
  the exact MP2 gradient's amplitudes and half-transformed two-particle density.

The peak is the sum of the tensors (an upper bound: not all live at once).
Unrestricted calculations count alpha and beta (and mixed-spin) blocks.
"""

from __future__ import annotations

from functools import lru_cache

#: bytes per float and per MB
_BYTES = 8
_MB = 1e6
#: pyscf's in-memory budget of each calculation (engine.molecule.build_molecule), MB:
#: four-index integrals above it are recomputed on the fly (direct SCF), not stored
PYSCF_MAX_MEMORY_MB = 4000.0
#: pyscf's CCSD iteration keeps about this many copies of the doubles amplitudes
#: (amplitudes, residual, DIIS vectors held in memory)
CCSD_AMPLITUDE_COPIES = 4
#: most pyscf grid blocks (of ``pyscf.dft.gen_grid.BLKSIZE`` points) in one batch of its
#: exchange-correlation loop (``NumInt.block_loop``); within the memory budget of
#: ``PYSCF_MAX_MEMORY_MB`` the batch is this cap up to about 1000 basis functions (an upper
#: bound beyond, where pyscf shrinks the batch to fit its budget)
GRID_BLOCK_CAP = 1200


def _mb(n: float) -> float:
    return float(n) * _BYTES / _MB


def _aux_name(auxbasis) -> str:
    names = set()
    for v in (auxbasis.values() if isinstance(auxbasis, dict) else [auxbasis]):
        names.add(v if isinstance(v, str) else "even-tempered (generated)")
    return ", ".join(sorted(names))


def _n_aux(mol, auxbasis) -> int:
    from pyscf import df

    return int(df.addons.make_auxmol(mol, auxbasis).nao_nr())


def _grid_points(mol, level) -> int:
    from pyscf import dft

    from .energy import GRID_PRUNE_FUNCTIONS

    grids = dft.gen_grid.Grids(mol)
    atom_grids = grids.gen_atomic_grids(mol, level=level.grid_level, prune=GRID_PRUNE_FUNCTIONS[level.grid_pruning])
    return int(sum(len(atom_grids[mol.atom_symbol(i)][1]) for i in range(mol.natm)))


def _build(symbols, coordinates, charge, spin, basis, ecp):
    from pyscf import gto

    from ..units import ANGSTROM_TO_BOHR

    mol = gto.Mole()
    mol.atom = [(s, tuple(float(x) * ANGSTROM_TO_BOHR for x in xyz)) for s, xyz in zip(symbols, coordinates)]
    mol.unit = "Bohr"
    mol.basis = basis
    if ecp:
        mol.ecp = dict(ecp)
    mol.charge, mol.spin, mol.verbose = charge, spin, 0
    mol.build(parse_arg=False)
    return mol


def estimate_level_cost(level, symbols, coordinates, charge: int, spin: int, forces: bool) -> dict:
    """Sizes and memory of the largest calculation of a level: the dimer in its basis.

    Parameters
    ----------
    level : LevelOfTheory
    symbols, coordinates
        The dimer's elements and positions (angstrom).
    charge, spin : int
        Net charge and number of unpaired electrons (2S) of the dimer.
    forces : bool
        Whether the level's calculations include analytic gradients.

    Returns
    -------
    dict
        ``nbasis``, ``naux_jk``, ``naux_ri`` (0 when not fitted), ``nocc``, ``nvir``
        (active occupied and virtual orbitals, alpha spin), ``ncore`` (frozen),
        ``ngrid`` (DFT grid points, else 0), ``jk_auxbasis``/``ri_auxbasis`` (names
        of the fitting bases used, or ''), ``tensor_mb`` (MB per large tensor),
        ``largest_tensor`` and ``peak_memory_mb`` (MB, sum of the tensors).
    """
    from pyscf import df
    from pyscf.data import elements

    from ..model.levels import ecp_assignment
    from .fitted_integrals import BLOCK_MB, FITTED_CACHE_MB
    from .mp2_gradient import RESPONSE_MEMORY_MB
    from .numint_cache import DEFAULT_CACHE_MB, GRID_RESPONSE_CACHE_MB

    ecp = ecp_assignment(level.basis, symbols)
    mol = _build(symbols, coordinates, charge, spin, level.basis, ecp)
    nao = int(mol.nao_nr())
    nalpha, _ = mol.nelec
    ncore = int(elements.chemcore(mol)) if level.frozen_core else 0
    nocc = int(nalpha) - ncore
    nvir = nao - int(nalpha)
    unrestricted = spin != 0
    spin_blocks = 3 if unrestricted else 1  # alpha-alpha, alpha-beta, beta-beta
    tensors: dict[str, float] = {}

    naux_jk = naux_ri = 0
    jk_name = ri_name = ""
    if level.scf_fitted:
        jk = level.jk_auxbasis or df.addons.make_auxbasis(mol)
        jk_name = level.jk_auxbasis or _aux_name(jk)
        naux_jk = _n_aux(mol, jk)
        tensors["SCF three-index (P|mu nu)"] = _mb(naux_jk * nao * (nao + 1) / 2)
    else:
        eri = _mb(nao**4 / 8)
        if eri <= PYSCF_MAX_MEMORY_MB:
            tensors["four-index integrals (mu nu|la si)"] = eri
    tensors["SCF matrices (density, Fock, orbitals, DIIS)"] = _mb(12 * (2 if unrestricted else 1) * nao**2)
    ngrid = 0
    if level.method == "dft":
        ngrid = _grid_points(mol, level)
        ncomp = 4  # orbital values and first derivatives (GGA); LDA needs fewer
        tensors["DFT orbital values on the grid"] = min(_mb(ngrid * nao * ncomp), DEFAULT_CACHE_MB)
        from pyscf.dft.gen_grid import BLKSIZE

        # one batch of orbital values and derivatives plus pyscf's weighted copy of it
        tensors["DFT grid-batch work arrays"] = _mb((ncomp + 1) * min(ngrid, GRID_BLOCK_CAP * BLKSIZE) * nao)
        if forces:
            tensors["DFT grid response (second derivatives)"] = min(_mb(ngrid * nao * 10), GRID_RESPONSE_CACHE_MB)
    if forces and level.scf_fitted:
        derivative = _mb(3 * nao**2 * naux_jk)
        tensors["fitted-integral derivatives (nabla mu nu|P)"] = (
            derivative if derivative <= FITTED_CACHE_MB / 2 else float(BLOCK_MB))

    o, v = nocc, nvir
    if level.method in ("mp2", "scs-mp2"):
        if level.correlation_fitting:
            if level.ri_auxbasis or not level.scf_fitted:
                ri = level.ri_auxbasis or df.addons.make_auxbasis(mol, mp2fit=True)
                ri_name = level.ri_auxbasis or _aux_name(ri)
                naux_ri = _n_aux(mol, ri)
            else:
                naux_ri, ri_name = naux_jk, jk_name
            tensors["MP2 three-index (ia|P)"] = _mb((2 if unrestricted else 1) * o * v * naux_ri)
            if forces:
                nmo = nao
                pair = _mb(naux_ri * (nmo * nmo + v * v))
                if pair <= RESPONSE_MEMORY_MB:
                    tensors["MP2 gradient orbital-pair tensor (P|pq)"] = pair
                tensors["MP2 gradient (ia|P) copies and G_ia^P"] = _mb(3 * o * v * naux_ri)
        else:
            tensors["MP2 integrals (ia|jb)"] = _mb(spin_blocks * o * o * v * v)
            if forces:
                tensors["MP2 gradient amplitudes and densities"] = _mb(spin_blocks * 3 * o * o * v * v)
                tensors["MP2 gradient half-transformed density"] = _mb(spin_blocks * o * nao**3)
    elif level.method == "ccsd(t)":
        tensors["CCSD integrals (ab|cd)"] = _mb(spin_blocks * (v * (v + 1) / 2) ** 2)
        tensors["CCSD integrals (ia|bc)"] = _mb(spin_blocks * o * v * v * (v + 1) / 2)
        tensors["CCSD amplitudes T_ij^ab"] = _mb(spin_blocks * CCSD_AMPLITUDE_COPIES * o * o * v * v)
    largest = max(tensors, key=tensors.get)
    return {
        "nbasis": nao,
        "naux_jk": int(naux_jk),
        "naux_ri": int(naux_ri),
        "nocc": int(nocc),
        "nvir": int(nvir),
        "ncore": int(ncore),
        "ngrid": int(ngrid),
        "jk_auxbasis": jk_name,
        "ri_auxbasis": ri_name,
        "ecp": dict(ecp),
        "tensor_mb": tensors,
        "largest_tensor": largest,
        "peak_memory_mb": float(sum(tensors.values())),
    }


@lru_cache(maxsize=64)
def _cached(level, symbols, coordinates, charge, spin, forces) -> dict:
    return estimate_level_cost(level, symbols, coordinates, charge, spin, forces)


def scan_cost(spec) -> dict[str, dict]:
    """Estimate of every level of a spec (by level label), for the starting dimer (every
    point has the same atoms, so the same sizes)."""
    from ..model.job import force_method

    d = spec.dimer
    coords = tuple(tuple(float(x) for x in row) for row in d.coordinates)
    out = {}
    for lv in spec.levels:
        # numerical forces are energies at displaced geometries: no gradient tensors
        analytic = bool(spec.forces) and force_method(lv).startswith("analytic")
        out[lv.label] = dict(_cached(lv, tuple(d.symbols), coords, int(sum(d.charges)),
                                     int(sum(d.spins)), analytic))
    return out


def check_resources(spec) -> dict[str, dict]:
    """Estimate every level of ``spec`` and raise ResourceError if one calculation would
    exceed ``spec.memory_limit_mb``. Returns the estimates (see :func:`scan_cost`)."""
    from ..errors import ResourceError

    costs = scan_cost(spec)
    for label, cost in costs.items():
        if cost["peak_memory_mb"] > spec.memory_limit_mb:
            raise ResourceError(
                f"memory_limit_mb: level {label} needs about {cost['peak_memory_mb']:.3g} MB per calculation "
                f"({cost['nbasis']} basis functions, {cost['naux_jk'] or cost['naux_ri']} fitting functions, "
                f"{cost['nocc']} occupied / {cost['nvir']} virtual orbitals; largest: "
                f"{cost['largest_tensor']}, {cost['tensor_mb'][cost['largest_tensor']]:.3g} MB), above the limit of "
                f"{spec.memory_limit_mb:g} MB; raise memory_limit_mb (ScanSpec argument, or "
                "memory_limit_mb under [calculation] in the spec file)")
    return costs
