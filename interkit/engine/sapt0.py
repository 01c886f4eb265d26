"""Closed-shell density-fitted SAPT0 for one dimer geometry.

Terms of symmetry-adapted perturbation theory at the SAPT0 level (Hartree–Fock
monomers, intramonomer correlation neglected), built on pyscf integrals:

* E(10)elst and E(10)exch (full and in the S^2 approximation),
* E(20)ind,resp (coupled-perturbed Hartree–Fock) in both directions,
* E(20)exch-ind,resp (S^2) in both directions,
* E(20)disp and E(20)exch-disp (S^2),
* δHF from the counterpoise-corrected Hartree–Fock interaction energy.

Sources: Jeziorski, Moszynski, Szalewicz, Chem. Rev. 94, 1887 (1994) (the symmetrized
Rayleigh–Schrödinger expansion and its single-exchange, S^2, truncation); Hohenstein and
Sherrill, J. Chem. Phys. 132, 184111 (2010) (density fitting of SAPT0); Parker, Burns,
Parrish, Ryno, Sherrill, J. Chem. Phys. 140, 094106 (2014) (levels of SAPT, sSAPT0).

How the exchange terms are obtained here. For a bra that is the Hartree product of the
monomer determinants and a ket that is the antisymmetrized product of (possibly
perturbed) monomer determinants, Löwdin's rules give <Ψ0|V A Φ>/<Ψ0|A Φ> in closed
form through the inverse of the occupied-orbital overlap matrix. Written with
"transition densities" T = C_ket C_bra^T (AO, one spin), that expression is

    F = 2 Tr(V_B X_A) + 2 Tr(V_A X_B) + 4 (X_A|X_B) - 2 K(X_A, X_B) + V_nn,

with X_A = C_ket D[:, A] C_bra,A^T, D = (S_occ)^-1. With unperturbed monomers F is
E(10) = E(10)elst + E(10)exch. Keeping the terms of second order in the intermolecular
overlap gives E(10)exch(S^2) as a polynomial in T_A and T_B. The second-order SRS energy
is linear in the first-order ket, so E(20)exch-ind (S^2) is the derivative of that
polynomial along the induction amplitudes (ket only), and E(20)exch-disp (S^2) is its
mixed second derivative along the dispersion amplitudes plus the normalization terms
F_1 d_2 + F_2 d_1 (d = <Ψ0|A Ψ(ε)>/<Ψ0|A Ψ0>). The derivation is ours; see the module
tests for the checks against independent quantities.

Long-range behaviour of E(10)exch (measured on the S22 water dimer moved rigidly along
the centre-of-mass axis). With aug-cc-pVDZ, E(10)exch and E(10)exch(S^2) change sign
between 7 and 8 Å and stay negative: -5.6e-10, -1.5e-10, -1.8e-11 and -1.8e-13 hartree at
8, 9, 10 and 12 Å. This is not a numerical floor and not a density-fitting error: the
values agree within about 10 % with a much larger fitting basis (aug-cc-pV5Z-RI as the
JK fit), with exact four-index integrals (eigen-decomposed ERI matrix instead of the
fitted factors) and with a 100 times tighter SCF threshold, |E(10)exch| keeps falling
exponentially, and the full and S^2 values agree to three digits. In the S^2 expression
the negative part is the exchange-integral term, -2 K(X_A, X_B), which outlives the
potential-weighted terms when the basis carries diffuse functions; with cc-pVDZ (no
diffuse functions) E(10)exch(S^2) stays positive out to 12 Å. So the sign change is a
property of SAPT0 in a finite Gaussian basis with diffuse functions; the values are
reported as computed (no clipping). The only numerical floor seen is that of
E(10)exch = E(10) - E(10)elst, about 1e-15 hartree.

All energies are in hartree. The compute core prints nothing and writes no files.
"""

from __future__ import annotations

import numpy as np
from pyscf import df, lib

