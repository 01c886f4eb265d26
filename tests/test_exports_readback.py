"""Every export reads back: CSV tables as reference curves, XYZ and extended XYZ with ase.

Source of every expected value: the Dataset the export was written from (a read-back
test), unit-converted with the constants of interkit.units; the column convention is
interkit's own (interkit.data.columns).
"""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest
from conftest import hf_dimer

import interkit as ik
from interkit.analysis.comparison import ranking_table, reference_from_csv, reference_from_file
from interkit.units import HARTREE_TO_EV, HARTREE_TO_KCAL_PER_MOL

LEVELS = ["hf/sto-3g", "hf/3-21g"]


@pytest.fixture(scope="module")
def scan():
    """HF dimer, two cheap HF levels with counterpoise-corrected forces (a few seconds)."""
    spec = ik.ScanSpec(dimer=hf_dimer(), coordinate=ik.AtomPair(1, 2), factors=[0.95, 1.0, 1.1, 1.3],
                       levels=LEVELS, forces=True)
    return ik.run_scan(spec, executor="serial", cache=None, progress=False)


def _header(path):
    with open(path, newline="", encoding="utf-8") as fh:
        return next(row for row in csv.reader(fh) if row and not row[0].startswith("#"))


def _csv_exports(scan, tmp_path):
    from interkit.widgets.exports import write_csv

    return {"explorer": write_csv(scan, tmp_path / "explorer.csv", unit="kJ/mol"),
            "tidy": ik.export_scan(scan, tmp_path / "tidy.csv", unit="eV")}


def test_every_csv_header_follows_the_column_convention(scan, tmp_path):
    # the convention (interkit.data.columns): snake_case, unit as suffix, no brackets
    from interkit.cli.compare import run_compare
    from interkit.data.columns import is_conventional

    paths = _csv_exports(scan, tmp_path)

    class Args:
        scan = None
        reference = "hf/3-21g"
        reference_file = None
        reference_curve = None
        region, window, relative = "all", None, False
        table = str(tmp_path / "ranking.csv")

    nc = tmp_path / "s.nc"
    ik.save_scan(scan, nc)
    Args.scan = str(nc)
    run_compare(Args)
    paths["ranking"] = Args.table
    for kind, path in paths.items():
        header = _header(path)
        bad = [c for c in header if not is_conventional(c)]
        assert not bad, (kind, bad)
    assert "distance_angstrom" in _header(paths["explorer"])
    assert "e_int_kj_per_mol" in _header(paths["explorer"])
    assert "rmse_kcal_per_mol" in _header(paths["ranking"])


@pytest.mark.parametrize("kind", ["explorer", "tidy"])
@pytest.mark.parametrize("level", LEVELS)
def test_csv_export_reads_back_as_the_datasets_curve(scan, tmp_path, kind, level):
    path = _csv_exports(scan, tmp_path)[kind]
    curve = reference_from_csv(path, curve=level)
    np.testing.assert_allclose(curve.distance_angstrom, scan["distance"].values, rtol=0, atol=1e-6)
    # written with 8-10 significant digits in kJ/mol or eV, read back in kcal/mol
    np.testing.assert_allclose(curve.e_int_kcal_per_mol, scan["e_int"].sel(level=level).values,
                               rtol=1e-7, atol=1e-8)
    # the same through the file dispatcher the CLI uses
    same = reference_from_file(path, level)
    np.testing.assert_array_equal(same.e_int_kcal_per_mol, curve.e_int_kcal_per_mol)


def test_csv_export_with_several_curves_defaults_to_the_reference_rule(scan, tmp_path):
    # two HF curves: no wavefunction-correlated level, so the first label is taken, as
    # reference_from_scan does (analysis.comparison.default_reference)
    path = _csv_exports(scan, tmp_path)["explorer"]
    curve = reference_from_csv(path)
    np.testing.assert_allclose(curve.e_int_kcal_per_mol, scan["e_int"].sel(level=LEVELS[0]).values, rtol=1e-7)
    with pytest.raises(ik.InputError, match="^reference curve: 'mp2/sto-3g' is not a curve"):
        reference_from_csv(path, curve="mp2/sto-3g")


def test_read_back_reference_ranks_its_own_level_at_zero_error(scan, tmp_path):
    # the exported hf/3-21g curve as an external reference: hf/3-21g then has zero error
    path = _csv_exports(scan, tmp_path)["tidy"]
    rows = ranking_table(scan, reference=reference_from_csv(path, curve="hf/3-21g"))
    own = next(r for r in rows if r["level"] == "hf/3-21g")
    assert own["rmse_kcal_per_mol"] < 1e-6


def test_multiframe_xyz_reads_back_with_ase(scan, tmp_path):
    import ase.io

    path = ik.export_scan(scan, tmp_path / "scan.xyz")
    frames = ase.io.read(path, index=":")
    assert len(frames) == scan.sizes["distance"]
    for i, atoms in enumerate(frames):
        assert atoms.get_chemical_symbols() == [str(s) for s in scan["symbol"].values]
        np.testing.assert_allclose(atoms.positions, scan["coordinates"].values[i], atol=1e-9)
        assert atoms.info["distance_angstrom"] == pytest.approx(float(scan["distance"].values[i]), abs=1e-8)
        assert atoms.info["point_index"] == i
        assert not any("level" in key or "energy" in key for key in atoms.info)  # geometries only
        assert atoms.calc is None


