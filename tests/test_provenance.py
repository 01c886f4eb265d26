"""Provenance and replay: what a saved scan records about itself, `interkit rerun` and
`interkit verify` (recompute sampled points, compare within stated tolerances)."""

from __future__ import annotations

import json
from importlib import metadata

import conftest
import numpy as np
import pytest

import interkit as ik
from interkit.cli.main import main
from interkit.data.schema import spec_of
from interkit.run.plan import plan_scan
from interkit.share import compare, provenance, replay, tolerances


@pytest.fixture(scope="module")
def hf_dimer() -> ik.Dimer:
    return conftest.hf_dimer()


@pytest.fixture(scope="module")
def saved(tmp_path_factory, hf_dimer):
    """A 3-point HF/STO-3G scan with forces, saved, and the store it was computed into."""
    folder = tmp_path_factory.mktemp("prov")
    spec = ik.ScanSpec(dimer=hf_dimer, coordinate=ik.AtomPair(1, 2), factors=[1.0, 1.2, 1.5],
                       levels=["hf/sto-3g"], forces=True)
    ds = ik.run_scan(spec, executor="serial", cache=folder / "store", progress=False)
    path = folder / "scan.nc"
    ik.save_scan(ds, path)
    return path, folder / "store"


def _tampered(path, tmp_path, name, index, delta):
    ds = ik.open_scan(path)
    ds[name].values[index] += delta
    out = tmp_path / f"tampered-{name}.nc"
    ik.save_scan(ds, out)
    return out


# ---------------------------------------------------------------------- what the file records
def test_dataset_records_spec_versions_and_keys(saved, hf_dimer):
    ds = ik.open_scan(saved[0])
    spec = spec_of(ds)
    assert [p.distance for p in spec.points] == pytest.approx(ds["distance"].values, abs=1e-12)
    summary = provenance.provenance_summary(ds)
    assert summary["spec"] == json.loads(ds.attrs["spec_json"])
    for dist in ("pyscf-dispersion", "dftd3", "dftd4"):
        attr = dist.replace("-", "_")
        try:
            expected = metadata.version(dist)
        except metadata.PackageNotFoundError:
            expected = "not installed"
        assert summary["versions"][attr] == expected
    assert summary["versions"]["pyscf"] == ds.attrs["pyscf_version"]
    assert summary["codata"] == "CODATA 2018"
    # every calculation of the plan is one distinct key in the file
    assert provenance.store_keys(ds) == sorted(plan_scan(spec).jobs)
    assert summary["n_store_keys"] == len(plan_scan(spec).jobs)
    assert provenance.key_agreement(ds, plan_scan(spec)) == (15, 15)   # 3 points x 5 roles


def test_key_agreement_notices_a_changed_key(saved):
    ds = ik.open_scan(saved[0])
    spec = spec_of(ds)
    ds["job_key"].values[0, 1, 0] = "0" * 64
    assert provenance.key_agreement(ds, plan_scan(spec)) == (14, 15)


# ---------------------------------------------------------------------- sampling and subsets
def test_sampling_is_reproducible_distinct_and_bounded():
    a = replay.sample_points(50, 7, seed=3)
    assert np.array_equal(a, replay.sample_points(50, 7, seed=3))
    assert len(set(a.tolist())) == 7 and list(a) == sorted(a) and a.max() < 50
    assert not np.array_equal(a, replay.sample_points(50, 7, seed=4))
    assert list(replay.sample_points(4, 9)) == [0, 1, 2, 3]
    with pytest.raises(ik.InputError, match="sample: 0"):
        replay.sample_points(4, 0)


def test_subset_spec_gives_the_same_jobs(hf_dimer):
    for grid in ({"factors": [1.5, 1.0, 1.2]}, {"distances": [2.9, 1.9, 2.3]}):
        spec = ik.ScanSpec(dimer=hf_dimer, coordinate=ik.AtomPair(1, 2), levels=["hf/sto-3g"], **grid)
        sub = replay.subset_spec(spec, [0, 2])
        assert [p.distance for p in sub.points] == [spec.points[0].distance, spec.points[2].distance]
        full_keys = plan_scan(spec).table
        sub_keys = plan_scan(sub).table
        assert sub_keys[(0, 0)] == full_keys[(0, 0)] and sub_keys[(0, 1)] == full_keys[(0, 2)]