from ..errors import InputError, ResourceError
from ..model.geometry import Dimer
from .sapt0_scf import _Monomer, _monomer, _run_rhf, _solve_cphf
from .sapt0_setup import _build_molecules, _cost, _nuclear_repulsion_between

#: keys of the dictionary returned by :func:`sapt0_terms`
TERM_KEYS = (
    "elst10", "exch10", "exch10_s2", "ind20r_ab", "ind20r_ba", "ind20r",
    "exch_ind20r_ab", "exch_ind20r_ba", "exch_ind20r", "disp20", "exch_disp20",
    "dhf", "e_int_hf", "elst", "exch", "ind", "disp", "total",
)


# ------------------------------------------------------------------------- functional
class _Interaction:
    """Intermolecular energy expressions on fitted integrals (AO, one-spin densities)."""

    def __init__(self, cderi: np.ndarray, nbas: int, s: np.ndarray, v_a: np.ndarray,
                 v_b: np.ndarray, v_nn: float):
        self.b3 = lib.unpack_tril(cderi, axis=-1).reshape(-1, nbas, nbas)
        self.s, self.v_a, self.v_b, self.v_nn = s, v_a, v_b, v_nn

    # (X|Y) with X = L R^T: fitted vector sum_mn B^P_mn X_mn
    def fit_vector(self, left: np.ndarray, right: np.ndarray) -> np.ndarray:
        return np.einsum("pmi,mi->p", self.b3 @ right, left, optimize=True)

    def coulomb(self, xa, xb) -> float:
        return float(self.fit_vector(*xa) @ self.fit_vector(*xb))

    def exchange(self, xa, xb) -> float:
        """sum_P Tr(B^P X_B B^P X_A) for X = L R^T."""
        (la, ra), (lb, rb) = xa, xb
        u = np.einsum("ma,pmb->pab", ra, self.b3 @ lb, optimize=True)
        w = np.einsum("mb,pma->pba", rb, self.b3 @ la, optimize=True)
        return float(np.einsum("pab,pba->", u, w, optimize=True))

    @staticmethod
    def trace(v: np.ndarray, x) -> float:
        left, right = x
        return float(np.sum(right * (v @ left)))

    def j_matrix(self, x) -> np.ndarray:
        return np.einsum("p,pmn->mn", self.fit_vector(*x), self.b3, optimize=True)

    def k_matrix(self, left: np.ndarray, right: np.ndarray) -> np.ndarray:
        """sum_P B^P L R^T B^P (AO)."""
        bl = self.b3 @ left
        br = self.b3 @ right
        return np.einsum("pmi,pni->mn", bl, br, optimize=True)

    # -- first-order energies
    def elst(self, ta, tb) -> float:
        return (2 * self.trace(self.v_b, ta) + 2 * self.trace(self.v_a, tb)
                + 4 * self.coulomb(ta, tb) + self.v_nn)

    def first_order_full(self, ta, tb) -> float:
        """<Ψ0|V A Φ>/<Ψ0|A Φ> for kets/bras given as (C_ket, C_bra) per monomer."""
        (la, ra), (lb, rb) = ta, tb
        na = la.shape[1]
        left = np.hstack([la, lb])
        right = np.hstack([ra, rb])
        d = np.linalg.inv(right.T @ self.s @ left)
        xa = (left @ d[:, :na], ra)
        xb = (left @ d[:, na:], rb)
        return (2 * self.trace(self.v_b, xa) + 2 * self.trace(self.v_a, xb)
                + 4 * self.coulomb(xa, xb) - 2 * self.exchange(xa, xb) + self.v_nn)

    def exch_s2(self, ta, tb) -> float:
        """Single-exchange (S^2) part of the first-order functional."""
        (la, ra), (lb, rb) = ta, tb
        s_ab = ra.T @ self.s @ lb
        s_ba = rb.T @ self.s @ la
        xa1 = (-lb @ s_ba, ra)
        xa2 = (la @ (s_ab @ s_ba), ra)
        xb1 = (-la @ s_ab, rb)
        xb2 = (lb @ (s_ba @ s_ab), rb)
        xa12 = (xa1[0] + xa2[0], ra)
        xb12 = (xb1[0] + xb2[0], rb)
        return (2 * self.trace(self.v_b, xa12) + 2 * self.trace(self.v_a, xb12)
                + 4 * self.coulomb(xa12, tb) + 4 * self.coulomb(ta, xb12)
                - 2 * self.exchange((la + xa1[0], ra), (lb + xb1[0], rb)))


