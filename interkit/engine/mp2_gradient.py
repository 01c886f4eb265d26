"""Analytic gradient of density-fitted MP2 on a density-fitted closed-shell Hartree–Fock
reference: the derivative of exactly the energy the energy-only path computes (pyscf's
DF-MP2 on the reference's fitting basis, frozen core).

Structure (relaxed-density formulation, spatial orbitals, i j occupied active, a b
virtual, P Q fitting functions; the same steps as pyscf's conventional MP2 gradient with
the four-centre integrals replaced by fitted ones):

* amplitudes ``T_ij^ab = (ia|jb) / (e_i + e_j - e_a - e_b)`` with
  ``(ia|jb) = sum_PQ (ia|P) (P|Q)^-1 (Q|jb)``, and ``T~ = 2 T - T(a<->b)``;
* unrelaxed density ``P_ij = -2 sum T_ik^ab T~_jk^ab``, ``P_ab = 2 sum T_ij^ac T~_ij^bc``;
* three-index two-particle density ``G_ia^P = sum_jb T~_ijab c_jb^P`` with
  ``c = (P|Q)^-1 (Q|jb)``; its integral derivative
  ``4 sum (ia|P)^x G_ia^P - 2 sum (P|Q)^x sum_ia c_ia^P G_ia^Q``;
* orbital Lagrangian from ``G`` (``dE_2/dU_mi = 4 sum (ma|P) G_ia^P``,
  ``dE_2/dU_ma = 4 sum (mi|P) G_ia^P``), frozen-core / active block, Z-vector
  (coupled-perturbed HF with the fitted reference's response), energy-weighted density;
* reference-like terms: fitted two-electron derivative of ``1/2 G(D, D + 2 P)``,
  core Hamiltonian with the relaxed density, overlap with the energy-weighted density.

Cost: the SCF's own whitened fitted tensor is transformed once to all orbital pairs;
the amplitudes, the orbital Lagrangian, the two Fock-like builds of the MP2 density and
the Z-vector response are contractions of that one tensor (no AO Fock build of a general
density, which costs as much as the whole transformation). The fitted-integral
derivatives are shared by the counterpoise calculations of a point (.fitted_integrals).

Tests compare against central finite differences of the DF-MP2 energy.
"""

from __future__ import annotations

from functools import reduce

import numpy as np
from pyscf import lib
from pyscf.ao2mo import _ao2mo
from pyscf.scf import cphf

from .fitted_integrals import fitted_integrals, left_apply, right_apply, unpacked
from .gradient import core_hamiltonian_gradient, fitted_pair_gradient, occupied_block, overlap_gradient

#: convergence threshold of the Z-vector (coupled-perturbed HF) equations
ZVECTOR_TOL = 1e-9
ZVECTOR_MAX_CYCLE = 60


