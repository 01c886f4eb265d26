"""The result store: resume after a kill, damaged entries, failures that keep the rest."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import interkit as ik
from interkit.run.store import ResultStore

SPEC_TOML = """
name = "resume test"
[system]
geometry = "g.xyz"
[scan]
coordinate = "atom-pair"
atoms = [1, 2]
factors = [0.9, 1.0, 1.1, 1.2, 1.35, 1.5, 1.75, 2.0]
[calculation]
levels = ["hf/def2-svp"]
"""


def _entries(store: Path) -> list[Path]:
    return sorted(store.glob("objects/*/*.json"))


def _compare(a: xr.Dataset, b: xr.Dataset, atol=1e-6):
    for name in ("e_int", "e_int_nocp", "bsse"):
        np.testing.assert_allclose(a[name].values, b[name].values, atol=atol, rtol=0)
    assert (a["status"].values == b["status"].values).all()
    assert (a["job_key"].values == b["job_key"].values).all()
    np.testing.assert_array_equal(a["coordinates"].values, b["coordinates"].values)


def test_killed_scan_resumes_computing_only_what_is_missing(tmp_path, small_dimer):
    (tmp_path / "g.xyz").write_text(small_dimer.to_xyz_string())
    spec_path = tmp_path / "spec.toml"
    spec_path.write_text(SPEC_TOML)
    store = tmp_path / "store"
    proc = subprocess.Popen(
        [sys.executable, "-m", "interkit.cli", "scan", str(spec_path), "-o", str(tmp_path / "scan.nc"),
         "--cache", str(store), "--workers", "2", "--quiet"],
        start_new_session=True, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    deadline = time.time() + 300
    while len(_entries(store)) < 8 and time.time() < deadline and proc.poll() is None:
        time.sleep(0.05)
    os.killpg(proc.pid, signal.SIGKILL)  # parent and workers, mid-scan
    proc.wait()
    done_before = len(_entries(store))
    spec = ik.load_spec_toml(spec_path)
    total = 3 * 8 + 2
    assert 0 < done_before < total, "the kill did not land mid-scan"
    assert not (tmp_path / "scan.nc").exists()
    resumed = ik.run_scan(spec, cache=store, progress=False)
    assert resumed.attrs["calculations_computed"] == total - done_before
    assert resumed.attrs["calculations_from_store"] == done_before
    fresh = ik.run_scan(spec, cache=None, progress=False)
    _compare(resumed, fresh)
    # a finished spec reruns from the store alone
    again = ik.run_scan(spec, cache=store, progress=False)
    assert again.attrs["calculations_computed"] == 0  # (its time is measured in benchmarks/)
    _compare(again, resumed, atol=0)


def test_damaged_store_entry_is_detected_and_recomputed(tmp_path, small_dimer):
    spec = ik.ScanSpec(dimer=small_dimer, coordinate=ik.AtomPair(1, 2), factors=[1.0, 1.3],
                       levels=["hf/def2-svp"])
    store = tmp_path / "store"
    first = ik.run_scan(spec, cache=store, progress=False, executor="serial")
    entries = _entries(store)
    assert len(entries) == 3 * 2 + 2
    # tamper with a stored energy (valid JSON, wrong checksum) and truncate another file
    data = json.loads(entries[0].read_text())
    data["record"]["energy_hartree"] += 1e-3
    entries[0].write_text(json.dumps(data))
    entries[1].write_text(entries[1].read_text()[:40])
    with pytest.warns(ik.InterkitWarning, match="failed its checksum"):
        again = ik.run_scan(spec, cache=store, progress=False, executor="serial")
    assert again.attrs["calculations_computed"] == 2
    _compare(again, first)
    assert len(list(store.glob("objects/*/*.damaged"))) == 2
    assert ResultStore(store).get(entries[0].stem) is not None


def test_failed_point_is_nan_with_reason_and_the_rest_completes(tmp_path, small_dimer, monkeypatch):
    from interkit.engine import energy

    spec = ik.ScanSpec(dimer=small_dimer, coordinate=ik.AtomPair(1, 2), factors=[1.0, 1.2, 1.5],
                       levels=["hf/def2-svp"])
    target = spec.points[1].dimer.coordinates[3]
    real_make = energy._make_scf

    def sabotaged(mol, level, conv_tol):
        mf = real_make(mol, level, conv_tol)
        coords = mol.atom_coords() * ik.units.BOHR_TO_ANGSTROM
        if np.any(np.all(np.abs(coords - target) < 1e-6, axis=1)):
            mf.max_cycle = 1  # every rung of the ladder stops after one cycle
        return mf

    monkeypatch.setattr(energy, "_make_scf", sabotaged)
    store = tmp_path / "store"
    ds = ik.run_scan(spec, cache=store, progress=False, executor="serial")
    status = ds["status"].values[0]
    assert list(status) == ["ok", "failed", "ok"]
    assert np.isnan(ds["e_int"].values[0, 1]) and np.isnan(ds["e_int_nocp"].values[0, 1])
    assert np.all(np.isfinite(ds["e_int"].values[0, [0, 2]]))
    assert "SCF did not converge" in str(ds["status_detail"].values[0, 1])
    assert not bool(ds["converged"].values[0, 1])
    # failed calculations are not stored: the next run retries exactly those
    monkeypatch.undo()
    rerun = ik.run_scan(spec, cache=store, progress=False, executor="serial")
    assert rerun.attrs["calculations_computed"] == 3
    assert (rerun["status"] == "ok").all()
    ik.save_scan(ds, tmp_path / "with-failure.nc")
    back = ik.open_scan(tmp_path / "with-failure.nc")
    assert str(back["status"].values[0, 1]) == "failed"


def test_save_open_roundtrip_is_exact(tmp_path, small_dimer):
    spec = ik.ScanSpec(dimer=small_dimer, coordinate=ik.AtomPair(1, 2), factors=[1.0, 1.4],
                       levels=["hf/sto-3g", "b3lyp-d3bj/sto-3g"])
    ds = ik.run_scan(spec, progress=False, executor="serial")
    ik.validate(ds)
    path = tmp_path / "scan.nc"
    ik.save_scan(ds, path)
    back = ik.open_scan(path)
    xr.testing.assert_identical(back, ds)
    assert back["converged"].dtype == bool
    assert ik.spec_of(back).to_dict() == spec.to_dict()
    for name in ("e_int", "e_int_nocp", "bsse", "coordinates", "distance"):
        assert back[name].attrs["units"] in ("kcal/mol", "angstrom")