# ------------------------------------------------------------------------- dispersion
def _half_transformed(dfobj, c_a: np.ndarray, c_b: np.ndarray, nbas: int):
    """(Q, occ, nbas) factors C_occ^T B^Q of both monomers on a fitting basis."""
    ha, hb = [], []
    for block in dfobj.loop():
        b3 = lib.unpack_tril(block, axis=-1).reshape(-1, nbas, nbas)
        ha.append(np.einsum("ma,qmn->qan", c_a, b3, optimize=True))
        hb.append(np.einsum("mb,qmn->qbn", c_b, b3, optimize=True))
    return np.concatenate(ha), np.concatenate(hb)


def _dispersion(ma: _Monomer, mb: _Monomer, ri_df, ia: _Interaction, nbas: int,
                omega_a: np.ndarray, omega_b: np.ndarray) -> tuple[float, float]:
    """E(20)disp and E(20)exch-disp (S^2)."""
    ca, cr, cb, cs = ma.c_occ, ma.c_vir, mb.c_occ, mb.c_vir
    s = ia.s
    ha, hb = _half_transformed(ri_df, ca, cb, nbas)
    g0 = ha @ cr  # (Q, a, r)
    h0 = hb @ cs  # (Q, b, s)
    v = np.einsum("qar,qbs->arbs", g0, h0, optimize=True)
    denom = (ma.e_occ[:, None, None, None] - ma.e_vir[None, :, None, None]
             + mb.e_occ[None, None, :, None] - mb.e_vir[None, None, None, :])
    t = v / denom
    disp = 4.0 * float(np.sum(t * v))
    del v

    p_a, p_b = ma.density, mb.density
    s_ab = ca.T @ s @ cb
    s_ba = s_ab.T
    s_as = ca.T @ s @ cs
    s_br = cb.T @ s @ cr

    def tr_ab(p, q):
        # sum t_arbs (Cb^T P Cr)[b,r] (Ca^T Q Cs)[a,s]  for Tr(P a Q b)
        return float(np.einsum("arbs,br,as->", t, cb.T @ p @ cr, ca.T @ q @ cs, optimize=True))

    j_a = ia.j_matrix((ca, ca))
    j_b = ia.j_matrix((cb, cb))
    sas = s @ p_a @ s
    sbs = s @ p_b @ s
    # U0 = P_A - P_B S P_A, W0 = P_B - P_A S P_B as L R^T factors
    k_u0 = ia.k_matrix(ca - cb @ (cb.T @ s @ ca), ca)
    k_w0 = ia.k_matrix(cb - ca @ (ca.T @ s @ cb), cb)
    one = 0.0
    one += -2 * tr_ab(s, ia.v_b)
    one += 2 * tr_ab(s @ p_a @ ia.v_b, s) + 2 * tr_ab(s, ia.v_b @ p_a @ s)
    one += -2 * tr_ab(ia.v_a, s)
    one += 2 * tr_ab(s, s @ p_b @ ia.v_a) + 2 * tr_ab(ia.v_a @ p_b @ s, s)
    one += -4 * tr_ab(s, j_b)
    one += 4 * tr_ab(s @ p_a @ j_b, s) + 4 * tr_ab(s, j_b @ p_a @ s)
    one += -4 * tr_ab(j_a, s)
    one += 4 * tr_ab(s, s @ p_b @ j_a) + 4 * tr_ab(j_a @ p_b @ s, s)
    one += 2 * tr_ab(s, k_w0) + 2 * tr_ab(k_u0, s)

    # Coulomb-type products of fitted factors, (Q, a, r) x (Q, b, s)
    hb_a = hb @ ca  # (Q, b, a)
    ha_b = ha @ cb  # (Q, a, b)
    ha_a = ha @ ca
    hb_b = hb @ cb
    h_side = (-4 * np.einsum("qba,as->qbs", hb_a, s_as, optimize=True)
              + 4 * np.einsum("bc,qcs->qbs", s_ba @ s_ab, h0, optimize=True)
              + 4 * np.einsum("qbc,cs->qbs", hb_b, s_ba @ s_as, optimize=True))
    g_side = (-4 * np.einsum("qab,br->qar", ha_b, s_br, optimize=True)
              + 4 * np.einsum("ac,qcr->qar", s_ab @ s_ba, g0, optimize=True)
              + 4 * np.einsum("qac,cr->qar", ha_a, s_ab @ s_br, optimize=True))
    coul = float(np.einsum("arbs,qar,qbs->", t, g0, h_side, optimize=True)
                 + np.einsum("arbs,qar,qbs->", t, g_side, h0, optimize=True))

    # exchange-type products, (Q, a, s) x (Q, b, r)
    g1 = ha @ cs - np.einsum("qac,cs->qas", ha_a, s_as, optimize=True)
    h1 = hb @ cr - np.einsum("qbc,cr->qbr", hb_b, s_br, optimize=True)
    g2 = np.einsum("ab,qbs->qas", s_ab, h0, optimize=True)
    h2 = np.einsum("ba,qar->qbr", s_ba, g0, optimize=True)
    exch = -2.0 * float(np.einsum("arbs,qas,qbr->", t, g1, h1, optimize=True)
                        + np.einsum("arbs,qas,qbr->", t, g2, h2, optimize=True))

    # normalization terms F_1 d_2 + F_2 d_1
    norm = -4.0 * float(np.einsum("arbs,ar,bs->", t, ca.T @ omega_b @ cr, cb.T @ sas @ cs,
                                  optimize=True)
                        + np.einsum("arbs,bs,ar->", t, cb.T @ omega_a @ cs, ca.T @ sbs @ cr,
                                    optimize=True))
    return disp, one + coul + exch + norm


