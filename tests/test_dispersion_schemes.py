"""The dispersion dimension: one SCF per point serves every post-hoc scheme."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import s22_dimer

import interkit as ik
from interkit.corrections import flatten_dispersion
from interkit.units import ANGSTROM_TO_BOHR, HARTREE_TO_KCAL_PER_MOL

SCHEMES = ["none", "d3zero", "d3bj", "d4", "d3bj-atm"]


@pytest.fixture(scope="module")
def comparison(tmp_path_factory):
    """HF dimer, three levels (HF, B3LYP, M06-2X), five schemes, with forces."""
    text = """4
HF dimer, test geometry
F   0.000000  0.000000  0.000000
H   0.000000  0.000000  0.920000
F   0.000000  0.000000  2.750000
H   0.850000  0.000000  3.050000
"""
    dimer = ik.Dimer.from_xyz_string(text, name="hf-dimer")
    spec = ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(1, 2), factors=[0.95, 1.1],
                       levels=["hf/sto-3g", "b3lyp/sto-3g", "m062x/sto-3g"], dispersion=SCHEMES,
                       forces=True, conv_tol=1e-10)
    return spec, ik.run_scan(spec, executor="serial", progress=False)


def _library_energy(symbols, coords_angstrom, functional, scheme):
    """The dispersion libraries' own value (s-dftd3 / dftd4 through their pyscf bindings),
    on a pyscf Mole built here independently of interkit's engine."""
    from pyscf import gto
    from pyscf.dispersion import dftd3, dftd4

    mol = gto.M(atom=[(s, tuple(x)) for s, x in zip(symbols, np.asarray(coords_angstrom) * ANGSTROM_TO_BOHR)],
                unit="Bohr", basis="sto-3g", spin=None, verbose=0)
    base, _, three = scheme.partition("-")
    if base == "d4":
        model = dftd4.DFTD4Dispersion(mol, functional, atm=three == "atm")
    else:
        model = dftd3.DFTD3Dispersion(mol, functional, version=base, atm=three == "atm")
    return float(model.get_dispersion()["energy"])


def test_stored_dispersion_equals_the_libraries_values(comparison):
    spec, ds = comparison
    a, b = list(spec.dimer.fragment_a), list(spec.dimer.fragment_b)
    symbols = np.array(ds["symbol"].values, dtype=str)
    for pi in range(ds.sizes["distance"]):
        xyz = ds["coordinates"].values[pi]
        for scheme in ("d3zero", "d3bj", "d4", "d3bj-atm"):
            e_ab = _library_energy(symbols, xyz, "b3lyp", scheme)
            e_a = _library_energy(symbols[a], xyz[a], "b3lyp", scheme)
            e_b = _library_energy(symbols[b], xyz[b], "b3lyp", scheme)
            expected = (e_ab - e_a - e_b) * HARTREE_TO_KCAL_PER_MOL
            stored = float(ds["e_disp_corr"].sel(level="b3lyp/sto-3g", dispersion=scheme).values[pi])
            assert stored == pytest.approx(expected, abs=1e-9), scheme
            # the dimer's total energy carries the library's dimer value
            shift = ds["e_total_hartree"].sel(level="b3lyp/sto-3g", role="dimer").transpose("distance", "dispersion").values[pi]
            assert shift[SCHEMES.index(scheme)] - shift[0] == pytest.approx(e_ab, abs=1e-11)


def test_one_scf_serves_every_scheme_and_matches_a_suffix_level(comparison, tmp_path):
    spec, ds = comparison
    # the scan computed exactly the calculations of the scan without schemes
    plain = ik.ScanSpec(dimer=spec.dimer, coordinate=spec.coordinate, factors=spec.factors,
                        levels=spec.levels, forces=True, conv_tol=1e-10)
    assert ds.attrs["calculations_computed"] == len(ik.plan.plan_scan(plain).jobs)
    # a scheme on the shared SCF equals the same scheme run as a level of its own
    single = ik.run_scan(ik.ScanSpec(dimer=spec.dimer, coordinate=spec.coordinate, factors=spec.factors,
                                     levels=["b3lyp-d3bj/sto-3g"], forces=True, conv_tol=1e-10),
                         executor="serial", progress=False)
    pair = ds.sel(level="b3lyp/sto-3g", dispersion="d3bj")
    np.testing.assert_allclose(pair["e_int"].values, single["e_int"].values[0], atol=1e-6)
    np.testing.assert_allclose(pair["forces"].values, single["forces"].values[0], atol=1e-5)
    np.testing.assert_allclose(pair["force_along"].values, single["force_along"].values[0], atol=1e-5)
    # the scheme's part is the difference to the uncorrected curve
    diff = ds["e_int"].sel(dispersion="d3bj") - ds["e_int"].sel(dispersion="none")
    np.testing.assert_allclose(diff.sel(level="b3lyp/sto-3g").values,
                               ds["e_disp_corr"].sel(level="b3lyp/sto-3g", dispersion="d3bj").values, atol=1e-9)


