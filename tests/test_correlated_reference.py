"""SCS-MP2 and CCSD(T) counterpoise energies against pyscf calculations written here.

Each of the five counterpoise calculations of a point (dimer; A and B in the dimer basis;
A and B in their own basis) is recomputed directly with pyscf and compared with the total
energy interkit records for it, to 1e-8 hartree.

Treatment reproduced (read from interkit/engine/energy.py): SCS-MP2 on a density-fitted
RHF (pyscf's default fitting basis for the orbital basis), and the MP2 step fitted with
the SAME fitting object, because pyscf's ``MP2(mf).density_fit()`` reuses the SCF's
``with_df``; CCSD(T) on a conventional RHF; frozen core = the 1s shell of each real
first-row atom (common practice; ghost atoms carry no electrons).
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import hf_dimer
from pyscf import cc, gto, lib, mp, scf

import interkit as ik

lib.num_threads(1)

BOHR_PER_ANGSTROM = 1.0 / 0.529177210903  # CODATA 2018 Bohr radius
# Grimme, J. Chem. Phys. 118, 9095 (2003): opposite-spin 6/5, same-spin 1/3
C_OS, C_SS = 6.0 / 5.0, 1.0 / 3.0
BASIS = "6-31g*"
CONV = 1e-12
ROLES = ("dimer", "a_dimer_basis", "b_dimer_basis", "a_own_basis", "b_own_basis")


def role_molecule(ds, role: str) -> gto.Mole:
    symbols = [str(s) for s in ds["symbol"].values]
    frag = [str(f) for f in ds["fragment"].values]
    xyz = ds["coordinates"].values[0] * BOHR_PER_ANGSTROM
    atoms = []
    for s, f, r in zip(symbols, frag, xyz):
        if role == "dimer":
            atoms.append((s, tuple(r)))
        else:
            own = role[0].upper()
            if f == own:
                atoms.append((s, tuple(r)))
            elif role.endswith("dimer_basis"):
                atoms.append(("ghost-" + s, tuple(r)))
    return gto.M(atom=atoms, unit="Bohr", basis=BASIS, verbose=0)


def n_frozen(mol: gto.Mole) -> int:
    """1s core of first-row atoms (Li-Ne), real atoms only."""
    return sum(1 for i in range(mol.natm) if 3 <= mol.atom_charge(i) <= 10)


def scs_mp2_total(mol: gto.Mole) -> tuple[float, float]:
    """(SCS-MP2 total, plain DF-MP2 total) in hartree; the pair energies are built here
    from the fitted (ia|jb) and the first-order amplitudes t_ij^ab = (ia|jb)/D."""
    mf = scf.RHF(mol).density_fit()
    mf.conv_tol = CONV
    mf.verbose = 0
    mf.kernel()
    assert mf.converged
    nf = n_frozen(mol)
    occ = mf.mo_occ > 0
    co = mf.mo_coeff[:, occ][:, nf:]
    cv = mf.mo_coeff[:, ~occ]
    eo, ev = mf.mo_energy[occ][nf:], mf.mo_energy[~occ]
    nao = mol.nao
    lov = []
    for block in mf.with_df.loop():
        b3 = lib.unpack_tril(block).reshape(-1, nao, nao)
        lov.append(np.einsum("pi,Qpq,qa->Qia", co, b3, cv, optimize=True))
    lov = np.concatenate(lov)
    ovov = np.einsum("Qia,Qjb->iajb", lov, lov, optimize=True)
    denom = eo[:, None, None, None] - ev[None, :, None, None] + eo[None, None, :, None] - ev
    t2 = ovov / denom
    e_os = float(np.einsum("iajb,iajb->", t2, ovov))
    e_ss = float(np.einsum("iajb,iajb->", t2 - t2.transpose(0, 3, 2, 1), ovov))
    # pyscf's own DF-MP2 with the same fitting object agrees with the pair sum
    ref = mp.MP2(mf).density_fit()
    ref.frozen = nf or None
    ref.verbose = 0
    ref.kernel()
    assert ref.e_corr == pytest.approx(e_os + e_ss, abs=1e-10)
    return float(mf.e_tot) + C_OS * e_os + C_SS * e_ss, float(mf.e_tot) + e_os + e_ss


def ccsd_t_total(mol: gto.Mole) -> float:
    mf = scf.RHF(mol)
    mf.conv_tol = CONV
    mf.verbose = 0
    mf.kernel()
    assert mf.converged
    solver = cc.CCSD(mf)
    solver.frozen = n_frozen(mol) or None
    solver.conv_tol = 1e-11
    solver.verbose = 0
    solver.kernel()
    assert solver.converged
    return float(mf.e_tot + solver.e_corr + solver.ccsd_t())


@pytest.fixture(scope="module")
def scan():
    spec = ik.ScanSpec(dimer=hf_dimer(), coordinate=ik.AtomPair(1, 2), factors=[1.0],
                       levels=[f"scs-mp2/{BASIS}", f"ccsd(t)/{BASIS}", f"mp2/{BASIS}"],
                       scf_threshold_hartree=CONV)
    return ik.run_scan(spec, progress=False, executor="serial")


def _recorded(ds, level: str) -> dict:
    e = ds["e_total_hartree"].sel(level=level).values[0]
    return dict(zip([str(r) for r in ds["role"].values], e))


def test_scs_mp2_energies_equal_pyscf_pair_energies_with_grimme_coefficients(scan):
    recorded = _recorded(scan, f"scs-mp2/{BASIS}")
    plain = _recorded(scan, f"mp2/{BASIS}")
    for role in ROLES:
        scs, mp2 = scs_mp2_total(role_molecule(scan, role))
        assert recorded[role] == pytest.approx(scs, abs=1e-8), role
        assert plain[role] == pytest.approx(mp2, abs=1e-8), role


def test_ccsd_t_energies_equal_pyscf_ccsd_t(scan):
    recorded = _recorded(scan, f"ccsd(t)/{BASIS}")
    for role in ROLES:
        assert recorded[role] == pytest.approx(ccsd_t_total(role_molecule(scan, role)),
                                               abs=1e-8), role


def test_interaction_energy_is_the_counterpoise_difference_in_kcal(scan):
    """e_int = E(dimer) - E(A, dimer basis) - E(B, dimer basis) (Boys and Bernardi,
    Mol. Phys. 19, 553 (1970)), in kcal/mol (CODATA 2018: 627.509474 kcal/mol per Eh)."""
    for level in scan["level"].values:
        e = _recorded(scan, str(level))
        expected = (e["dimer"] - e["a_dimer_basis"] - e["b_dimer_basis"]) * 627.509474
        assert float(scan["e_int"].sel(level=level).values[0]) == pytest.approx(expected, abs=1e-6)