# ------------------------------------------------------------------------- driver
def sapt0_terms(dimer: Dimer, basis: str = "jun-cc-pvdz", *, jk_auxbasis: str | None = None,
                ri_auxbasis: str | None = None, max_memory_mb: float = 4000.0,
                conv_tol: float = 1e-10, scaled: bool = False) -> dict[str, float]:
    """Density-fitted SAPT0 terms of a closed-shell dimer in the dimer-centred basis.

    Parameters
    ----------
    dimer : Dimer
        Two closed-shell fragments (multiplicity 1), coordinates in angstrom.
    basis : str
        Orbital basis. ``'jun-cc-pvdz'`` (the default, recommended for SAPT0 by Parker
        et al. 2014) and other ``'jun-'`` names are built from pyscf's aug-cc-pVXZ and
        cc-pVXZ; any pyscf basis name is accepted.
    jk_auxbasis : str, optional
        Fitting basis for the SCF, electrostatics, exchange and induction. Default:
        aug-cc-pVXZ-JKFIT on heavy atoms and cc-pVXZ-JKFIT on H for ``'jun-'`` bases,
        else ``pyscf.df.make_auxbasis``.
    ri_auxbasis : str, optional
        Fitting basis for dispersion and exchange-dispersion. Default: aug-cc-pVXZ-RI on
        heavy atoms and cc-pVXZ-RI on H for ``'jun-'`` bases, else the MP2-fit basis of
        ``pyscf.df.make_auxbasis(mol, mp2fit=True)``.
    max_memory_mb : float
        Refuse (ResourceError) when the largest tensor would exceed this many MB.
    conv_tol : float
        SCF energy convergence threshold in hartree.
    scaled : bool
        If True, also return ``'total_ssapt0'``, ``'exch_ind20r_scaled'`` and
        ``'exch_disp20_scaled'``: sSAPT0, with the exchange-induction and
        exchange-dispersion terms scaled by (E(10)exch / E(10)exch(S^2))^3.

    Returns
    -------
    dict of str to float
        Energies in hartree. ``elst10``, ``exch10``, ``exch10_s2``; ``ind20r_ab``: the
        response induction energy of A polarised by the static field of B (CPHF on A),
        ``ind20r_ba`` the reverse, ``ind20r`` their sum; ``exch_ind20r_ab``,
        ``exch_ind20r_ba``, ``exch_ind20r`` likewise (S^2); ``disp20``,
        ``exch_disp20`` (S^2); ``e_int_hf``: counterpoise-corrected RHF interaction
        energy in the dimer basis; ``dhf`` = e_int_hf - (elst10 + exch10 + ind20r +
        exch_ind20r); grouped ``elst`` = elst10, ``exch`` = exch10, ``ind`` = ind20r +
        exch_ind20r + dhf, ``disp`` = disp20 + exch_disp20 and ``total`` (SAPT0).

    Raises
    ------
    NotAvailableError
        A fragment is open-shell.
    ResourceError
        The estimated memory exceeds ``max_memory_mb``.
    ConvergenceError
        An SCF or the CPHF equations did not converge.
    """
    if not (isinstance(max_memory_mb, (int, float)) and max_memory_mb > 0):
        raise InputError(f"max_memory_mb: {max_memory_mb!r} is not a positive number")
    if not (isinstance(conv_tol, float) and 0 < conv_tol < 1e-4):
        raise InputError(f"conv_tol: {conv_tol!r} is not a float between 0 and 1e-4")
    mols = _build_molecules(dimer, basis, jk_auxbasis, ri_auxbasis, max_memory_mb)
    cost = _cost(mols)
    if cost["peak_memory_mb"] > max_memory_mb:
        raise ResourceError(
            f"sapt0: needs about {cost['peak_memory_mb']:.0f} MB for the "
            f"{cost['largest_tensor']} tensor, above the limit of {max_memory_mb:.0f} MB; "
            "raise max_memory_mb or use a smaller basis"
        )
    nbas = cost["nbasis"]
    jk_df = df.DF(mols.dimer, auxbasis=mols.jk_aux)
    jk_df.max_memory = max_memory_mb
    jk_df.verbose = 0
    jk_df.build()

    _, e_ab = _run_rhf(mols.dimer, jk_df, conv_tol, "the dimer")
    ma = _monomer(mols.a, jk_df, conv_tol, "fragment A")
    mb = _monomer(mols.b, jk_df, conv_tol, "fragment B")
    e_int_hf = e_ab - ma.energy - mb.energy

    s = mols.dimer.intor_symmetric("int1e_ovlp")
    v_nn = _nuclear_repulsion_between(mols.a, mols.b)
    cderi = jk_df._cderi if isinstance(jk_df._cderi, np.ndarray) else np.asarray(
        np.vstack(list(jk_df.loop())))
    ia = _Interaction(cderi, nbas, s, ma.v_nuc, mb.v_nuc, v_nn)

    ta = (ma.c_occ, ma.c_occ)
    tb = (mb.c_occ, mb.c_occ)
    elst10 = ia.elst(ta, tb)
    exch10 = ia.first_order_full(ta, tb) - elst10
    exch10_s2 = ia.exch_s2(ta, tb)

    # induction: electrostatic potentials omega = V_nuc + 2 J[P]
    omega_a = ma.v_nuc + 2 * ia.j_matrix(ta)
    omega_b = mb.v_nuc + 2 * ia.j_matrix(tb)
    t_a = _solve_cphf(ma, ma.c_occ.T @ omega_b @ ma.c_vir, jk_df)
    t_b = _solve_cphf(mb, mb.c_occ.T @ omega_a @ mb.c_vir, jk_df)
    ind_ab = 2.0 * float(np.sum(t_a * (ma.c_occ.T @ omega_b @ ma.c_vir)))
    ind_ba = 2.0 * float(np.sum(t_b * (mb.c_occ.T @ omega_a @ mb.c_vir)))
    # derivative of the S^2 polynomial (degree 2 in each density) along the ket change
    step_a = ma.c_vir @ t_a.T
    step_b = mb.c_vir @ t_b.T
    exind_ab = 0.5 * (ia.exch_s2((ma.c_occ + step_a, ma.c_occ), tb)
                      - ia.exch_s2((ma.c_occ - step_a, ma.c_occ), tb))
    exind_ba = 0.5 * (ia.exch_s2(ta, (mb.c_occ + step_b, mb.c_occ))
                      - ia.exch_s2(ta, (mb.c_occ - step_b, mb.c_occ)))

    ri_df = df.DF(mols.dimer, auxbasis=mols.ri_aux)
    ri_df.max_memory = max_memory_mb
    ri_df.verbose = 0
    ri_df.build()
    disp20, exch_disp20 = _dispersion(ma, mb, ri_df, ia, nbas, omega_a, omega_b)

    ind20r = ind_ab + ind_ba
    exch_ind20r = exind_ab + exind_ba
    dhf = e_int_hf - (elst10 + exch10 + ind20r + exch_ind20r)
    out = {
        "elst10": elst10, "exch10": exch10, "exch10_s2": exch10_s2,
        "ind20r_ab": ind_ab, "ind20r_ba": ind_ba, "ind20r": ind20r,
        "exch_ind20r_ab": exind_ab, "exch_ind20r_ba": exind_ba, "exch_ind20r": exch_ind20r,
        "disp20": disp20, "exch_disp20": exch_disp20, "dhf": dhf, "e_int_hf": e_int_hf,
    }
    out.update(group_terms(out))
    if scaled:
        out.update(scaled_terms(out))
    return {k: float(v) for k, v in out.items()}


