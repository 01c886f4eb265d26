"""Production SAPT0 (density-fitted) against a dense, exact-integral reference, term by term.

The reference (tests/sapt0_reference.py) is written from the SRS definitions of
Jeziorski, Moszynski, Szalewicz, Chem. Rev. 94, 1887 (1994): E(1) through the Löwdin
rules for determinants (Jeziorski, Bulski, Piela, Int. J. Quantum Chem. 10, 281 (1976)),
the S^2 terms as the single-interchange part of the antisymmetrizer, CPHF by a dense
solve of the explicit orbital Hessian, four-index integrals without fitting. Production
(interkit.engine.sapt0) is density-fitted as in Hohenstein and Sherrill, J. Chem. Phys.
132, 184111 (2010), and reaches its exchange terms by a different route (transition
densities, hand-truncated S^2 polynomials), so the two share nothing but pyscf's basis
sets and integrals.

Tolerances are the density-fitting error, measured (cc-pVDZ, dimer-centred basis;
|production - reference| in kcal/mol):

=================  =========================  ==========================
term               default fit (cc-pVDZ-JK/RI)  aug-cc-pVTZ-JKFIT / -RI fit
=================  =========================  ==========================
elst10             1.8e-4 (HF) 8.0e-4 (H2O)   4.2e-4 (HF) 1.7e-4 (H2O)
exch10, exch10_s2  2.8e-3      2.3e-3         2.0e-4      1.3e-4
ind20r             4.3e-4      1.6e-4         2.9e-5      3.1e-5
exch_ind20r        3.9e-5      1.3e-4 (A<-B)  1.3e-5      5.2e-6
disp20             9.8e-4      1.2e-3         2.8e-5      3.8e-5
exch_disp20        1.2e-3      1.9e-3         2.4e-5      5.2e-5
e_int_hf           2.4e-3      1.2e-3         1.8e-4      8.0e-5
dhf                1.9e-4      1.0e-4         2.1e-5      7.4e-6
=================  =========================  ==========================

The error falls by about an order of magnitude with the larger fitting basis, which is
what identifies it as fitting error. The checks use the larger fit with tolerances of
about twice the largest measured error of each group: 1e-3 kcal/mol for the first-order
terms and the HF interaction energy (whose SCF fit error enters directly), 2e-4 kcal/mol
for the second-order terms. For scale: in these dimers exch_ind20r is 1.3-1.6 kcal/mol
and exch_disp20 0.19-0.35 kcal/mol, so a wrong factor in either fails by 100 times the
tolerance or more. A looser check with the default fitting basis (5e-3 kcal/mol) guards
the default path.
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import hf_dimer, s22_dimer
from pyscf import lib
from sapt0_reference import Reference

from interkit.engine.sapt0 import sapt0_terms

lib.num_threads(1)

HARTREE_TO_KCAL = 627.509474  # CODATA 2018 hartree energy in kcal/mol (common practice)
BASIS = "cc-pvdz"
BIG_JK, BIG_RI = "aug-cc-pvtz-jkfit", "aug-cc-pvtz-ri"

FIRST_ORDER = ("elst10", "exch10", "exch10_s2", "e_int_hf")
SECOND_ORDER = ("ind20r_ab", "ind20r_ba", "ind20r", "exch_ind20r_ab", "exch_ind20r_ba",
                "exch_ind20r", "disp20", "exch_disp20", "dhf")
TOL_FIRST_KCAL = 1e-3
TOL_SECOND_KCAL = 2e-4
TOL_DEFAULT_FIT_KCAL = 5e-3

DIMERS = {
    "hf-dimer": hf_dimer,
    "water-dimer": lambda: s22_dimer("Water_dimer"),
}
_CACHE: dict = {}


def reference_terms(name: str) -> dict:
    if name not in _CACHE:
        d = DIMERS[name]()
        _CACHE[name] = Reference(d.symbols, d.coordinates, len(d.fragment_a), BASIS).terms()
    return _CACHE[name]


def _diffs_kcal(prod: dict, ref: dict, keys) -> dict:
    return {k: abs(prod[k] - ref[k]) * HARTREE_TO_KCAL for k in keys}


# both dimers together take about 10 s (reference ~4 s each), so neither is marked slow
PARAMS = ["hf-dimer", "water-dimer"]


@pytest.mark.parametrize("name", PARAMS)
def test_reference_is_self_consistent(name):
    """Internal checks of the reference: its polarization parts (the mu = 0 values of
    the Löwdin expressions) equal the textbook closed-shell expressions
    E(20)ind = 2 sum t_ar omega_ar and E(20)disp = 4 sum t_arbs (ar|bs) (Chem. Rev. 1994),
    and the S^2 exchange is below the full exchange by a few per cent, as the S^2
    truncation is known to be for hydrogen-bonded dimers near equilibrium."""
    ref = reference_terms(name)
    assert ref["ind20r_ab"] == pytest.approx(ref["ind20r_ab_direct"], abs=1e-11)
    assert ref["ind20r_ba"] == pytest.approx(ref["ind20r_ba_direct"], abs=1e-11)
    assert ref["disp20"] == pytest.approx(ref["disp20_direct"], abs=1e-11)
    assert 0.95 < ref["exch10_s2"] / ref["exch10"] < 1.0


@pytest.mark.parametrize("name", PARAMS)
def test_fitted_terms_match_dense_reference(name):
    ref = reference_terms(name)
    d = DIMERS[name]()
    prod = sapt0_terms(d, BASIS, jk_auxbasis=BIG_JK, ri_auxbasis=BIG_RI, conv_tol=1e-11)
    first = _diffs_kcal(prod, ref, FIRST_ORDER)
    second = _diffs_kcal(prod, ref, SECOND_ORDER)
    bad = {k: v for k, v in first.items() if v > TOL_FIRST_KCAL}
    bad.update({k: v for k, v in second.items() if v > TOL_SECOND_KCAL})
    assert not bad, f"terms off the dense reference (kcal/mol): {bad}"
    # the grouped total follows from the terms
    total = sum(ref[k] for k in ("elst10", "exch10", "ind20r", "exch_ind20r", "dhf",
                                 "disp20", "exch_disp20"))
    assert abs(prod["total"] - total) * HARTREE_TO_KCAL < 2e-3


@pytest.mark.parametrize("name", PARAMS)
def test_default_fit_within_its_measured_error(name):
    ref = reference_terms(name)
    prod = sapt0_terms(DIMERS[name](), BASIS, conv_tol=1e-11)
    diffs = _diffs_kcal(prod, ref, FIRST_ORDER + SECOND_ORDER)
    bad = {k: v for k, v in diffs.items() if v > TOL_DEFAULT_FIT_KCAL}
    assert not bad, f"terms off the dense reference (kcal/mol): {bad}"
    assert np.isfinite(list(diffs.values())).all()


@pytest.mark.slow
def test_long_range_exchange_sign_with_exact_integrals():
    """Beyond ~8 Å with aug-cc-pVDZ, E(10)exch and E(10)exch(S^2) of the water dimer are
    negative (interkit.engine.sapt0 docstring, there measured with fitted integrals only).
    The exact-integral reference decides that it is the model, not the fit: at 9 and 10 Å
    both are negative, equal to each other within 2 % (single exchange dominates at long
    range), and the fitted values agree with them within 10 % (the fitting error of a
    1e-10 hartree quantity). Measured: exact -1.585e-10 / -1.918e-11 hartree at 9 / 10 Å,
    fitted (pyscf default aug-cc-pVDZ-JKFIT/-RI) 4.6 % / 4.4 % smaller in magnitude."""
    water = s22_dimer("Water_dimer")
    ca, cb = water.centre_of_mass("A"), water.centre_of_mass("B")
    axis = (cb - ca) / np.linalg.norm(cb - ca)
    for r in (9.0, 10.0):
        d = water.translated_b(axis * (r - np.linalg.norm(cb - ca)))
        ref = Reference(d.symbols, d.coordinates, len(d.fragment_a), "aug-cc-pvdz",
                        dimer_scf=False).first_order_terms()
        assert ref["exch10"] < 0 and ref["exch10_s2"] < 0, (r, ref)
        assert ref["exch10_s2"] == pytest.approx(ref["exch10"], rel=0.02)
        prod = sapt0_terms(d, "aug-cc-pvdz")
        assert prod["exch10"] == pytest.approx(ref["exch10"], rel=0.1), (r, prod["exch10"], ref)