def test_subset_spec_of_frames_picks_the_right_geometries(hf_dimer):
    shifts = [1.2, 0.0, 0.5]            # given out of order; points sort by value
    frames = [hf_dimer.translated_b(np.array([0.0, 0.0, s])) for s in shifts]
    spec = ik.ScanSpec(dimer=hf_dimer, coordinate=ik.Frames(frames, ik.AtomPair(1, 2)), levels=["hf/sto-3g"])
    sub = replay.subset_spec(spec, [1, 2])
    assert [p.distance for p in sub.points] == pytest.approx([spec.points[1].distance, spec.points[2].distance])
    for p, q in zip(sub.points, spec.points[1:]):
        assert np.array_equal(p.dimer.coordinates, q.dimer.coordinates)
    assert plan_scan(sub).table[(0, 1)]["dimer"] == plan_scan(spec).table[(0, 2)]["dimer"]


# ---------------------------------------------------------------------- comparison
def test_compare_datasets_applies_the_tolerances(saved):
    ds = ik.open_scan(saved[0])
    table = tolerances.tolerances(ds)
    # stated tolerances follow the SCF threshold: 3 x 100 x 1e-8 hartree in kcal/mol
    assert table["e_int"].value == pytest.approx(3 * 100 * 1e-8 * 627.5094740631)
    assert table["e_total_hartree"].value == pytest.approx(1e-6)
    assert table["forces"].value == tolerances.FORCE_TOLERANCE
    assert "wall_time_s" not in table and "job_key" not in table
    rows = {r.variable: r for r in compare.compare_datasets(ds, ds.copy(deep=True))}
    assert all(r.passed and r.max_abs_deviation == 0 for r in rows.values())

    near = ds.copy(deep=True)
    near["e_int"].values[0, 1] += 0.5 * table["e_int"].value
    row = {r.variable: r for r in compare.compare_datasets(ds, near)}["e_int"]
    assert row.passed and row.max_abs_deviation == pytest.approx(0.5 * table["e_int"].value)

    far = ds.copy(deep=True)
    far["e_int"].values[0, 1] += 2 * table["e_int"].value
    row = {r.variable: r for r in compare.compare_datasets(ds, far)}["e_int"]
    assert not row.passed and "distance=2.1960" in row.where

    gap = ds.copy(deep=True)
    gap["force_along"].values[0, 2] = np.nan
    status = gap["status"].values.astype("<U6")
    status[0, 2] = "failed"
    gap["status"] = (gap["status"].dims, status)
    rows = {r.variable: r for r in compare.compare_datasets(ds, gap)}
    assert not rows["force_along"].passed and rows["force_along"].mismatched == 1
    assert not rows["status"].passed and not compare.all_passed(list(rows.values()))


def test_correlated_levels_get_their_own_tolerance(saved):
    import xarray as xr

    ds = ik.open_scan(saved[0])
    spec = json.loads(ds.attrs["spec_json"])
    spec["levels"].append(dict(spec["levels"][0], method="mp2"))
    mp2 = ds.assign_coords(level=["mp2/sto-3g"])
    both = xr.concat([ds, mp2], dim="level", data_vars="minimal", coords="minimal", compat="override")
    both.attrs["spec_json"] = json.dumps(spec)
    table = tolerances.tolerances(both)["e_int"]
    # SCF levels: 3 x 100 x 1e-8 hartree; correlated: 3 x 0.1 x sqrt(1e-8) hartree
    assert table.per_level["hf/sto-3g"].value == pytest.approx(3 * 1e-6 * 627.5094740631)
    assert table.per_level["mp2/sto-3g"].value == pytest.approx(3 * 1e-5 * 627.5094740631)
    shifted = both.copy(deep=True)
    shifted["e_int"].loc[{"level": "mp2/sto-3g"}] = shifted["e_int"].sel(level="mp2/sto-3g") + 0.01
    rows = {r.variable: r for r in compare.compare_datasets(both, shifted)}
    assert rows["e_int [correlated levels]"].passed and rows["e_int [SCF levels]"].passed
    shifted["e_int"].loc[{"level": "hf/sto-3g"}] = shifted["e_int"].sel(level="hf/sto-3g") + 0.01
    rows = {r.variable: r for r in compare.compare_datasets(both, shifted)}
    assert not rows["e_int [SCF levels]"].passed and "level=hf/sto-3g" in rows["e_int [SCF levels]"].where