def test_extxyz_reads_back_with_ase_in_ev(scan, tmp_path):
    import ase.io

    level = "hf/3-21g"
    path = ik.export_scan(scan, tmp_path / "scan.extxyz", level=level)
    frames = ase.io.read(path, index=":")
    assert len(frames) == scan.sizes["distance"]
    kcal_to_ev = HARTREE_TO_EV / HARTREE_TO_KCAL_PER_MOL   # interkit.units, CODATA 2018
    for i, atoms in enumerate(frames):
        np.testing.assert_allclose(atoms.positions, scan["coordinates"].values[i], atol=1e-9)
        e_ev = float(scan["e_int"].sel(level=level).values[i]) * kcal_to_ev
        assert atoms.get_potential_energy() == pytest.approx(e_ev, rel=1e-10, abs=1e-14)
        f_ev = scan["forces"].sel(level=level).values[i] * kcal_to_ev
        np.testing.assert_allclose(atoms.get_forces(), f_ev, rtol=1e-9, atol=1e-12)
        assert atoms.info["energy_unit"] == "eV" and atoms.info["forces_unit"] == "eV/angstrom"
        assert atoms.info["curve"] == level
        assert list(atoms.arrays["fragment"]) == [str(f) for f in scan["fragment"].values]


def test_extxyz_refuses_ambiguous_or_missing_inputs(scan, tmp_path):
    with pytest.raises(ik.InputError, match="^level: the scan has several curves"):
        ik.export_scan(scan, tmp_path / "a.extxyz")
    with pytest.raises(ik.InputError, match="^level: 'mp2/sto-3g' is not a curve"):
        ik.export_scan(scan, tmp_path / "a.extxyz", level="mp2/sto-3g")
    with pytest.raises(ik.InputError, match="^unit:"):
        ik.export_scan(scan, tmp_path / "a.extxyz", level="hf/sto-3g", unit="kJ/mol")
    with pytest.raises(ik.InputError, match="^level: applies to the extxyz export only"):
        ik.export_scan(scan, tmp_path / "a.csv", level="hf/sto-3g")
    no_forces = scan.drop_vars([v for v in scan.data_vars if str(v).startswith("force")])
    with pytest.raises(ik.InputError, match="no per-atom forces"):
        ik.export_scan(no_forces, tmp_path / "a.extxyz", level="hf/sto-3g")
    assert not list(tmp_path.glob("a.*"))   # nothing written


def test_extxyz_leaves_out_failed_points_with_a_warning(scan, tmp_path):
    import ase.io

    broken = scan.copy(deep=True)
    broken["e_int"].loc[{"level": "hf/sto-3g"}] = np.where(np.arange(scan.sizes["distance"]) == 1, np.nan,
                                                           broken["e_int"].sel(level="hf/sto-3g").values)
    with pytest.warns(ik.InterkitWarning, match="left out"):
        path = ik.export_scan(broken, tmp_path / "b.extxyz", level="hf/sto-3g")
    frames = ase.io.read(path, index=":")
    assert [a.info["point_index"] for a in frames] == [0, 2, 3]


def test_cli_export_writes_xyz_and_extxyz(scan, tmp_path, capsys):
    from interkit.cli.main import main

    nc = tmp_path / "s.nc"
    ik.save_scan(scan, nc)
    assert main(["export", str(nc), "-o", str(tmp_path / "s.xyz")]) == 0
    assert main(["export", str(nc), "-o", str(tmp_path / "s.extxyz"), "--level", "hf/sto-3g"]) == 0
    assert main(["export", str(nc), "-o", str(tmp_path / "t.extxyz")]) == 2
    err = capsys.readouterr().err
    assert "level: the scan has several curves" in err and not (tmp_path / "t.extxyz").exists()
    first = (tmp_path / "s.extxyz").read_text().splitlines()[1]
    assert 'energy_unit=eV' in first and json.dumps("eV/angstrom") in first


def test_extxyz_of_a_scheme_of_a_dispersion_comparison(tmp_path):
    # one SCF per point serves every scheme: the D3(BJ) curve differs from the bare one
    # by the dispersion term only; the export takes the named (level, scheme) pair
    import ase.io

    spec = ik.ScanSpec(dimer=hf_dimer(), coordinate=ik.AtomPair(1, 2), factors=[1.0, 1.2],
                       levels=["b3lyp/sto-3g"], dispersion=["none", "d3bj"], forces=True)
    ds = ik.run_scan(spec, executor="serial", cache=None, progress=False)
    kcal_to_ev = HARTREE_TO_EV / HARTREE_TO_KCAL_PER_MOL
    bare, with_d3 = (ds["e_int"].sel(level="b3lyp/sto-3g", dispersion=s).values for s in ("none", "d3bj"))
    assert np.all(np.abs(bare - with_d3) > 1e-4)   # the two curves can be told apart
    for label, scheme in (("b3lyp-d3bj/sto-3g", "d3bj"), ("b3lyp/sto-3g", "none")):
        path = ik.export_scan(ds, tmp_path / f"{scheme}.extxyz", level=label)
        frames = ase.io.read(path, index=":")
        sel = {"level": "b3lyp/sto-3g", "dispersion": scheme}
        energies = [a.get_potential_energy() for a in frames]
        np.testing.assert_allclose(energies, ds["e_int"].sel(sel).values * kcal_to_ev, rtol=1e-10)
        np.testing.assert_allclose(np.stack([a.get_forces() for a in frames]),
                                   ds["forces"].sel(sel).values * kcal_to_ev, rtol=1e-9, atol=1e-12)
        assert frames[0].info["curve"] == label
    # the tidy CSV names the pair by level and dispersion; it reads back by its folded label
    tidy = ik.export_scan(ds, tmp_path / "tidy.csv")
    for label, values in (("b3lyp-d3bj/sto-3g", with_d3), ("b3lyp/sto-3g", bare)):
        np.testing.assert_allclose(reference_from_csv(tidy, curve=label).e_int_kcal_per_mol, values, rtol=1e-9)