def fitted_mp2_gradient(mf, frozen: int | None, relaxed_density: bool = False):
    """DF-MP2 correlation energy (hartree) and total gradient (hartree/bohr) of a
    converged closed-shell density-fitted RHF ``mf``; ``frozen`` core orbitals.

    With ``relaxed_density=True`` two more items are returned: the relaxed MP2 density
    (AO basis, symmetric) and its electrostatic force on the nuclei (hartree/bohr), the
    Hellmann–Feynman part of the MP2 force, from the integrals the gradient already has."""
    mol = mf.mol
    mo_coeff, mo_energy, mo_occ = mf.mo_coeff, mf.mo_energy, mf.mo_occ
    nmo = mo_coeff.shape[1]
    nocc = int(np.count_nonzero(mo_occ > 0))
    nf = int(frozen or 0)
    occ_all = mo_coeff[:, :nocc]
    occ_act = mo_coeff[:, nf:nocc]
    vir = mo_coeff[:, nocc:]
    no, nv = nocc - nf, nmo - nocc
    e_o, e_v = mo_energy[nf:nocc], mo_energy[nocc:]
    ints = fitted_integrals(mol, mf.with_df.auxmol)
    cderi = ints.whitened_tensor(mf.with_df)
    naux = ints.naux
    # whitened fitted integrals L^-1 (P|pq) of all orbital pairs ((P|Q) = L L^T), kept
    # when they fit in memory: the amplitudes, the orbital Lagrangian, the Fock-like
    # builds and the Z-vector response are then contractions of this one tensor
    mo3c = _mo_tensor(cderi, mo_coeff, naux, nocc)

    # whitened B = L^-1 (P|ia) and c = (P|Q)^-1 (Q|ia) = L^-T B
    if mo3c is not None:
        b = np.ascontiguousarray(mo3c[:, nf:nocc, nocc:])  # (P, i, a)
    else:
        b = occupied_block(ints, cderi, occ_act, vir)
    bt = np.ascontiguousarray(b.transpose(1, 2, 0))  # (i, a, Q)
    flat = bt.reshape(no * nv, naux)

    e_corr = 0.0
    p_oo = np.zeros((no, no))
    p_vv = np.zeros((nv, nv))
    gbar = np.empty((no, nv, naux))
    e_vv = e_v[:, None] + e_v[None, :]
    for i in range(no):
        # k[a, j, b] = (ia|jb), t = T_ij^ab, tt = T~_ij^ab, all as [a, j, b]
        k = (bt[i] @ flat.T).reshape(nv, no, nv)
        t = k / (e_o[i] + e_o[None, :, None] - e_vv[:, None, :])
        tt = 2.0 * t - t.transpose(2, 1, 0)
        e_corr += float(np.vdot(k, tt))
        gbar[i] = tt.reshape(nv, -1) @ flat
        # P_ab += 2 sum_jc T_ij^ac T~_ij^bc ; P_kl -= 2 sum_ab T_ik^ab T~_il^ab (i summed)
        t_j = np.ascontiguousarray(t.transpose(1, 0, 2))  # [j, a, c]
        tt_j = np.ascontiguousarray(tt.transpose(1, 0, 2))
        p_vv += 2.0 * np.tensordot(t_j, tt_j, axes=([0, 2], [0, 2]))
        p_oo -= 2.0 * (t_j.reshape(no, -1) @ tt_j.reshape(no, -1).T)
    gbar = np.ascontiguousarray(gbar.transpose(2, 0, 1))  # whitened (Q, i, a)
    # orbital Lagrangian, pyscf's convention Imat = -1/2 dE_2/dU (all orbitals p; active
    # occupied and virtual columns): -2 sum_P (p a|P) G_ia^P and -2 sum_P (p i|P) G_ia^P,
    # whitened factors on both sides
    imat = np.zeros((nmo, nmo))
    if mo3c is not None:
        imat[:, nf:nocc] = -2.0 * _pair_contract(mo3c[:, :, nocc:], gbar)
        imat[:, nocc:] = -2.0 * _pair_contract(mo3c[:, :, nf:nocc], gbar.transpose(0, 2, 1))
    else:
        lag_o = np.zeros((mol.nao, no))
        lag_v = np.zeros((mol.nao, nv))
        for _, _, p0, p1 in ints.blocks:
            blk = unpacked(cderi, p0, p1)  # (Q, mu, nu)
            x_o = right_apply(gbar[p0:p1], vir.T).transpose(0, 2, 1)  # (Q, nu, i)
            x_v = left_apply(occ_act, gbar[p0:p1])  # (Q, nu, a)
            lag_o += np.tensordot(blk, x_o, axes=([0, 2], [0, 1]))
            lag_v += np.tensordot(blk, x_v, axes=([0, 2], [0, 1]))
        imat[:, nf:nocc] = -2.0 * (mo_coeff.T @ lag_o)
        imat[:, nocc:] = -2.0 * (mo_coeff.T @ lag_v)
    # back to the fitting functions themselves: G = L^-T Gbar, c = L^-T B
    gam = ints.to_fitting(gbar)
    cvec = ints.to_fitting(b)
    y_ns = 2.0 * (cvec.reshape(naux, -1) @ gam.reshape(naux, -1).T)
    y_ns = 0.5 * (y_ns + y_ns.T)
    del gbar, b, bt, cvec

    dm1mo = np.zeros((nmo, nmo))
    dm1mo[nf:nocc, nf:nocc] = p_oo
    dm1mo[nocc:, nocc:] = p_vv
    if nf:
        dco = imat[:nf, nf:nocc] / (mo_energy[:nf, None] - mo_energy[None, nf:nocc])
        dm1mo[:nf, nf:nocc] = dco
        dm1mo[nf:nocc, :nf] = dco.T

    def veff_block(dm_mo: np.ndarray, rows: slice, cols: slice) -> np.ndarray:
        """Block of the reference's J - K/2 of an MO-basis density, in the MO basis."""
        if mo3c is not None:
            return _mo_veff_block(mo3c, dm_mo, rows, cols)
        v = mf.get_veff(mol, reduce(np.dot, (mo_coeff, dm_mo, mo_coeff.T)))
        return reduce(np.dot, (mo_coeff[:, rows].T, v, mo_coeff[:, cols]))

    occ_s, vir_s = slice(0, nocc), slice(nocc, nmo)
    xvo = 2.0 * veff_block(dm1mo, vir_s, occ_s) + imat[:nocc, nocc:].T - imat[nocc:, :nocc]

    fvind = _fitted_response(mo3c, nocc) if mo3c is not None else None
    if fvind is None:  # too large to keep the fitted integrals of all orbital pairs

        def fvind(x):
            d = reduce(np.dot, (vir, x.reshape(nv, nocc), occ_all.T))
            v = mf.get_veff(mol, d + d.T)
            return reduce(np.dot, (vir.T, v, occ_all)).ravel() * 2

    dvo = cphf.solve(fvind, mo_energy, mo_occ, xvo, max_cycle=ZVECTOR_MAX_CYCLE, tol=ZVECTOR_TOL)[0]
    dm1mo[nocc:, :nocc] = dvo
    dm1mo[:nocc, nocc:] = dvo.T
    # occupied block of J - K/2 of the relaxed density (d + d^T, d symmetric here)
    v_oo = veff_block(2.0 * dm1mo, occ_s, occ_s)
    mo3c = fvind = None  # release the orbital-pair integrals

    imat[nocc:, :nocc] = imat[:nocc, nocc:].T
    im1 = reduce(np.dot, (mo_coeff, imat, mo_coeff.T))
    zeta = 0.5 * (mo_energy[:, None] + mo_energy[None, :])
    zeta[nocc:, :nocc] = mo_energy[:nocc]
    zeta[:nocc, nocc:] = mo_energy[:nocc].reshape(-1, 1)
    zeta = reduce(np.dot, (mo_coeff, zeta * dm1mo, mo_coeff.T))
    dm1 = reduce(np.dot, (mo_coeff, dm1mo, mo_coeff.T))
    vhf_s1occ = reduce(np.dot, (occ_all, v_oo, occ_all.T))

    g = mf.nuc_grad_method()
    dm_hf = mf.make_rdm1()
    zeta += g.make_rdm1e(mo_energy, mo_coeff, mo_occ)
    nuclear = np.asarray(g.grad_nuc(), dtype=float)
    de = nuclear.copy()
    # core Hamiltonian with the relaxed density; overlap with the energy-weighted density
    # and the Lagrangian's overlap terms in one contraction: zeta + C_o V_oo C_o^T - (I + I^T)/2
    basis_part, operator_part = core_hamiltonian_gradient(g, mol, dm_hf + dm1)
    de += basis_part + operator_part + overlap_gradient(g, mol, zeta + vhf_s1occ - 0.5 * (im1 + im1.T))
    # reference-like two-electron terms, 1/2 G(D, D + 2 P) with fitted integrals, and
    # the non-separable part, 4 sum (ia|P)^x G_ia^P - 2 sum (P|Q)^x Y_PQ, in one pass
    # over the derivative integrals
    def g_block(p0: int, p1: int) -> np.ndarray:  # Z^P = 2 C_o G^P C_v^T + transpose
        return right_apply(gam[p0:p1], 2.0 * vir.T)

    de += fitted_pair_gradient(ints, cderi, occ_all, dm_hf, dm_hf + 2.0 * dm1, hyb=1.0,
                               extra=(occ_act, g_block, y_ns))
    if relaxed_density:
        return e_corr, de, dm_hf + dm1, -nuclear - operator_part
    return e_corr, de