def group_terms(terms: dict[str, float]) -> dict[str, float]:
    """Grouped SAPT0 components (hartree) from the individual terms.

    Returns ``elst`` = E(10)elst, ``exch`` = E(10)exch, ``ind`` = E(20)ind,resp +
    E(20)exch-ind,resp + δHF, ``disp`` = E(20)disp + E(20)exch-disp and ``total``.
    """
    elst = terms["elst10"]
    exch = terms["exch10"]
    ind = terms["ind20r"] + terms["exch_ind20r"] + terms["dhf"]
    disp = terms["disp20"] + terms["exch_disp20"]
    return {"elst": elst, "exch": exch, "ind": ind, "disp": disp,
            "total": elst + exch + ind + disp}


def scaled_terms(terms: dict[str, float]) -> dict[str, float]:
    """sSAPT0 (Parker et al. 2014): exch-ind and exch-disp times (exch10/exch10_s2)^3.

    δHF keeps its SAPT0 value (defined with the unscaled exchange-induction).
    """
    if terms["exch10_s2"] == 0.0:
        raise InputError("exch10_s2: zero first-order exchange; the sSAPT0 scaling is undefined")
    p = (terms["exch10"] / terms["exch10_s2"]) ** 3
    exind = p * terms["exch_ind20r"]
    exdisp = p * terms["exch_disp20"]
    total = (terms["elst10"] + terms["exch10"] + terms["ind20r"] + exind + terms["dhf"]
             + terms["disp20"] + exdisp)
    return {"exch_ind20r_scaled": exind, "exch_disp20_scaled": exdisp,
            "total_ssapt0": total, "exch_scaling": p}
