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

Cost: the three counterpoise calculations of a point share atoms, positions, basis,
fitting basis and DFT grid; only their densities differ. Closed-shell density-fitted
gradients are therefore assembled here from data computed once per point and kept for
the next calculation (fitting-integral derivatives, atom-grid orbital values and weight
derivatives), with the numbers of pyscf's own gradient code.
"""

from __future__ import annotations

from collections import OrderedDict

import numpy as np
from pyscf import gto, mp
from pyscf.grad import rhf as rhf_grad

from ..model.levels import LevelOfTheory
from .dispersion import dispersion_energy_and_gradient
from .fitted_integrals import basis_fingerprint, fitted_integrals, left_apply, right_apply, unpacked
from .numint_cache import grid_response_blocks


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


def scf_gradient(mf, level: LevelOfTheory) -> tuple[np.ndarray, np.ndarray | None]:
    """Analytic gradient (hartree/bohr) of a converged HF or DFT calculation, with exact
    grid response for DFT, and the electrostatic force when it came for free (else None).

    Closed-shell density-fitted HF and LDA/GGA (hybrid) DFT use :func:`fitted_scf_gradient`,
    whose integrals are shared by the counterpoise calculations of a point; other cases
    use pyscf's gradient code.
    """
    if _fitted_path_applies(mf, level):
        return fitted_scf_gradient(mf, level)
    if hasattr(getattr(mf, "_numint", None), "max_cache_mb"):
        mf._numint.max_cache_mb = 0  # the gradient uses other grids: no caching there
    g = mf.nuc_grad_method()
    g.verbose = 0
    if level.method == "dft":
        g.grid_response = True
        g.grids = _ghost_aware_grids(mf)
    return np.asarray(g.kernel(), dtype=float), None


def _fitted_path_applies(mf, level: LevelOfTheory) -> bool:
    if getattr(mf, "with_df", None) is None or np.ndim(mf.mo_coeff) != 2 or mf.mol.spin != 0:
        return False
    if getattr(mf.mol, "_pseudo", None) or getattr(mf, "with_x2c", None):
        return False
    if level.method == "dft":
        ni = mf._numint
        omega, _, _ = ni.rsh_and_hybrid_coeff(mf.xc, spin=mf.mol.spin)
        return ni._xc_type(mf.xc) in ("LDA", "GGA") and omega == 0 and not mf.do_nlc()
    return level.method == "hf"


def fitted_scf_gradient(mf, level: LevelOfTheory) -> tuple[np.ndarray, np.ndarray]:
    """Gradient of a closed-shell density-fitted HF or LDA/GGA DFT calculation, and the
    electrostatic force of its density (sharing the nuclear-attraction integrals).

    The same energy derivative as pyscf's density-fitting gradient (fitting-function
    response included; tests compare to 1e-9 hartree/bohr), assembled from integrals
    kept for the next counterpoise calculation of the point (:mod:`.fitted_integrals`)
    and, for DFT, from atom-grid orbital values and weight derivatives kept likewise.
    """
    mol = mf.mol
    g = mf.nuc_grad_method()
    dm = mf.make_rdm1()
    occupied = mf.mo_coeff[:, mf.mo_occ > 0]
    nuclear = np.asarray(g.grad_nuc(), dtype=float)
    basis_part, operator_part = core_hamiltonian_gradient(g, mol, dm)
    dme = g.make_rdm1e(mf.mo_energy, mf.mo_coeff, mf.mo_occ)
    de = nuclear + basis_part + operator_part + overlap_gradient(g, mol, dme)
    hyb = 1.0
    if level.method == "dft":
        hyb = mf._numint.rsh_and_hybrid_coeff(mf.xc, spin=mol.spin)[2]
        de += xc_gradient(mf._numint, mol, _ghost_aware_grids(mf), mf.xc, dm)
    ints = fitted_integrals(mol, mf.with_df.auxmol)
    de += fitted_jk_gradient(ints, ints.whitened_tensor(mf.with_df), occupied, dm, hyb)
    # Hellmann-Feynman force: nuclear repulsion and the field of the electrons only
    return de, -nuclear - operator_part


#: one-electron derivative integrals of the last geometries (process-local): the
#: counterpoise calculations of a point share basis functions and positions, and the
#: attraction integrals of each nucleus do not depend on its charge
_ONE_ELECTRON: OrderedDict = OrderedDict()
#: memory bound (MB) of one geometry's kept one-electron derivative integrals
ONE_ELECTRON_CACHE_MB = 200


def _one_electron_derivatives(g, mol):
    """Kept ``int1e_ipkin``, ``int1e_ipovlp`` and per-atom ``int1e_iprinv`` integrals of
    this basis and geometry (a dict, filled on demand), or None where pyscf's own
    core Hamiltonian differs (ECPs, pseudopotentials, finite nuclei, X2C)."""
    if mol.has_ecp() or getattr(mol, "_pseudo", None) or mol.nucmod:
        return None
    if getattr(g.base, "with_x2c", None):
        return None
    if (mol.natm + 2) * 3 * mol.nao**2 * 8 > ONE_ELECTRON_CACHE_MB * 1e6:
        return None
    key = basis_fingerprint(mol)
    entry = _ONE_ELECTRON.get(key)
    if entry is None:
        entry = {"ipkin": mol.intor("int1e_ipkin", comp=3), "ipovlp": mol.intor("int1e_ipovlp", comp=3)}
        _ONE_ELECTRON[key] = entry
        while len(_ONE_ELECTRON) > 2:
            _ONE_ELECTRON.popitem(last=False)
    else:
        _ONE_ELECTRON.move_to_end(key)
    return entry


def _rinv_derivative(mol, entry, ia: int) -> np.ndarray:
    """``int1e_iprinv`` with the operator at nucleus ``ia`` (kept in ``entry`` if given)."""
    if entry is not None and ia in entry:
        return entry[ia]
    with mol.with_rinv_at_nucleus(ia):
        out = mol.intor("int1e_iprinv", comp=3)
    if entry is not None:
        entry[ia] = out
    return out


def core_hamiltonian_gradient(g, mol, dm) -> tuple[np.ndarray, np.ndarray]:
    """Core-Hamiltonian gradient of a density (pyscf's ``hcore_generator`` contracted),
    split into the part from moving basis functions and the part from the nuclear
    attraction operator of each nucleus (zero for ghost atoms, which are skipped).

    Integrals that the counterpoise calculations of a point share are kept (see
    :func:`_one_electron_derivatives`); the nuclear-attraction derivative is then
    assembled from them, ``int1e_ipnuc = -sum_A Z_A int1e_iprinv(A)``."""
    charges = mol.atom_charges()
    shared = _one_electron_derivatives(g, mol)
    if shared is None:
        h1 = g.get_hcore(mol)  # -<nabla mu| h |nu>
    else:
        h1 = -shared["ipkin"]
        for ia in np.flatnonzero(charges):
            h1 = h1 + charges[ia] * _rinv_derivative(mol, shared, ia)
    ecp_atoms = set(mol._ecpbas[:, gto.ATOM_OF]) if mol.has_ecp() else set()
    basis_part = np.zeros((mol.natm, 3))
    operator_part = np.zeros((mol.natm, 3))
    for ia, (_, _, p0, p1) in enumerate(mol.aoslice_by_atom()):
        basis_part[ia] = 2.0 * np.einsum("xij,ij->x", h1[:, p0:p1], dm[p0:p1])
        if charges[ia] == 0 and ia not in ecp_atoms:
            continue
        vrinv = _rinv_derivative(mol, shared, ia) * -charges[ia]
        if ia in ecp_atoms:
            with mol.with_rinv_at_nucleus(ia):
                vrinv = vrinv + mol.intor("ECPscalar_iprinv", comp=3)
        operator_part[ia] = 2.0 * np.einsum("xij,ij->x", vrinv, dm)
    return basis_part, operator_part


def overlap_gradient(g, mol, dme) -> np.ndarray:
    """Overlap-derivative term of a gradient with a symmetric energy-weighted density."""
    shared = _one_electron_derivatives(g, mol)
    s1 = g.get_ovlp(mol) if shared is None else -shared["ipovlp"]
    de = np.zeros((mol.natm, 3))
    for ia, (_, _, p0, p1) in enumerate(mol.aoslice_by_atom()):
        de[ia] -= 2.0 * np.einsum("xij,ij->x", s1[:, p0:p1], dme[p0:p1])
    return de


def fitted_jk_gradient(ints, cderi: np.ndarray, occupied: np.ndarray, dm: np.ndarray, hyb: float) -> np.ndarray:
    """Derivative of the fitted Coulomb energy minus ``hyb`` times the fitted exchange
    energy of a closed-shell density ``dm = 2 C C^T`` (C: ``occupied`` orbitals);
    ``cderi`` is the whitened tensor ``L^-1 (P|mu nu)`` of ``ints``."""
    c = ints.to_fitting(cderi @ packed_density(dm))
    y = 0.5 * np.outer(c, c)
    g_oo = None
    if hyb != 0:
        g_oo = ints.to_fitting(occupied_block(ints, cderi, occupied, occupied))
        flat = g_oo.reshape(ints.naux, -1)
        y -= hyb * (flat @ flat.T)

    def z_block(p0: int, p1: int) -> np.ndarray:
        z = c[p0:p1, None, None] * dm
        if g_oo is not None:
            z -= 2.0 * hyb * left_apply(occupied, right_apply(g_oo[p0:p1], occupied.T))
        return z

    return ints.derivative(z_block, y)


def fitted_pair_gradient(ints, cderi: np.ndarray, occupied: np.ndarray, dm: np.ndarray, other: np.ndarray,
                         hyb: float, extra=None) -> np.ndarray:
    """Derivative (fixed densities) of ``1/2 G(D, D')``, with ``G`` the fitted Coulomb
    minus ``hyb``/2 exchange energy of two densities: ``D = 2 C C^T`` (C: ``occupied``)
    and ``D'`` = ``other`` (symmetric). ``D' = D`` gives :func:`fitted_jk_gradient`.

    ``extra = (left, right_block, y)`` adds, in the same pass over the derivative
    integrals, a term of the form of :meth:`FittedIntegrals.derivative` with
    ``Z^P = A R^P + (A R^P)^T``: ``A = left`` (nao, k) and ``R^P`` from
    ``right_block(p0, p1)`` as (p1-p0, k, nao); ``y`` symmetric (naux, naux)."""
    nao = ints.nao
    c = ints.to_fitting(cderi @ packed_density(dm))
    c2 = ints.to_fitting(cderi @ packed_density(other))
    y = 0.25 * (np.outer(c, c2) + np.outer(c2, c))
    k = -0.25 * hyb
    h = None
    if hyb != 0:
        g_o = np.empty((ints.naux, occupied.shape[1], nao))
        for _, _, p0, p1 in ints.blocks:
            g_o[p0:p1] = right_apply(unpacked(cderi, p0, p1), occupied).transpose(0, 2, 1)
        g_o = ints.to_fitting(g_o)
        h = right_apply(g_o, other)
        cross = h.reshape(ints.naux, -1) @ g_o.reshape(ints.naux, -1).T
        y += k * (cross + cross.T)
        del g_o
    # Coulomb part of Z^P, 1/2 (c'_P D + c_P D'), as one matrix product
    coulomb = 0.5 * np.stack([c2, c], axis=1)
    densities = np.stack([dm.ravel(), other.ravel()])
    # exchange and extra parts: A R^P + (A R^P)^T with the left factors side by side
    lefts = ([occupied] if h is not None else []) + ([extra[0]] if extra is not None else [])
    left = np.hstack(lefts) if lefts else None

    def z_block(p0: int, p1: int) -> np.ndarray:
        z = (coulomb[p0:p1] @ densities).reshape(p1 - p0, nao, nao)
        if left is None:
            return z
        rights = ([2.0 * k * h[p0:p1]] if h is not None else []) + ([extra[1](p0, p1)] if extra is not None else [])
        half = left_apply(left, np.concatenate(rights, axis=1))
        z += half
        z += half.transpose(0, 2, 1)
        return z

    if extra is not None:
        y = y + extra[2]
    return ints.derivative(z_block, y)


def packed_density(dm: np.ndarray) -> np.ndarray:
    """Lower triangle of a symmetric matrix with off-diagonal elements doubled, so its dot
    with packed (mu nu|P) is the full contraction."""
    from pyscf import lib

    nao = dm.shape[0]
    packed = lib.pack_tril(dm + dm.T)
    diag = np.arange(nao)
    packed[diag * (diag + 1) // 2 + diag] *= 0.5
    return packed


def occupied_block(ints, cderi: np.ndarray, left: np.ndarray, right: np.ndarray) -> np.ndarray:
    """Whitened ``L^-1 (P|i j)``, ``i j`` orbitals in ``left`` and ``right``, as
    (naux, n_left, n_right)."""
    out = np.empty((ints.naux, left.shape[1], right.shape[1]))
    for _, _, p0, p1 in ints.blocks:
        out[p0:p1] = left_apply(left.T, right_apply(unpacked(cderi, p0, p1), right))
    return out


def xc_gradient(ni, mol, grids, xc: str, dm: np.ndarray) -> np.ndarray:
    """Exchange-correlation part of a closed-shell LDA/GGA gradient with full grid
    response (pyscf's ``get_vxc_full_response`` contracted with the density).

    Only the contraction of the XC matrix derivative with the density is formed, per
    basis function, rather than the matrix itself.
    """
    xctype = ni._xc_type(xc)
    deriv = 1 if xctype == "LDA" else 2
    natm, nao = mol.natm, mol.nao
    de = np.zeros((natm, 3))
    t_ao = np.zeros((3, nao))
    second = ((4, 5, 6), (5, 7, 8), (6, 8, 9))  # d2/dx_i dx_j components of ao
    for atm_id, (_, weight, weight1, ao) in enumerate(grid_response_blocks(ni, mol, grids, deriv)):
        c0 = ao[0] @ dm
        rho0 = np.einsum("gm,gm->g", c0, ao[0])
        if xctype == "LDA":
            rho = rho0
            exc, vxc = ni.eval_xc_eff(xc, rho, 1, xctype=xctype)[:2]
            wv = weight * vxc[0]
            t = np.einsum("xgm,gm->xm", ao[1:4], (ao[0] * wv[:, None]) @ dm)
        else:
            rho = np.empty((4, rho0.size))
            rho[0] = rho0
            rho[1:4] = 2.0 * np.einsum("xgm,gm->xg", ao[1:4], c0)
            exc, vxc = ni.eval_xc_eff(xc, rho, 1, xctype=xctype)[:2]
            wv = weight * vxc
            wv[0] *= 0.5
            aow = np.einsum("kgm,kg->gm", ao[:4], wv)
            t = np.einsum("xgm,gm->xm", ao[1:4], aow @ dm)
            t += np.einsum("xgm,gm->xm", ao[1:4], c0 * wv[0][:, None])
            for y in range(3):
                cw = c0 * wv[1 + y][:, None]
                for x in range(3):
                    t[x] += np.einsum("gm,gm->m", ao[second[x][y]], cw)
        # response of the weights and of the grid points moving with their atom
        de += np.einsum("r,r,nxr->nx", exc, rho0, weight1)
        de[atm_id] += 2.0 * t.sum(axis=1)
        t_ao += t
    ao_atom = np.repeat(np.arange(natm), [p1 - p0 for _, _, p0, p1 in mol.aoslice_by_atom()])
    np.add.at(de, ao_atom, -2.0 * t_ao.T)
    return de


def mp2_gradient(mf, frozen: int | None) -> tuple[float, np.ndarray]:
    """Conventional (not density-fitted) MP2 correlation energy and total gradient."""
    solver = mp.ump2.UMP2(mf) if np.ndim(mf.mo_coeff) == 3 else mp.mp2.RMP2(mf)  # UHF also at 2S = 0
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
                                          job.level.functional, job.level.dispersion, charge=job.charge)
    grad[real] = g
    return e, grad