#: memory bound (MB) of the fitted integrals of all orbital pairs and the transposed copy
#: of their virtual-virtual block the Z-vector response keeps; beyond it the gradient
#: builds Fock-like matrices in the AO basis instead (same numbers, slower)
RESPONSE_MEMORY_MB = 1000


def _mo_tensor(cderi: np.ndarray, mo_coeff: np.ndarray, naux: int, nocc: int) -> np.ndarray | None:
    """Whitened fitted integrals of every orbital pair, (naux, nmo, nmo) (symmetric in
    the pair), from the whitened AO tensor; None when it and the response's copy of its
    virtual block exceed ``RESPONSE_MEMORY_MB``."""
    nmo = mo_coeff.shape[1]
    if naux * (nmo * nmo + (nmo - nocc) ** 2) * 8 > RESPONSE_MEMORY_MB * 1e6:
        return None
    packed = _ao2mo.nr_e2(np.asarray(cderi, order="C"), np.asarray(mo_coeff, order="F"),
                          (0, nmo, 0, nmo), "s2", "s2")
    return lib.unpack_tril(packed)


def _pair_contract(a: np.ndarray, g: np.ndarray) -> np.ndarray:
    """``sum_{P k} a[P, m, k] g[P, n, k]`` as (m, n), one matrix product."""
    return np.tensordot(a, g, axes=([0, 2], [0, 2]))


