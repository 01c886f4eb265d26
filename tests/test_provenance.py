"""Provenance and replay: what a saved scan records about itself, `interkit rerun` and
`interkit verify` (recompute sampled points, compare within stated tolerances)."""

from __future__ import annotations

import json
from importlib import metadata

import numpy as np
import pytest

import interkit as ik
from interkit import provenance
from interkit.cli import main
from interkit.plan import plan_scan


@pytest.fixture(scope="module")
def hf_dimer() -> ik.Dimer:
    """A hydrogen-fluoride dimer built here (not a reference geometry): cheap to compute."""
    text = """4
HF dimer, test geometry
F   0.000000  0.000000  0.000000
H   0.000000  0.000000  0.920000
F   0.000000  0.000000  2.750000
H   0.850000  0.000000  3.050000
"""
    return ik.Dimer.from_xyz_string(text, name="hf-dimer")


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
    spec = ik.results.spec_of(ds)
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
    spec = ik.results.spec_of(ds)
    ds["job_key"].values[0, 1, 0] = "0" * 64
    assert provenance.key_agreement(ds, plan_scan(spec)) == (14, 15)


# ---------------------------------------------------------------------- sampling and subsets
def test_sampling_is_reproducible_distinct_and_bounded():
    a = provenance.sample_points(50, 7, seed=3)
    assert np.array_equal(a, provenance.sample_points(50, 7, seed=3))
    assert len(set(a.tolist())) == 7 and list(a) == sorted(a) and a.max() < 50
    assert not np.array_equal(a, provenance.sample_points(50, 7, seed=4))
    assert list(provenance.sample_points(4, 9)) == [0, 1, 2, 3]
    with pytest.raises(ik.InputError, match="sample: 0"):
        provenance.sample_points(4, 0)


def test_subset_spec_gives_the_same_jobs(hf_dimer):
    for grid in ({"factors": [1.5, 1.0, 1.2]}, {"distances": [2.9, 1.9, 2.3]}):
        spec = ik.ScanSpec(dimer=hf_dimer, coordinate=ik.AtomPair(1, 2), levels=["hf/sto-3g"], **grid)
        sub = provenance.subset_spec(spec, [0, 2])
        assert [p.distance for p in sub.points] == [spec.points[0].distance, spec.points[2].distance]
        full_keys = plan_scan(spec).table
        sub_keys = plan_scan(sub).table
        assert sub_keys[(0, 0)] == full_keys[(0, 0)] and sub_keys[(0, 1)] == full_keys[(0, 2)]


def test_subset_spec_of_frames_picks_the_right_geometries(hf_dimer):
    shifts = [1.2, 0.0, 0.5]            # given out of order; points sort by value
    frames = [hf_dimer.translated_b(np.array([0.0, 0.0, s])) for s in shifts]
    spec = ik.ScanSpec(dimer=hf_dimer, coordinate=ik.Frames(frames, ik.AtomPair(1, 2)), levels=["hf/sto-3g"])
    sub = provenance.subset_spec(spec, [1, 2])
    assert [p.distance for p in sub.points] == pytest.approx([spec.points[1].distance, spec.points[2].distance])
    for p, q in zip(sub.points, spec.points[1:]):
        assert np.array_equal(p.dimer.coordinates, q.dimer.coordinates)
    assert plan_scan(sub).table[(0, 1)]["dimer"] == plan_scan(spec).table[(0, 2)]["dimer"]


# ---------------------------------------------------------------------- comparison
def test_compare_datasets_applies_the_tolerances(saved):
    ds = ik.open_scan(saved[0])
    table = provenance.tolerances(ds)
    # stated tolerances follow the SCF threshold: 3 x 100 x 1e-8 hartree in kcal/mol
    assert table["e_int"].value == pytest.approx(3 * 100 * 1e-8 * 627.5094740631)
    assert table["e_total_hartree"].value == pytest.approx(1e-6)
    assert table["forces"].value == provenance.FORCE_TOLERANCE
    assert "wall_time_s" not in table and "job_key" not in table
    rows = {r.variable: r for r in provenance.compare_datasets(ds, ds.copy(deep=True))}
    assert all(r.passed and r.max_abs_deviation == 0 for r in rows.values())

    near = ds.copy(deep=True)
    near["e_int"].values[0, 1] += 0.5 * table["e_int"].value
    row = {r.variable: r for r in provenance.compare_datasets(ds, near)}["e_int"]
    assert row.passed and row.max_abs_deviation == pytest.approx(0.5 * table["e_int"].value)

    far = ds.copy(deep=True)
    far["e_int"].values[0, 1] += 2 * table["e_int"].value
    row = {r.variable: r for r in provenance.compare_datasets(ds, far)}["e_int"]
    assert not row.passed and "distance=2.1960" in row.where

    gap = ds.copy(deep=True)
    gap["force_along"].values[0, 2] = np.nan
    status = gap["status"].values.astype("<U6")
    status[0, 2] = "failed"
    gap["status"] = (gap["status"].dims, status)
    rows = {r.variable: r for r in provenance.compare_datasets(ds, gap)}
    assert not rows["force_along"].passed and rows["force_along"].mismatched == 1
    assert not rows["status"].passed and not provenance.all_passed(list(rows.values()))


def test_correlated_levels_get_their_own_tolerance(saved):
    import xarray as xr

    ds = ik.open_scan(saved[0])
    spec = json.loads(ds.attrs["spec_json"])
    spec["levels"].append(dict(spec["levels"][0], method="mp2"))
    mp2 = ds.assign_coords(level=["mp2/sto-3g"])
    both = xr.concat([ds, mp2], dim="level", data_vars="minimal", coords="minimal", compat="override")
    both.attrs["spec_json"] = json.dumps(spec)
    table = provenance.tolerances(both)["e_int"]
    # SCF levels: 3 x 100 x 1e-8 hartree; correlated: 3 x 0.1 x sqrt(1e-8) hartree
    assert table.per_level["hf/sto-3g"].value == pytest.approx(3 * 1e-6 * 627.5094740631)
    assert table.per_level["mp2/sto-3g"].value == pytest.approx(3 * 1e-5 * 627.5094740631)
    shifted = both.copy(deep=True)
    shifted["e_int"].loc[{"level": "mp2/sto-3g"}] = shifted["e_int"].sel(level="mp2/sto-3g") + 0.01
    rows = {r.variable: r for r in provenance.compare_datasets(both, shifted)}
    assert rows["e_int [correlated levels]"].passed and rows["e_int [SCF levels]"].passed
    shifted["e_int"].loc[{"level": "hf/sto-3g"}] = shifted["e_int"].sel(level="hf/sto-3g") + 0.01
    rows = {r.variable: r for r in provenance.compare_datasets(both, shifted)}
    assert not rows["e_int [SCF levels]"].passed and "level=hf/sto-3g" in rows["e_int [SCF levels]"].where


def test_tolerances_scale_with_the_scf_threshold(saved):
    ds = ik.open_scan(saved[0])
    spec = json.loads(ds.attrs["spec_json"])
    spec["conv_tol"] = 1e-10
    ds.attrs["spec_json"] = json.dumps(spec)
    assert provenance.tolerances(ds)["e_int"].value == pytest.approx(3 * 100 * 1e-10 * 627.5094740631)


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
