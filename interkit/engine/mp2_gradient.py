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

Tests compare against central finite differences of the DF-MP2 energy.
"""

from __future__ import annotations

from functools import reduce

import numpy as np
from pyscf.scf import cphf

from .fitted_integrals import fitted_integrals, left_apply, right_apply, unpacked
from .gradient import core_hamiltonian_gradient, fitted_pair_gradient, occupied_block, overlap_gradient

#: convergence threshold of the Z-vector (coupled-perturbed HF) equations
ZVECTOR_TOL = 1e-9
ZVECTOR_MAX_CYCLE = 60


def fitted_mp2_gradient(mf, frozen: int | None) -> tuple[float, np.ndarray]:
    """DF-MP2 correlation energy (hartree) and total gradient (hartree/bohr) of a
    converged closed-shell density-fitted RHF ``mf``; ``frozen`` core orbitals."""
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

    # whitened B = L^-1 (P|ia) ((P|Q) = L L^T) and c = (P|Q)^-1 (Q|ia) = L^-T B
    b = occupied_block(ints, cderi, occ_act, vir)  # (P, i, a)
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
    # orbital Lagrangian dE_2/dU (all MOs m; active occupied and virtual columns):
    # sum_P (m a|P) G_ia^P with whitened factors on both sides
    lag_o = np.zeros((mol.nao, no))
    lag_v = np.zeros((mol.nao, nv))
    for _, _, p0, p1 in ints.blocks:
        blk = unpacked(cderi, p0, p1)  # (Q, mu, nu)
        x_o = right_apply(gbar[p0:p1], vir.T).transpose(0, 2, 1)  # (Q, nu, i)
        x_v = left_apply(occ_act, gbar[p0:p1])  # (Q, nu, a)
        lag_o += np.tensordot(blk, x_o, axes=([0, 2], [0, 1]))
        lag_v += np.tensordot(blk, x_v, axes=([0, 2], [0, 1]))
    # back to the fitting functions themselves: G = L^-T Gbar, c = L^-T B
    gam = ints.to_fitting(gbar)
    cvec = ints.to_fitting(b)
    y_ns = 2.0 * (cvec.reshape(naux, -1) @ gam.reshape(naux, -1).T)
    y_ns = 0.5 * (y_ns + y_ns.T)
    del gbar, b, bt, cvec
    imat = np.zeros((nmo, nmo))  # pyscf's convention: Imat = -1/2 dE_2/dU
    imat[:, nf:nocc] = -2.0 * (mo_coeff.T @ lag_o)
    imat[:, nocc:] = -2.0 * (mo_coeff.T @ lag_v)

    dm1mo = np.zeros((nmo, nmo))
    dm1mo[nf:nocc, nf:nocc] = p_oo
    dm1mo[nocc:, nocc:] = p_vv
    if nf:
        dco = imat[:nf, nf:nocc] / (mo_energy[:nf, None] - mo_energy[None, nf:nocc])
        dm1mo[:nf, nf:nocc] = dco
        dm1mo[nf:nocc, :nf] = dco.T
    dm1 = reduce(np.dot, (mo_coeff, dm1mo, mo_coeff.T))
    vhf = mf.get_veff(mol, dm1) * 2
    xvo = reduce(np.dot, (vir.T, vhf, occ_all)) + imat[:nocc, nocc:].T - imat[nocc:, :nocc]

    fvind = _fitted_response(ints, cderi, occ_all, vir)
    if fvind is None:  # too large to keep the virtual-virtual fitted integrals

        def fvind(x):
            d = reduce(np.dot, (vir, x.reshape(nv, nocc), occ_all.T))
            v = mf.get_veff(mol, d + d.T)
            return reduce(np.dot, (vir.T, v, occ_all)).ravel() * 2

    dvo = cphf.solve(fvind, mo_energy, mo_occ, xvo, max_cycle=ZVECTOR_MAX_CYCLE, tol=ZVECTOR_TOL)[0]
    dm1mo[nocc:, :nocc] = dvo
    dm1mo[:nocc, nocc:] = dvo.T

    imat[nocc:, :nocc] = imat[:nocc, nocc:].T
    im1 = reduce(np.dot, (mo_coeff, imat, mo_coeff.T))
    zeta = 0.5 * (mo_energy[:, None] + mo_energy[None, :])
    zeta[nocc:, :nocc] = mo_energy[:nocc]
    zeta[:nocc, nocc:] = mo_energy[:nocc].reshape(-1, 1)
    zeta = reduce(np.dot, (mo_coeff, zeta * dm1mo, mo_coeff.T))
    dm1 = reduce(np.dot, (mo_coeff, dm1mo, mo_coeff.T))
    p1 = occ_all @ occ_all.T
    vhf_s1occ = reduce(np.dot, (p1, mf.get_veff(mol, dm1 + dm1.T), p1))

    g = mf.nuc_grad_method()
    dm_hf = mf.make_rdm1()
    zeta += g.make_rdm1e(mo_energy, mo_coeff, mo_occ)
    s1 = g.get_ovlp(mol)
    de = np.asarray(g.grad_nuc(), dtype=float)
    # core Hamiltonian with the relaxed density; overlap with the energy-weighted density
    basis_part, operator_part = core_hamiltonian_gradient(g, mol, dm_hf + dm1)
    de += basis_part + operator_part + overlap_gradient(g, mol, zeta)
    for ia, (_, _, p0, p1_) in enumerate(mol.aoslice_by_atom()):
        de[ia] += np.einsum("xij,ij->x", s1[:, p0:p1_], im1[p0:p1_])
        de[ia] += np.einsum("xji,ij->x", s1[:, p0:p1_], im1[:, p0:p1_])
        de[ia] -= 2.0 * np.einsum("xij,ij->x", s1[:, p0:p1_], vhf_s1occ[p0:p1_])
    # reference-like two-electron terms, 1/2 G(D, D + 2 P) with fitted integrals, and
    # the non-separable part, 4 sum (ia|P)^x G_ia^P - 2 sum (P|Q)^x Y_PQ, in one pass
    # over the derivative integrals
    def z_block(p0: int, p1: int) -> np.ndarray:
        half = left_apply(occ_act, right_apply(gam[p0:p1], vir.T))  # C_o G^P C_v^T
        return 2.0 * (half + half.transpose(0, 2, 1))

    de += fitted_pair_gradient(ints, cderi, occ_all, dm_hf, dm_hf + 2.0 * dm1, hyb=1.0, extra=(z_block, y_ns))
    return e_corr, de


#: largest virtual-virtual block of fitted integrals kept for the Z-vector equations, MB
RESPONSE_MEMORY_MB = 500


def _fitted_response(ints, cderi: np.ndarray, occ: np.ndarray, vir: np.ndarray):
    """The closed-shell Hartree–Fock response ``x -> 2 C_v^T (J - K/2)[d + d^T] C_o`` with
    ``d = C_v x C_o^T``, from fitted integrals in the molecular-orbital basis (the same
    operator as the fitted reference's ``get_veff``, at a fraction of the cost); None
    when the virtual-virtual block exceeds ``RESPONSE_MEMORY_MB``."""
    naux, nocc, nv = ints.naux, occ.shape[1], vir.shape[1]
    if naux * nv * nv * 8 > RESPONSE_MEMORY_MB * 1e6:
        return None
    b_oo = np.empty((naux, nocc, nocc))
    b_vo = np.empty((naux, nv, nocc))
    b_vv = np.empty((naux, nv, nv))
    for _, _, p0, p1 in ints.blocks:
        blk = unpacked(cderi, p0, p1)
        half_o = right_apply(blk, occ)
        b_oo[p0:p1] = left_apply(occ.T, half_o)
        b_vo[p0:p1] = left_apply(vir.T, half_o)
        b_vv[p0:p1] = left_apply(vir.T, right_apply(blk, vir))

    flat_vo = b_vo.reshape(naux, -1)

    def fvind(x):
        x = x.reshape(nv, nocc)
        # Coulomb of d + d^T: 2 sum_ai (Q|ai) x_ai
        rho = 2.0 * (flat_vo @ x.ravel())
        vj = np.einsum("q,qai->ai", rho, b_vo)
        # exchange of d + d^T, (vir, occ) block
        vk = np.einsum("qab,bj,qji->ai", b_vv, x, b_oo, optimize=True)
        vk += np.einsum("qaj,bj,qbi->ai", b_vo, x, b_vo, optimize=True)
        return (2.0 * (vj - 0.5 * vk)).ravel()

    return fvind