def _mo_veff_block(mo3c: np.ndarray, dm: np.ndarray, rows: slice, cols: slice) -> np.ndarray:
    """Rows ``rows``, columns ``cols`` of the fitted closed-shell ``J - K/2`` of a
    symmetric MO-basis density ``dm``, in the MO basis (the reference's ``get_veff``
    transformed, without leaving the MO basis)."""
    naux = mo3c.shape[0]
    rho = mo3c.reshape(naux, -1) @ dm.ravel()
    vj = np.tensordot(rho, mo3c[:, rows, cols], axes=1)
    half = np.matmul(dm, mo3c[:, :, cols])  # (P, nmo, ncols)
    vk = _pair_contract(mo3c[:, rows, :], half.transpose(0, 2, 1))
    return vj - 0.5 * vk


def _fitted_response(mo3c: np.ndarray, nocc: int):
    """The closed-shell Hartree–Fock response ``x -> 2 C_v^T (J - K/2)[d + d^T] C_o`` with
    ``d = C_v x C_o^T``, from the whitened fitted integrals of all orbital pairs (the same
    operator as the fitted reference's ``get_veff``, at a fraction of the cost)."""
    naux, nmo = mo3c.shape[0], mo3c.shape[1]
    nv = nmo - nocc
    b_oo = np.ascontiguousarray(mo3c[:, :nocc, :nocc])
    b_vo = np.ascontiguousarray(mo3c[:, nocc:, :nocc])
    flat_vo = b_vo.reshape(naux, -1)
    # left factors with the orbital index first, so each exchange term is one product
    vv_left = np.ascontiguousarray(mo3c[:, nocc:, nocc:].transpose(1, 0, 2)).reshape(nv, -1)  # (a, Q b)
    vo_left = np.ascontiguousarray(b_vo.transpose(1, 0, 2)).reshape(nv, -1)  # (a, Q j)

    def fvind(x):
        x = x.reshape(nv, nocc)
        # Coulomb of d + d^T: 2 sum_ai (Q|ai) x_ai
        rho = 2.0 * (flat_vo @ x.ravel())
        vj = (rho @ flat_vo).reshape(nv, nocc)
        # exchange of d + d^T, (vir, occ) block: sum_Q (ab|Q) x_bj (Q|ji) + (aj|Q) x_bj (Q|bi)
        vk = vv_left @ np.matmul(x, b_oo).reshape(-1, nocc)
        vk += vo_left @ np.matmul(x.T, b_vo).reshape(-1, nocc)
        return (2.0 * (vj - 0.5 * vk)).ravel()

    return fvind
