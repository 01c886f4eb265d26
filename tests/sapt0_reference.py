"""Dense, exact-integral closed-shell SAPT0 written for the tests (no density fitting).

An independent reference for interkit.engine.sapt0. It shares no code or intermediate
with it: the integrals are pyscf's four-index AO integrals (``mol.intor('int2e')``), the
monomer and dimer Hartree–Fock runs are conventional, CPHF is solved by a dense linear
solve of the explicit orbital Hessian, and every exchange term comes from ONE routine,
the Löwdin (generalized Slater–Condon) expression of <Φ0|V A Ψ> for a bra Φ0 = Φ_A Φ_B
and a ket Ψ that is a product of monomer determinants with arbitrary (non-orthogonal)
orbitals, written in the occupied-orbital basis with spin orbitals kept separate.

Definitions (Jeziorski, Moszynski, Szalewicz, Chem. Rev. 94, 1887 (1994), SRS theory):

* E(1) = <Φ0|V A Φ0> / <Φ0|A Φ0> (Jeziorski, Bulski, Piela, Int. J. Quantum Chem. 10,
  281 (1976) for determinants); E(10)elst = <Φ0|V|Φ0>, E(10)exch = E(1) - E(10)elst.
* E(2) = [<Φ0|V A Φ1> - E(1) <Φ0|A Φ1>] / <Φ0|A Φ0> with Φ1 the induction (CPHF,
  "resp") or dispersion (uncoupled) first-order function; the exchange part is
  E(2) - E(2)pol.
* The S^2 approximation keeps, in the antisymmetrizer A = A_A A_B (1 + P' + P'' + ...),
  only the single interchanges P' of one electron of A with one of B (Chem. Rev. 1994,
  sec. III): E(10)exch(S^2) = <V P'> - <V><P'>, and in second order
  E(20)exch(S^2) = <V P' Φ1> - <V Φ1><P'> - <V><P' Φ1>.

How the single-exchange part is isolated here: in the Löwdin expansion of <Φ0|O A Ψ>
every permutation pairs each bra orbital with one ket orbital; a permutation in the coset
of k interchanges pairs exactly k bra orbitals of A with ket orbitals of B. Giving every
such (bra A, ket B) pairing a weight μ turns numerator and denominator into polynomials
in μ whose μ^k coefficients are the k-fold interchange parts, so the S^2 terms are the
first derivative at μ = 0 of the weighted expressions and the full terms their values at
μ = 1 minus those at μ = 0. The derivative in μ is a central difference (step 1e-4; the
expressions are smooth rational functions of μ, so the error is ~1e-8 relative), the
derivative along the CPHF amplitudes is a complex step (exact to rounding, the
expressions being analytic in the ket coefficients), and the dispersion function, a sum
of products of single excitations, is applied exactly through multilinearity in the ket
orbitals.

Units: hartree. Geometry input in angstrom.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from pyscf import gto, scf

ANGSTROM_TO_BOHR = 1.0 / 0.529177210903  # CODATA 2018 Bohr radius in angstrom
MU_STEP = 1e-4
COMPLEX_STEP = 1e-30


def molecules(symbols, coords_angstrom, n_a: int, basis: str):
    """Dimer, A-with-ghost-B and B-with-ghost-A pyscf molecules (dimer-centred basis)."""
    def build(real):
        atoms = []
        for i, (s, xyz) in enumerate(zip(symbols, coords_angstrom)):
            name = s if real(i) else "ghost-" + s
            atoms.append((name, tuple(float(x) * ANGSTROM_TO_BOHR for x in xyz)))
        return gto.M(atom=atoms, unit="Bohr", basis=basis, verbose=0)
    return build(lambda i: True), build(lambda i: i < n_a), build(lambda i: i >= n_a)


def conventional_rhf(mol) -> scf.hf.RHF:
    mf = scf.RHF(mol)
    mf.conv_tol = 1e-12
    mf.conv_tol_grad = 1e-8
    mf.verbose = 0
    mf.kernel()
    assert mf.converged
    return mf


@dataclass
class Monomer:
    co: np.ndarray  # occupied MO coefficients (AO x occ)
    cv: np.ndarray  # virtual MO coefficients (AO x vir)
    eo: np.ndarray
    ev: np.ndarray
    v_nuc: np.ndarray  # attraction of an electron to this monomer's nuclei (AO)
    energy: float


def monomer(mol) -> Monomer:
    mf = conventional_rhf(mol)
    occ = mf.mo_occ > 0
    return Monomer(mf.mo_coeff[:, occ], mf.mo_coeff[:, ~occ], mf.mo_energy[occ],
                   mf.mo_energy[~occ], mol.intor("int1e_nuc"), float(mf.e_tot))


class Reference:
    """All SAPT0 terms of one closed-shell dimer with exact four-index integrals."""

    def __init__(self, symbols, coords_angstrom, n_a: int, basis: str, dimer_scf: bool = True):
        mol_ab, mol_a, mol_b = molecules(symbols, coords_angstrom, n_a, basis)
        self.e_dimer = float(conventional_rhf(mol_ab).e_tot) if dimer_scf else float("nan")
        self.a, self.b = monomer(mol_a), monomer(mol_b)
        self.s = mol_ab.intor("int1e_ovlp")
        self.eri = mol_ab.intor("int2e")  # (mu nu | la si), chemists' notation
        za, zb = mol_a.atom_charges(), mol_b.atom_charges()
        ra, rb = mol_a.atom_coords(), mol_b.atom_coords()
        self.v_nn = float(sum(za[i] * zb[j] / np.linalg.norm(ra[i] - rb[j])
                              for i in range(len(za)) for j in range(len(zb))
                              if za[i] and zb[j]))
        self.na, self.nb = self.a.co.shape[1], self.b.co.shape[1]
        bra_a, bra_b = self.a.co, self.b.co
        # half-transformed (k mu | m nu) with bra orbitals k of A and m of B
        self.g_bra = np.einsum("pk,qm,pxqy->kxmy", bra_a, bra_b,
                               self.eri, optimize=True)
        # one-electron parts: bra A sees the nuclei of B, bra B the nuclei of A
        self.h_a = bra_a.T @ self.b.v_nuc  # (k, AO)
        self.h_b = bra_b.T @ self.a.v_nuc
        self.s_a = bra_a.T @ self.s
        self.s_b = bra_b.T @ self.s
        n = self.na + self.nb
        self.cross = np.zeros((n, n), dtype=bool)  # bra A (rows) paired with ket B (cols)
        self.cross[: self.na, self.na:] = True

    # ------------------------------------------------------------------ Löwdin functional
    def _spin_block(self, ket_a, ket_b, mu):
        """Weighted overlap S~ (bra x ket), its determinant and inverse for one spin."""
        ket = np.hstack([ket_a, ket_b])
        w = np.where(self.cross, mu, 1.0)
        s_bra_ket = np.vstack([self.s_a @ ket, self.s_b @ ket]) * w
        return ket, w, np.linalg.det(s_bra_ket), np.linalg.inv(s_bra_ket)

    def numerator_denominator(self, kets, mu):
        """(<Φ0|V A Ψ>, <Φ0|A Ψ>) up to a common constant, with weight mu per (bra A, ket
        B) pairing. kets: {'alpha': (C_A, C_B), 'beta': (C_A, C_B)} ket orbitals (AO)."""
        na = self.na
        blocks = {}
        for spin, (ka, kb) in kets.items():
            blocks[spin] = self._spin_block(ka, kb, mu)
        det = blocks["alpha"][2] * blocks["beta"][2]
        one = 0.0
        for ket, w, _, d in blocks.values():
            h = np.vstack([self.h_a @ ket, self.h_b @ ket]) * w  # (bra, ket)
            one = one + np.einsum("kl,lk->", h, d)
        two = 0.0
        spins = list(blocks.values())
        for ket1, w1, _, d1 in spins:
            for ket2, w2, _, d2 in spins:
                # (k l | m n): k bra A (spin 1), l ket (spin 1), m bra B (spin 2), n ket (spin 2)
                g = np.einsum("kxmy,xl,yn->klmn", self.g_bra, ket1, ket2, optimize=True)
                g = g * w1[:na, :, None, None] * w2[na:, None, None, :]
                two = two + np.einsum("klmn,lk,nm->", g, d1[:, :na], d2[:, na:], optimize=True)
                if ket1 is ket2:  # exchange needs equal spins
                    two = two - np.einsum("klmn,lm,nk->", g, d1[:, na:], d1[:, :na],
                                          optimize=True)
        return det * (one + two + self.v_nn), det

    def ground_kets(self):
        k = (self.a.co, self.b.co)
        return {"alpha": k, "beta": k}

    def first_order(self, mu):
        num, den = self.numerator_denominator(self.ground_kets(), mu)
        return num / den

    def first_order_terms(self) -> dict[str, float]:
        """E(10)elst, E(10)exch and E(10)exch(S^2); the S^2 derivative by a complex step
        in mu (no subtraction, so it stays accurate when E(10)exch is ~1e-10 hartree)."""
        elst = self.first_order(0.0)
        s2 = self.first_order(1j * COMPLEX_STEP).imag / COMPLEX_STEP
        return {"elst10": float(np.real(elst)), "exch10_s2": float(s2),
                "exch10": float(np.real(self.first_order(1.0) - elst))}

    # ------------------------------------------------------------------ second order
    def second_order(self, apply_phi1, mu):
        """[<Φ0|V A Φ1> - E(1)(mu) <Φ0|A Φ1>] / <Φ0|A Φ0> at weight mu; apply_phi1(mu)
        returns the weighted (numerator, denominator) applied to Φ1."""
        n0, d0 = self.numerator_denominator(self.ground_kets(), mu)
        n1, d1 = apply_phi1(mu)
        return (n1 - (n0 / d0) * d1) / d0

    def s2_and_full(self, func):
        """(value at mu=0, d/dmu at 0 [S^2 exchange], value at 1 minus value at 0)."""
        v0 = func(0.0)
        ds = (func(MU_STEP) - func(-MU_STEP)) / (2 * MU_STEP)
        return v0, ds, func(1.0) - v0

    def induction_phi1(self, t, which):
        """Φ1 = sum_{a r, spin} t_ar Φ_a^r of monomer `which`: complex-step derivative of
        the ket with occupied orbitals a -> a + i h sum_r t_ar r in both spins."""
        mon = self.a if which == "A" else self.b

        def apply(mu):
            pert = mon.co + 1j * COMPLEX_STEP * (mon.cv @ t.T)
            k = (pert, self.b.co) if which == "A" else (self.a.co, pert)
            num, den = self.numerator_denominator({"alpha": k, "beta": k}, mu)
            return num.imag / COMPLEX_STEP, den.imag / COMPLEX_STEP
        return apply

    def dispersion_phi1(self, t):
        """Φ1 = sum_{arbs, spins} t_arbs Φ_{a b}^{r s}, applied exactly: the functionals
        are multilinear in the ket orbitals, so one column of A replaced by a + r and the
        B orbitals of one spin moved along i h sum_s t_arbs s give each (a, r) block."""
        a, b = self.a, self.b
        ground = self.ground_kets()

        def apply(mu):
            num_tot = 0.0
            den_tot = 0.0
            for spin_b in ("alpha", "beta"):  # A excited in alpha, B in either spin
                for ia in range(self.na):
                    # the y-derivative is linear in the B direction: the unexcited-A terms
                    # of all r of this a are one evaluation along sum_r t_arbs
                    terms = [(a.cv[:, ir], t[ia, ir], 1.0) for ir in range(a.cv.shape[1])]
                    terms.append((None, t[ia].sum(axis=0), -1.0))
                    for add, amp, sign in terms:
                        ka = a.co.copy()
                        if add is not None:
                            ka[:, ia] += add
                        pert_b = b.co + 1j * COMPLEX_STEP * (b.cv @ amp.T)
                        kets = {"alpha": (ka, b.co), "beta": ground["beta"]}
                        kets[spin_b] = (kets[spin_b][0], pert_b)
                        n1, d1 = self.numerator_denominator(kets, mu)
                        num_tot += sign * n1.imag / COMPLEX_STEP
                        den_tot += sign * d1.imag / COMPLEX_STEP
            # A excited in beta gives the same by spin symmetry of the closed-shell bra
            return 2 * num_tot, 2 * den_tot
        return apply

    # ------------------------------------------------------------------ CPHF and amplitudes
    def cphf(self, mon: Monomer, omega_ao):
        """Response amplitudes from the explicit closed-shell orbital Hessian:
        (e_r - e_a) t_ar + sum [4(ar|a'r') - (aa'|rr') - (ar'|a'r)] t_a'r' = -omega_ar."""
        co, cv = mon.co, mon.cv
        no, nv = co.shape[1], cv.shape[1]
        mo = np.hstack([co, cv])
        g = np.einsum("pi,qj,rk,sl,pqrs->ijkl", mo, mo, mo, mo, self.eri, optimize=True)
        o, v = slice(0, no), slice(no, no + nv)
        hess = (4 * g[o, v, o, v] - g[o, o, v, v].transpose(0, 2, 1, 3)
                - g[o, v, o, v].transpose(0, 3, 2, 1))
        hess = hess.reshape(no * nv, no * nv)
        hess += np.diag((mon.ev[None, :] - mon.eo[:, None]).ravel())
        omega = co.T @ omega_ao @ cv
        return np.linalg.solve(hess, -omega.ravel()).reshape(no, nv), omega

    def potential(self, mon: Monomer):
        """Electrostatic potential of a monomer (AO): nuclei + 2 J[P]."""
        p = mon.co @ mon.co.T
        return mon.v_nuc + 2 * np.einsum("pqrs,rs->pq", self.eri, p, optimize=True)

    def terms(self) -> dict[str, float]:
        a, b = self.a, self.b
        out = self.first_order_terms()
        t_a, om_b = self.cphf(a, self.potential(b))
        t_b, om_a = self.cphf(b, self.potential(a))
        for label, t, which in (("ab", t_a, "A"), ("ba", t_b, "B")):
            phi1 = self.induction_phi1(t, which)
            ind, exind, _ = self.s2_and_full(lambda mu, f=phi1: self.second_order(f, mu))
            out["ind20r_" + label] = ind
            out["exch_ind20r_" + label] = exind
        # closed-shell induction energy: 2 sum t_ar omega_ar (the pol part of the above)
        out["ind20r_ab_direct"] = 2 * float(np.sum(t_a * om_b))
        out["ind20r_ba_direct"] = 2 * float(np.sum(t_b * om_a))
        out["ind20r"] = out["ind20r_ab"] + out["ind20r_ba"]
        out["exch_ind20r"] = out["exch_ind20r_ab"] + out["exch_ind20r_ba"]
        # uncoupled dispersion amplitudes t_arbs = (ar|bs) / (e_a + e_b - e_r - e_s)
        v = np.einsum("pa,qr,xb,ys,pqxy->arbs", a.co, a.cv, b.co, b.cv, self.eri,
                      optimize=True)
        den = (a.eo[:, None, None, None] - a.ev[None, :, None, None]
               + b.eo[None, None, :, None] - b.ev[None, None, None, :])
        t = v / den
        out["disp20_direct"] = 4 * float(np.sum(t * v))
        phi1 = self.dispersion_phi1(t)
        cache = {}

        def second(mu):
            if mu not in cache:
                cache[mu] = self.second_order(phi1, mu)
            return cache[mu]
        v0 = second(0.0)
        out["disp20"] = v0
        out["exch_disp20"] = (second(MU_STEP) - second(-MU_STEP)) / (2 * MU_STEP)
        out["e_int_hf"] = self.e_dimer - a.energy - b.energy
        out["dhf"] = out["e_int_hf"] - (out["elst10"] + out["exch10"] + out["ind20r"]
                                        + out["exch_ind20r"])
        return {k: float(np.real(x)) for k, x in out.items()}
