"""The dispersion dimension: one SCF per point serves every post-hoc scheme."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import hf_dimer, s22_dimer

import interkit as ik
from interkit.data.dispersion import flatten_dispersion
from interkit.run.plan import plan_scan
from interkit.units import ANGSTROM_TO_BOHR, HARTREE_TO_KCAL_PER_MOL

SCHEMES = ["none", "d3zero", "d3bj", "d4", "d3bj-atm"]


@pytest.fixture(scope="module")
def comparison(tmp_path_factory):
    """HF dimer, three levels (HF, B3LYP, M06-2X), five schemes, with forces."""
    dimer = hf_dimer()
    spec = ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(1, 2), factors=[0.95, 1.1],
                       levels=["hf/sto-3g", "b3lyp/sto-3g", "m062x/sto-3g"], dispersion=SCHEMES,
                       forces=True, scf_threshold_hartree=1e-10)
    return spec, ik.run_scan(spec, executor="serial", progress=False)


def _library_energy(symbols, coords_angstrom, functional, scheme):
    """The dispersion libraries' own value through their own Python APIs (PyPI dftd3 and
    dftd4, not the pyscf-dispersion wrapper the engine uses; same library versions, see
    test_dispersion_libraries.py)."""
    from dftd3 import interface as d3
    from dftd4 import interface as d4
    from pyscf.data.elements import charge

    numbers = np.array([charge(s) for s in symbols])
    pos = np.asarray(coords_angstrom, dtype=float) * ANGSTROM_TO_BOHR
    base, _, three = scheme.partition("-")
    atm = three == "atm"
    if base == "d4":
        model, param = d4.DispersionModel(numbers, pos), d4.DampingParam(method=functional, atm=atm)
    else:
        cls = d3.RationalDampingParam if base == "d3bj" else d3.ZeroDampingParam
        model, param = d3.DispersionModel(numbers, pos), cls(method=functional, atm=atm)
    return float(model.get_dispersion(param, grad=False)["energy"])


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
                        levels=spec.levels, forces=True, scf_threshold_hartree=1e-10)
    assert ds.attrs["calculations_computed"] == len(plan_scan(plain).jobs)
    # a scheme on the shared SCF equals the same scheme run as a level of its own
    single = ik.run_scan(ik.ScanSpec(dimer=spec.dimer, coordinate=spec.coordinate, factors=spec.factors,
                                     levels=["b3lyp-d3bj/sto-3g"], forces=True, scf_threshold_hartree=1e-10),
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
    from interkit.analysis.comparison import ranking_table

    _, ds = comparison
    rows = ranking_table(ds, reference_level="hf/sto-3g")
    pairs = {(r["level"], r["dispersion"]) for r in rows}
    assert ("m062x/sto-3g", "d4") not in pairs
    assert ("b3lyp/sto-3g", "d3bj-atm") in pairs
    assert len(rows) == 5 + 2


@pytest.mark.slow  # about 40 s on a free core (seven B3LYP/def2-TZVP points): make test-full
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


def test_correction_comparison_widget(comparison, tmp_path):
    import csv

    import interkit.widgets  # noqa: F401  (registers ik.widgets)

    _, ds = comparison
    w = ik.widgets.CorrectionComparison(ds, reference="b3lyp-d3bj/sto-3g", export_dir=tmp_path)
    curves = [row["curve"] for row in w.rows]
    assert "b3lyp-d3bj/sto-3g" not in curves and "m062x-d4/sto-3g" not in curves
    assert w.rows[0]["curve"] == "b3lyp-d3bj-atm/sto-3g"  # the three-body term is a small change
    assert len(w.image.value) > 1000
    w.reference_select.value = "hf/sto-3g"
    assert "b3lyp-d3bj/sto-3g" in [row["curve"] for row in w.rows]
    w.curve_select.value = ("b3lyp/sto-3g", "b3lyp-d4/sto-3g")
    assert [row["curve"] for row in w.rows] == sorted(["b3lyp/sto-3g", "b3lyp-d4/sto-3g"],
                                                      key=[r["curve"] for r in w.rows].index)
    path = w.export()
    with open(path, newline="") as fh:
        lines = list(csv.reader(fh))
    assert lines[0][0].startswith("# reference: hf/sto-3g (given)") and len(lines) == 2 + 2
    # an external CSV reference; a bad path is an inline error, not an exception
    ref = tmp_path / "ref.csv"
    ref.write_text("distance_angstrom,e_int_kcal_per_mol\n" + "\n".join(
        f"{r},{e}" for r, e in zip(ds.distance.values, ds.e_int.sel(level="hf/sto-3g", dispersion="none").values)))
    w.csv_path.value = str(tmp_path / "missing.csv")
    w._load_csv()
    assert "interkit-error" in w.message.value
    w.csv_path.value = str(ref)
    w._load_csv()
    assert w.reference_select.value == "external: ref.csv"
    hf = next(row for row in ranking_table_rows(ds, "hf/sto-3g") if row["curve"] == "b3lyp-d4/sto-3g")
    ext = next(row for row in w.rows if row["curve"] == "b3lyp-d4/sto-3g")
    assert ext["rmse_kcal_per_mol"] == pytest.approx(hf["rmse_kcal_per_mol"], abs=1e-9)


def ranking_table_rows(ds, reference):
    from interkit.analysis.comparison import ranking_table
    from interkit.data.dispersion import scheme_label

    rows = ranking_table(ds, reference_level=reference)
    return [dict(r, curve=scheme_label(ik.parse_level(r["level"]), r["dispersion"])) for r in rows]


def test_cli_scan_with_schemes_and_compare(tmp_path, capsys):
    from interkit.cli.main import main

    xyz = tmp_path / "hf2.xyz"
    xyz.write_text("4\nHF dimer, test geometry\nF 0 0 0\nH 0 0 0.92\nF 0 0 2.75\nH 0.85 0 3.05\n")
    toml = tmp_path / "spec.toml"
    toml.write_text('name = "hf2"\n[system]\ngeometry = "hf2.xyz"\n[scan]\ncoordinate = "atom-pair"\n'
                    'atoms = [1, 2]\nfactors = [0.95, 1.1, 1.4]\n[calculation]\n'
                    'levels = ["pbe/sto-3g", "hf/sto-3g"]\ndispersion = ["none", "d3bj", "d4"]\n')
    out = tmp_path / "scan.nc"
    assert main(["scan", str(toml), "-o", str(out), "--serial", "--quiet", "--cache", str(tmp_path / "c")]) == 0
    text = capsys.readouterr().out
    assert "PBE-D3(BJ)/STO-3G" in text and "PBE-D4/STO-3G" in text   # tables in the trade's spelling
    assert ik.open_scan(out)["e_int"].dims == ("level", "dispersion", "distance")
    assert main(["compare", str(out), "--reference", "hf/sto-3g", "--table", str(tmp_path / "rank.csv")]) == 0
    text = capsys.readouterr().out
    assert text.splitlines()[0].startswith("reference: HF/STO-3G (--reference hf/sto-3g)")
    assert {"PBE/STO-3G", "PBE-D3(BJ)/STO-3G", "PBE-D4/STO-3G"} <= set(text.split())
    assert (tmp_path / "rank.csv").read_text().count("\n") == 2 + 3
    assert main(["compare", str(out), "--reference", "ccsd(t)/cbs"]) == 2
    assert "--reference: 'ccsd(t)/cbs' is not a curve" in capsys.readouterr().err


def test_reference_from_another_saved_scan(comparison, tmp_path, capsys):
    """A curve of another saved scan serves as an external reference, through the API,
    the command line and the widget."""
    from interkit.analysis.comparison import ranking_table, reference_from_file
    from interkit.cli.main import main

    _, ds = comparison
    other = tmp_path / "reference-scan.nc"
    ik.save_scan(ds, other)
    curve = reference_from_file(other, "hf/sto-3g")
    assert curve.source == "reference-scan.nc [hf/sto-3g]"
    np.testing.assert_allclose(curve.on(ds.distance.values),
                               ds.e_int.sel(level="hf/sto-3g", dispersion="none").values, atol=1e-12)
    external = {(r["level"], r["dispersion"]): r["rmse_kcal_per_mol"] for r in ranking_table(ds, reference=curve)}
    internal = {(r["level"], r["dispersion"]): r["rmse_kcal_per_mol"]
                for r in ranking_table(ds, reference_level="hf/sto-3g")}
    for pair, rmse in internal.items():
        assert external[pair] == pytest.approx(rmse, abs=1e-9)
    scan = tmp_path / "scan.nc"
    ik.save_scan(ds, scan)
    assert main(["compare", str(scan), "--reference-file", str(other), "--reference-curve", "hf/sto-3g"]) == 0
    assert "reference: external curve (reference-scan.nc [hf/sto-3g])" in capsys.readouterr().out
    assert main(["compare", str(scan), "--reference-curve", "hf/sto-3g"]) == 2
    assert "--reference-curve: give --reference-file as well" in capsys.readouterr().err
    assert main(["compare", str(scan), "--reference-file", str(other), "--reference-curve", "nope"]) == 2
    assert "'nope' is not a curve of" in capsys.readouterr().err
