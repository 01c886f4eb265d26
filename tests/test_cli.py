"""The command line end to end: scan from a TOML spec, show, systems."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest

import interkit as ik
import interkit.analysis.minima

SPEC = """
name = "water-methanol test"
[system]
demo = "water_methanol"
[scan]
coordinate = "atom-pair"
atoms = [1, 3]
factors = [0.9, 1.0, 1.1, 1.3, 1.6]
[calculation]
levels = ["hf/def2-svp"]
counterpoise = true
"""


def _cli(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "interkit.cli", *args], capture_output=True, text=True,
                          cwd=cwd, timeout=600)


def test_scan_then_show(tmp_path):
    spec = tmp_path / "spec.toml"
    spec.write_text(SPEC)
    out = _cli("scan", str(spec), "-o", str(tmp_path / "scan.nc"), "--cache", str(tmp_path / "store"),
               "--workers", "2", "--quiet")
    assert out.returncode == 0, out.stderr
    assert "counterpoise-corrected" in out.stdout and "well depth" in out.stdout
    ds = ik.open_scan(tmp_path / "scan.nc")
    assert ds.sizes["distance"] == 5 and (ds["status"] == "ok").all()
    # the demo geometry is hydrogen-bonded: bound at HF with a minimum inside the grid
    assert float(ds["e_int"].min()) < -2.0
    shown = _cli("show", str(tmp_path / "scan.nc"))
    assert shown.returncode == 0
    row = next(line for line in shown.stdout.splitlines() if line.startswith("HF/def2-SVP"))   # trade spelling of the level
    r_min, depth = (float(x) for x in row.split()[1:3])
    m = ik.analysis.find_minimum(ds["distance"].values, ds["e_int"].values[0])
    assert np.isclose(r_min, m.r_min_angstrom, atol=1e-3) and np.isclose(depth, m.well_depth_kcal_per_mol, atol=1e-3)
    assert "model results" in shown.stdout
    # a rerun of the finished spec takes everything from the store
    again = _cli("scan", str(spec), "-o", str(tmp_path / "again.nc"), "--cache", str(tmp_path / "store"), "--quiet")
    assert again.returncode == 0
    assert ik.open_scan(tmp_path / "again.nc").attrs["calculations_computed"] == 0


def test_systems_lists_the_demo_catalog():
    out = _cli("systems")
    assert out.returncode == 0
    for name in ik.list_demos():
        assert name in out.stdout
    assert len(ik.list_demos()) >= 6


def test_every_demo_system_loads_with_its_catalog_charges():
    for name in ik.list_demos():
        d = ik.load_demo(name)
        entry = ik.demo_catalog()[name]
        assert list(d.charges) == entry["charges"] and list(d.multiplicities) == entry["multiplicities"]
        i, j = entry["contact"]
        ik.AtomPair(i, j).check(d)


def test_show_reports_where_the_force_vanishes(tmp_path):
    i, j = ik.demo_catalog()["water_methanol"]["contact"]
    spec = ik.ScanSpec(dimer=ik.load_demo("water_methanol"), coordinate=ik.AtomPair(i, j),
                       factors=[0.9, 1.0, 1.1, 1.25, 1.5], levels=["hf/sto-3g"], forces=True)
    ds = ik.run_scan(spec, progress=False)
    ik.save_scan(ds, tmp_path / "f.nc")
    out = _cli("show", str(tmp_path / "f.nc"))
    assert out.returncode == 0
    row = next(line for line in out.stdout.splitlines() if line.startswith("HF/STO-3G") and "analytic" in line)
    r0 = float(row.split()[1])
    assert r0 == pytest.approx(ik.analysis.force_zero_crossing(ds["distance"].values, ds["force_along"].values[0]),
                               abs=6e-4)  # printed with 3 decimals
    assert abs(r0 - ik.analysis.find_minimum(ds["distance"].values, ds["e_int"].values[0]).r_min_angstrom) < 0.05