def test_tolerances_scale_with_the_scf_threshold(saved):
    ds = ik.open_scan(saved[0])
    spec = json.loads(ds.attrs["spec_json"])
    spec["scf_threshold_hartree"] = 1e-10
    ds.attrs["spec_json"] = json.dumps(spec)
    assert tolerances.tolerances(ds)["e_int"].value == pytest.approx(3 * 100 * 1e-10 * 627.5094740631)


# ---------------------------------------------------------------------- the commands
def test_verify_passes_on_the_saved_file(saved, capsys):
    code = main(["verify", str(saved[0]), "--sample", "2", "--seed", "1", "--serial", "--quiet"])
    out = capsys.readouterr().out
    assert code == 0, out
    assert "verifying 2 of 3 points (seed 1)" in out
    assert "verify: every variable within its tolerance" in out
    assert "FAIL" not in out


def test_verify_catches_a_tampered_value(saved, tmp_path, capsys):
    # +0.01 kcal/mol at one point: five times the stated tolerance, far below what a
    # reader would notice in a table
    bad = _tampered(saved[0], tmp_path, "e_int", (0, 1), 0.01)
    code = main(["verify", str(bad), "--sample", "3", "--serial", "--quiet"])
    out = capsys.readouterr().out
    assert code == 1, out
    line = next(ln for ln in out.splitlines() if ln.startswith("e_int "))
    assert "FAIL" in line and "distance=2.1960" in line
    assert "verify: FAILED for e_int" in out


def test_verify_catches_a_tampered_force(saved, tmp_path, capsys):
    bad = _tampered(saved[0], tmp_path, "forces", (0, 0, 3, 2), 0.2)
    assert main(["verify", str(bad), "--sample", "3", "--serial", "--quiet"]) == 1
    assert "verify: FAILED for forces" in capsys.readouterr().out


def test_rerun_from_the_store_matches_and_writes(saved, tmp_path, capsys):
    path, store = saved
    out_nc = tmp_path / "again.nc"
    code = main(["rerun", str(path), "--cache", str(store), "--serial", "--quiet", "-o", str(out_nc)])
    out = capsys.readouterr().out
    assert code == 0, out
    assert "0 computed" in out and "rerun: every variable within its tolerance" in out
    again = ik.open_scan(out_nc)
    assert np.array_equal(again["e_int"].values, ik.open_scan(path)["e_int"].values)


def test_rerun_reports_a_tampered_file(saved, tmp_path, capsys):
    path, store = saved
    bad = _tampered(path, tmp_path, "bsse", (0, 0), -0.05)
    code = main(["rerun", str(bad), "--cache", str(store), "--serial", "--quiet"])
    out = capsys.readouterr().out
    assert code == 1 and "rerun: FAILED for bsse" in out, out


# ---------------------------------------------------------------------- the Python API
def test_verify_scan_from_python_on_a_dataset_and_a_path(saved):
    path, _store = saved
    said = []
    table = ik.verify_scan(ik.open_scan(path), sample=2, seed=1, executor="serial", progress=False,
                           log=said.append)
    assert isinstance(table, list) and all(isinstance(r, compare.Deviation) for r in table)
    assert table.passed and table.failed == [] and table.what == "verify"
    assert list(table.indices) == list(replay.sample_points(3, 2, seed=1))
    saved_ds = ik.open_scan(path)
    assert np.allclose(table.distances, saved_ds["distance"].values[table.indices])
    assert table.fresh.sizes["distance"] == 2
    assert (table.keys_matching, table.keys_total) == (10, 10)       # 2 points x 5 roles
    assert said[0].startswith("verifying 2 of 3 points (seed 1)") and said[1].startswith("store keys: 10 of 10")
    rows = {r.variable: r for r in table}
    assert rows["e_int"].n_compared == 2 and rows["e_int"].max_abs_deviation <= rows["e_int"].tolerance
    text = str(table)
    assert text.splitlines()[0].startswith("variable") and text.endswith("verify: every variable within its tolerance")
    # the same points from the file path
    again = ik.verify_scan(path, sample=2, seed=1, executor="serial", progress=False)
    assert list(again.indices) == list(table.indices) and again.passed


