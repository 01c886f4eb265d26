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

import math
from dataclasses import dataclass

import numpy as np
from pyscf import df, gto, lib, scf

from ..errors import ConvergenceError, InputError, NotAvailableError, ResourceError
from ..model.geometry import Dimer
from ..units import ANGSTROM_TO_BOHR

#: residual norm at which the coupled-perturbed Hartree–Fock equations count as solved
CPHF_TOL = 1e-9
#: iteration limit of the CPHF solver
CPHF_MAX_CYCLE = 100

#: keys of the dictionary returned by :func:`sapt0_terms`
TERM_KEYS = (
    "elst10", "exch10", "exch10_s2", "ind20r_ab", "ind20r_ba", "ind20r",
    "exch_ind20r_ab", "exch_ind20r_ba", "exch_ind20r", "disp20", "exch_disp20",
    "dhf", "e_int_hf", "elst", "exch", "ind", "disp", "total",
)

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


# ------------------------------------------------------------------------- SCF
@dataclass
class _Monomer:
    c_occ: np.ndarray
    c_vir: np.ndarray
    e_occ: np.ndarray
    e_vir: np.ndarray
    v_nuc: np.ndarray  # attraction to this monomer's nuclei (AO)
    energy: float

    @property
    def density(self) -> np.ndarray:
        """One-spin density matrix C_occ C_occ^T (AO)."""
        return self.c_occ @ self.c_occ.T


def _run_rhf(mol: gto.Mole, dfobj, conv_tol: float, label: str):
    mf = scf.RHF(mol).density_fit()
    mf.with_df = dfobj
    mf.conv_tol = conv_tol
    mf.conv_tol_grad = math.sqrt(conv_tol) * 0.1
    mf.max_cycle = 100
    mf.verbose = 0
    energy = mf.kernel()
    if not mf.converged:
        mf = scf.newton(mf)
        energy = mf.kernel(mf.mo_coeff, mf.mo_occ)
    if not mf.converged:
        raise ConvergenceError(f"sapt0: RHF of {label} did not converge in the dimer basis")
    return mf, float(energy)


def _monomer(mol: gto.Mole, dfobj, conv_tol: float, label: str) -> _Monomer:
    mf, energy = _run_rhf(mol, dfobj, conv_tol, label)
    occ = mf.mo_occ > 0
    return _Monomer(
        c_occ=np.asarray(mf.mo_coeff[:, occ]), c_vir=np.asarray(mf.mo_coeff[:, ~occ]),
        e_occ=np.asarray(mf.mo_energy[occ]), e_vir=np.asarray(mf.mo_energy[~occ]),
        v_nuc=mol.intor_symmetric("int1e_nuc"), energy=energy,
    )


def _nuclear_repulsion_between(mol_a: gto.Mole, mol_b: gto.Mole) -> float:
    za, zb = mol_a.atom_charges(), mol_b.atom_charges()
    ra, rb = mol_a.atom_coords(), mol_b.atom_coords()
    total = 0.0
    for i in np.nonzero(za)[0]:
        for j in np.nonzero(zb)[0]:
            total += za[i] * zb[j] / np.linalg.norm(ra[i] - rb[j])
    return float(total)


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


# ------------------------------------------------------------------------- CPHF
def _solve_cphf(mon: _Monomer, omega_mo: np.ndarray, dfobj) -> np.ndarray:
    """Amplitudes t (occ, vir) of H t = -omega for the closed-shell static response.

    H t = (e_r - e_a) t + [C_o^T (2 J[D] - K[D]) C_v], D = C_o t C_v^T + transpose.
    """
    denom = mon.e_vir[None, :] - mon.e_occ[:, None]
    co, cv = mon.c_occ, mon.c_vir

    def apply(t):
        dm = co @ t @ cv.T
        dm = dm + dm.T
        vj, vk = dfobj.get_jk(dm, hermi=1)
        return denom * t + co.T @ (2 * vj - vk) @ cv

    rhs = -omega_mo
    x = rhs / denom
    r = rhs - apply(x)
    z = r / denom
    p = z.copy()
    rz = float(np.sum(r * z))
    scale = max(float(np.linalg.norm(rhs)), 1e-30)
    for _ in range(CPHF_MAX_CYCLE):
        if np.linalg.norm(r) < CPHF_TOL * scale:
            return x
        hp = apply(p)
        alpha = rz / float(np.sum(p * hp))
        x = x + alpha * p
        r = r - alpha * hp
        z = r / denom
        rz_new = float(np.sum(r * z))
        p = z + (rz_new / rz) * p
        rz = rz_new
    if np.linalg.norm(r) < CPHF_TOL * scale * 100:
        return x
    raise ConvergenceError(
        f"sapt0: CPHF residual {np.linalg.norm(r) / scale:.1e} after {CPHF_MAX_CYCLE} "
        "iterations, above the tolerance"
    )


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
