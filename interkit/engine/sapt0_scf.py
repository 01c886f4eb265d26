"""The SCF pieces of a SAPT0 calculation (:mod:`interkit.engine.sapt0`).

Density-fitted RHF of the dimer and of each monomer in the dimer-centred basis, and
the monomer's coupled-perturbed Hartree–Fock (CPHF) response to a static potential.
All energies are in hartree. The compute core prints nothing and writes no files.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from pyscf import gto, scf

from ..errors import ConvergenceError

#: residual norm at which the coupled-perturbed Hartree–Fock equations count as solved
CPHF_TOL = 1e-9
#: iteration limit of the CPHF solver
CPHF_MAX_CYCLE = 100


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