def test_unavailable_and_non_dft_pairs_are_reported_not_crashed(comparison):
    _, ds = comparison
    status = ds["dispersion_status"]
    assert str(status.sel(level="m062x/sto-3g", dispersion="d3zero").values) == "ok"
    for scheme in ("d3bj", "d4"):
        text = str(status.sel(level="m062x/sto-3g", dispersion=scheme).values)
        assert text.startswith("unavailable") and "m062x" in text
        assert np.isnan(ds["e_int"].sel(level="m062x/sto-3g", dispersion=scheme).values).all()
    assert str(status.sel(level="hf/sto-3g", dispersion="d4").values).startswith("not applicable")
    assert np.isfinite(ds["e_int"].sel(level="hf/sto-3g", dispersion="none").values).all()
    assert np.isnan(ds["e_int"].sel(level="hf/sto-3g", dispersion="d4").values).all()
    # the three-body term is small next to the two-body part for a dimer of four atoms
    two = ds["e_disp_corr"].sel(level="b3lyp/sto-3g", dispersion="d3bj").values
    three = ds["e_disp_corr"].sel(level="b3lyp/sto-3g", dispersion="d3bj-atm").values - two
    assert np.all(np.abs(three) < 0.05 * np.abs(two))


def test_file_round_trip_and_folded_view(comparison, tmp_path):
    _, ds = comparison
    path = tmp_path / "schemes.nc"
    ik.save_scan(ds, path)
    back = ik.open_scan(path)
    assert back["e_int"].dims == ("level", "dispersion", "distance")
    np.testing.assert_array_equal(back["e_int"].values, ds["e_int"].values)
    flat = flatten_dispersion(back)
    labels = [str(x) for x in flat["level"].values]
    assert labels == ["hf/sto-3g", "b3lyp/sto-3g", "b3lyp-d3zero/sto-3g", "b3lyp-d3bj/sto-3g",
                      "b3lyp-d4/sto-3g", "b3lyp-d3bj-atm/sto-3g", "m062x/sto-3g", "m062x-d3zero/sto-3g"]
    assert flat["forces"].dims == ("level", "distance", "atom", "xyz")
    np.testing.assert_array_equal(flat["e_int"].sel(level="b3lyp-d4/sto-3g").values,
                                  ds["e_int"].sel(level="b3lyp/sto-3g", dispersion="d4").values)
    rows = ik.analysis.minimum_table(back)
    assert [r["level"] for r in rows] == labels


def test_ranking_skips_pairs_without_values(comparison):
    from interkit.comparison import ranking_table

    _, ds = comparison
    rows = ranking_table(ds, reference_level="hf/sto-3g")
    pairs = {(r["level"], r["dispersion"]) for r in rows}
    assert ("m062x/sto-3g", "d4") not in pairs
    assert ("b3lyp/sto-3g", "d3bj-atm") in pairs
    assert len(rows) == 5 + 2


def test_b3lyp_needs_dispersion_to_bind_the_methane_dimer():
    """Geometry: S22 methane dimer (ase.data.s22; Jurečka et al., PCCP 8, 1985 (2006)).
    Expectation (common practice): B3LYP alone does not bind dispersion-bound dimers;
    B3LYP-D3(BJ) binds the methane dimer with its minimum between the S22x5 0.9 and 1.2
    points (Gráfová et al., JCTC 6, 2365 (2010): minimum at 1.0)."""
    dimer = s22_dimer("Methane_dimer")
    factors = [0.9, 0.95, 1.0, 1.05, 1.1, 1.2, 1.35]
    spec = ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(0, 5), factors=factors,
                       levels=["b3lyp/def2-tzvp"], dispersion=["none", "d3bj"])
    ds = ik.run_scan(spec, executor="processes", progress=False)
    bare = ds["e_int"].sel(level="b3lyp/def2-tzvp", dispersion="none").values
    corrected = ds["e_int"].sel(level="b3lyp/def2-tzvp", dispersion="d3bj").values
    assert np.all(bare > -0.05), bare  # no binding without the correction
    m = ik.analysis.find_minimum(ds["factor"].values, corrected)
    assert m.interior and 0.9 < m.r_min_angstrom < 1.2, m
    assert m.well_depth_kcal_per_mol > 0.2
