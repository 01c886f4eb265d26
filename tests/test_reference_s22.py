"""Counterpoise-corrected interaction energies against published CCSD(T)/CBS values.

Geometries: the S22 set and the S22x5 curves as shipped in ``ase.data.s22``
(Jurečka, Šponer, Černý, Hobza, PCCP 8, 1985 (2006); Gráfová et al., JCTC 6, 2365
(2010)). Reference energies: S22 (2006) and S22B (Marshall et al., JCP 135, 194102
(2011)), kcal/mol, negative = bound.
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import s22_dimer

import interkit as ik

# S22B CCSD(T)/CBS (Marshall et al. 2011); the 2006 values differ by < 0.04 for these
S22B = {"Water_dimer": -4.989, "Ammonia_dimer": -3.133, "Methane_dimer": -0.527}
# S22x5 water dimer at 0.9, 1.0, 1.2, 1.5, 2.0 x equilibrium (Gráfová et al. 2010)
S22X5_WATER = {"0.9": -4.32, "1.0": -4.97, "1.2": -4.04, "1.5": -2.29, "2.0": -0.96}

# MP2/aug-cc-pVTZ with counterpoise underbinds small hydrogen-bonded dimers by a few
# tenths of a kcal/mol relative to CCSD(T)/CBS (basis incompleteness plus the MP2
# error; magnitude recalled from the literature, memory): 0.40 kcal/mol tolerance.
MP2_ATZ_TOLERANCE = 0.40
# B3LYP-D3(BJ) reproduces S22 with a mean absolute error of about 0.3 kcal/mol in large
# bases (memory); def2-TZVP and single-system scatter allow 0.6 kcal/mol here.
B3LYP_D3BJ_TZVP_TOLERANCE = 0.60


@pytest.fixture(scope="module")
def store(tmp_path_factory):
    return str(tmp_path_factory.mktemp("reference-store"))


def _single_point(name: str, level: str, store: str):
    spec = ik.ScanSpec(dimer=s22_dimer(name), coordinate=ik.CentreOfMass(), factors=[1.0], levels=[level])
    ds = ik.run_scan(spec, cache=store, progress=False)
    assert (ds["status"] != "failed").all(), ds["status_detail"].values
    return ds


@pytest.mark.parametrize("name", sorted(S22B))
def test_mp2_atz_matches_ccsdt_cbs(name, store):
    ds = _single_point(name, "mp2/aug-cc-pvtz", store)
    e = float(ds["e_int"].item())
    assert e == pytest.approx(S22B[name], abs=MP2_ATZ_TOLERANCE)
    # counterpoise-corrected energies are less negative than uncorrected (practice)
    assert float(ds["e_int_nocp"].item()) < e
    assert float(ds["bsse"].item()) > 0


@pytest.mark.parametrize("name", sorted(S22B))
def test_b3lyp_d3bj_tzvp_matches_ccsdt_cbs(name, store):
    ds = _single_point(name, "b3lyp-d3bj/def2-tzvp", store)
    assert float(ds["e_int"].item()) == pytest.approx(S22B[name], abs=B3LYP_D3BJ_TZVP_TOLERANCE)


def test_s22x5_water_curve_through_frames(store):
    """The S22x5 water-dimer curve on ASE's own geometries (Frames): same shape as the
    published CCSD(T)/CBS curve, minimum at the 1.0 point."""
    from ase.data import s22

    keys = list(S22X5_WATER)
    frames = ik.Frames([s22.create_s22_system(f"Water_dimer_{k}").positions for k in keys])
    spec = ik.ScanSpec(dimer=s22_dimer("Water_dimer"), coordinate=frames, levels=["mp2/aug-cc-pvtz"])
    ds = ik.run_scan(spec, cache=store, progress=False)
    e = ds["e_int"].sel(level="mp2/aug-cc-pvtz").values
    ref = np.array([S22X5_WATER[k] for k in keys])
    assert int(np.argmin(e)) == 1
    assert np.all(np.abs(e - ref) <= MP2_ATZ_TOLERANCE)
    # relative shape: energies referenced to the minimum agree more tightly
    assert np.all(np.abs((e - e[1]) - (ref - ref[1])) <= 0.35)
    # own-basis monomers of a rigid-body curve are computed once, not per frame
    assert len(set(ds["job_key"].sel(role="b_own_basis").values.ravel())) == 1


def test_bsse_shrinks_from_def2_svp_to_def2_tzvp(store):
    # practice: the BSSE shrinks as the basis grows (REFERENCES.md lists 1.88 and 0.36
    # kcal/mol for HF on this dimer, our own earlier measurement, used here as a trend)
    svp = _single_point("Water_dimer", "hf/def2-svp", store)
    tzvp = _single_point("Water_dimer", "hf/def2-tzvp", store)
    b_svp, b_tzvp = float(svp["bsse"].item()), float(tzvp["bsse"].item())
    assert b_svp > b_tzvp > 0
    assert b_svp > 3 * b_tzvp