def test_verify_scan_reports_a_tampered_value_without_raising(saved, tmp_path):
    bad = _tampered(saved[0], tmp_path, "e_int", (0, 2), -0.01)
    table = ik.verify_scan(bad, sample=3, executor="serial", progress=False)
    assert not table.passed and "e_int" in table.failed
    assert str(table).endswith("verify: FAILED for e_int")


def test_verify_scan_refuses_a_file_whose_points_do_not_match_its_spec(saved, tmp_path):
    ds = ik.open_scan(saved[0]).isel(distance=[0, 1])
    table = ik.verify_scan(ds, executor="serial", progress=False)
    assert not table.passed and len(table) == 1
    assert table[0].variable == "distance" and "the file has 2 points but its spec gives 3" in table[0].where


def test_rerun_scan_from_python_reuses_the_store(saved):
    path, store = saved
    said = []
    fresh, table = ik.rerun_scan(path, cache=store, executor="serial", progress=False, log=said.append)
    n_jobs = len(plan_scan(spec_of(fresh)).jobs)       # 3 x 3 counterpoise + 2 own-basis monomers
    assert n_jobs == 11
    assert fresh.attrs["calculations_computed"] == 0 and fresh.attrs["calculations_from_store"] == n_jobs
    assert table.passed and table.what == "rerun" and list(table.indices) == [0, 1, 2]
    assert (table.keys_matching, table.keys_total) == (15, 15)
    assert said[0] == f"rerun of {path}: 11 calculations from the store, 0 computed"
    assert np.array_equal(fresh["e_int"].values, ik.open_scan(path)["e_int"].values)


def test_api_refuses_what_is_not_a_scan(saved, tmp_path):
    with pytest.raises(ik.InputError, match="scan: expected an xarray.Dataset or the path of a .nc file, got int"):
        ik.verify_scan(3)
    with pytest.raises(ik.InputError, match="does not exist"):
        ik.rerun_scan(tmp_path / "absent.nc")
    ds = ik.open_scan(saved[0])
    del ds.attrs["spec_json"]
    with pytest.raises(ik.InputError, match="attrs.spec_json: missing"):
        ik.verify_scan(ds, executor="serial")
    ds = ik.open_scan(saved[0])
    ds.attrs["spec_json"] = json.dumps({"levels": []})
    with pytest.raises(ik.InputError, match="^scan: attrs.spec_json cannot be rebuilt into a spec"):
        ik.rerun_scan(ds, executor="serial")
    with pytest.raises(ik.InputError, match="sample: 0 is not a positive number of points"):
        ik.verify_scan(saved[0], sample=0)


def test_report_and_exports_accept_a_scan_file(saved, tmp_path):
    import csv

    path = saved[0]
    html_path = ik.write_report(path, tmp_path / "r.html")
    assert "<h2>Provenance</h2>" in open(html_path, encoding="utf-8").read()
    with open(ik.export_scan(path, tmp_path / "s.csv", unit="kJ/mol"), newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    ds = ik.open_scan(path)
    e_int = [r for r in rows if r["variable"] == "e_int"]
    assert float(e_int[0]["value"]) == pytest.approx(float(ds["e_int"].values[0, 0]) * 4.184, rel=1e-9)
    doc = json.loads(open(ik.export_scan(path, tmp_path / "s.json"), encoding="utf-8").read())
    assert len(doc["points"]) == 3
    with pytest.raises(ik.InputError, match="path: .*should end in .csv, .json.* \\(or give fmt\\)"):
        ik.export_scan(path, tmp_path / "s.txt")
    with pytest.raises(ik.InputError, match="path: folder .* does not exist"):
        ik.write_report(path, tmp_path / "nowhere" / "r.html")
