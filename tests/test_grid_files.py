"""Saved orientation grids: verify and rerun from the recorded recipe, CSV and JSON exports
read back from disk, the HTML report and ``interkit show`` of a grid file.

Geometry: the S22 water dimer from ase.data.s22 (Jurečka et al., PCCP 8, 1985 (2006));
level hf/sto-3g (cheap), a 2 x 2 angle x distance grid.
"""

from __future__ import annotations

import csv
import json
import re

import numpy as np
import pytest
from conftest import require, s22_dimer

import interkit as ik
from interkit.cli.main import main

LEVEL = "hf/sto-3g"
ANGLES = [0.0, 20.0]
DISTANCES = [2.9, 3.2]
THRESHOLD = 1e-8   # hartree, the default SCF threshold
#: kcal/mol per hartree (CODATA 2018 hartree energy 4.3597447222071e-18 J, Avogadro
#: 6.02214076e23 /mol, thermochemical calorie 4.184 J)
KCAL_PER_HARTREE = 4.3597447222071e-18 * 6.02214076e23 / 4184.0
#: CODATA 2018 bohr radius in angstrom
BOHR_ANGSTROM = 0.529177210903


@pytest.fixture(scope="module")
def saved_grid(tmp_path_factory):
    """A 2 x 2 grid (B turned about z through its centre of mass, then moved along the
    centre-of-mass line), computed into a store and saved."""
    folder = tmp_path_factory.mktemp("grid")
    grid = ik.OrientationGrid(s22_dimer("Water_dimer"),
                              [ik.Rotation((0.0, 0.0, 1.0), ANGLES), ik.Separation(DISTANCES)])
    ds = ik.run_orientation_scan(grid, executor="serial", cache=folder / "store", progress=False, levels=[LEVEL])
    assert (ds["status"] == "ok").all()
    path = folder / "grid.nc"
    ik.save_grid(ds, path)
    return path, folder / "store"


def _tampered(path, tmp_path, name="bad.nc", **where):
    ds = ik.open_grid(path)
    ds["e_int"].loc[dict(level=LEVEL, **where)] = ds["e_int"].sel(level=LEVEL, **where) + 0.05   # kcal/mol
    out = tmp_path / name
    ik.save_grid(ds, out)
    return out


# ---------------------------------------------------------------------- verify / rerun
def test_verify_grid_passes_and_names_a_tampered_point(saved_grid, tmp_path, capsys):
    path, _ = saved_grid
    # a fresh SCF converged to the threshold reproduces the saved energies to far below
    # 0.05 kcal/mol (common practice), so the tampered value must stand out
    table = ik.verify_grid(path, sample=4, executor="serial", progress=False)
    assert table.passed and list(table.indices) == [0, 1, 2, 3]
    bad = _tampered(path, tmp_path, angle=20.0, distance=2.9)
    table = ik.verify_grid(bad, sample=4, executor="serial", progress=False)
    assert not table.passed and table.failed == ["e_int"]
    row = next(r for r in table if r.variable == "e_int")
    assert row.max_abs_deviation == pytest.approx(0.05, abs=1e-4)
    assert "point 2 (angle = 20 degree, distance = 2.9 angstrom)" in row.where
    # the command line takes the grid file as it takes a scan file: exit 1, the point named
    assert main(["verify", str(bad), "--sample", "4", "--serial", "--quiet"]) == 1
    out = capsys.readouterr().out
    assert "verify: FAILED for e_int" in out and "point 2 (angle = 20 degree, distance = 2.9 angstrom)" in out


def test_verify_grid_rebuilds_the_geometry_from_the_recipe(saved_grid, tmp_path):
    path, _ = saved_grid
    ds = ik.open_grid(path)
    recipe = json.loads(ds.attrs["grid_json"])
    recipe["axes"][0]["angles_deg"] = [0.0, 25.0]    # the recipe no longer gives the saved geometry
    ds.attrs["grid_json"] = json.dumps(recipe)
    bad = tmp_path / "recipe.nc"
    ik.save_grid(ds, bad)
    table = ik.verify_grid(bad, sample=1, seed=0, executor="serial", progress=False)
    assert list(table.indices) == [3]        # the turned row: angle 20 (file) vs 25 (recipe)
    assert "coordinates" in table.failed
    assert table.keys_matching < table.keys_total   # other geometry, other calculations


def test_rerun_grid_equals_the_original_within_the_scf_scatter(saved_grid, tmp_path, capsys):
    path, store = saved_grid
    saved = ik.open_grid(path)
    fresh, table = ik.rerun_grid(path, cache=None, executor="serial", progress=False)
    assert table.passed and table.what == "rerun"
    assert fresh["e_int"].dims == saved["e_int"].dims == ("level", "angle", "distance")
    assert fresh["angle"].values.tolist() == ANGLES and fresh["distance"].values.tolist() == DISTANCES
    # E_int is three SCF energies, each converged to THRESHOLD; a variational energy
    # carries its error at second order, so 100 thresholds each is generous (common practice)
    dev = np.abs(fresh["e_int"].values - saved["e_int"].values).max() / KCAL_PER_HARTREE
    assert dev < 3 * 100 * THRESHOLD
    # with the store the grid was computed into, nothing is computed and the file is written
    out = tmp_path / "again.nc"
    assert main(["rerun", str(path), "--cache", str(store), "--serial", "--quiet", "-o", str(out)]) == 0
    text = capsys.readouterr().out
    assert "15 calculations from the store, 0 computed" in text and "rerun: every variable within" in text
    again = ik.open_grid(out)
    assert np.array_equal(again["e_int"].values, saved["e_int"].values)
    # a tampered file fails the rerun (exit 1)
    bad = _tampered(path, tmp_path, angle=0.0, distance=3.2)
    assert main(["rerun", str(bad), "--cache", str(store), "--serial", "--quiet"]) == 1
    assert "point 1 (angle = 0 degree, distance = 3.2 angstrom)" in capsys.readouterr().out


def test_scan_functions_point_a_grid_to_the_grid_functions(saved_grid):
    path, _ = saved_grid
    for call in (lambda: ik.verify_scan(path), lambda: ik.rerun_scan(ik.open_grid(path)),
                 lambda: ik.export_scan(path, str(path) + ".csv"),
                 lambda: ik.export_scan(ik.open_grid(path), str(path) + ".csv")):
        with pytest.raises(ik.InputError, match="orientation grid.*verify_grid"):
            call()
    assert not (path.parent / (path.name + ".csv")).exists()     # nothing written


def test_sampled_orientations_verify_and_export_their_quaternions(tmp_path):
    sample = ik.OrientationSample(2, seed=3)
    grid = ik.OrientationGrid(s22_dimer("Water_dimer"), [ik.Separation([3.0]), sample])
    ds = ik.run_orientation_scan(grid, executor="serial", cache=None, progress=False, levels=[LEVEL])
    path = tmp_path / "sample.nc"
    ik.save_grid(ds, path)
    assert ik.verify_grid(path, sample=2, executor="serial", progress=False).passed
    doc = json.loads(open(ik.export_grid(path, tmp_path / "sample.json"), encoding="utf-8").read())
    # the quaternions of the sample travel with every point (the rotation from the start)
    for p, point in enumerate(doc["points"]):
        assert point["axes"] == {"distance": 3.0, "orientation": p}
        assert point["quaternion_xyzw"] == pytest.approx(sample.quaternions[p].tolist(), abs=1e-15)


# ---------------------------------------------------------------------- exports
def test_grid_csv_has_one_column_per_axis_and_reads_back(saved_grid, tmp_path):
    path, _ = saved_grid
    ds = ik.open_grid(path)
    ds["e_int"].loc[dict(level=LEVEL, angle=20.0, distance=3.2)] = np.nan    # a failed point
    ds["status"] = ds["status"].astype("<U16")
    ds["status"].loc[dict(level=LEVEL, angle=20.0, distance=3.2)] = "failed"
    failed = tmp_path / "failed.nc"
    ik.save_grid(ds, failed)
    out = tmp_path / "grid.csv"
    assert main(["export", str(failed), "-o", str(out), "--unit", "kJ/mol"]) == 0
    with open(out, newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert list(rows[0]) == ["level", "angle_degree", "distance_angstrom", "point", "variable", "value", "unit",
                             "status"]
    e_int = [r for r in rows if r["variable"] == "e_int"]
    assert len(e_int) == 4
    for r in e_int:
        cell = dict(level=r["level"], angle=float(r["angle_degree"]), distance=float(r["distance_angstrom"]))
        assert int(r["point"]) == int(ds["point"].sel(angle=cell["angle"], distance=cell["distance"]))
        want = float(ds["e_int"].sel(cell))
        if np.isnan(want):
            assert r["value"] == "" and r["status"] == "failed"
        else:   # 1 kcal = 4.184 kJ (thermochemical calorie)
            assert r["unit"] == "kJ/mol" and float(r["value"]) == pytest.approx(4.184 * want, rel=1e-9)
            assert r["status"] == "ok"
    assert {r["variable"] for r in rows} >= {"e_int", "e_int_nocp", "bsse"}


def test_grid_json_has_a_qcschema_molecule_per_point(saved_grid, tmp_path):
    path, _ = saved_grid
    ds = ik.open_grid(path)
    out = tmp_path / "grid.json"
    assert main(["export", str(path), "-o", str(out)]) == 0
    doc = json.loads(out.read_text(encoding="utf-8"))
    assert doc["schema_name"] == "interkit_grid_export"
    assert [(a["name"], a["units"], a["values"]) for a in doc["axes"]] == [("angle", "degree", ANGLES),
                                                                           ("distance", "angstrom", DISTANCES)]
    assert json.loads(ds.attrs["grid_json"]) == doc["grid"]
    assert len(doc["points"]) == 4
    for point in doc["points"]:
        cell = dict(angle=point["axes"]["angle"], distance=point["axes"]["distance"])
        mol = point["molecule"]
        assert mol["schema_name"] == "qcschema_molecule" and mol["symbols"] == ["O", "H", "H", "O", "H", "H"]
        xyz = ds["coordinates"].sel(cell).values
        assert np.allclose(np.reshape(mol["geometry"], (6, 3)) * BOHR_ANGSTROM, xyz, atol=1e-12)
        assert mol["fragments"] == [[0, 1, 2], [3, 4, 5]]
        ghost_b = point["counterpoise_molecules"]["a_dimer_basis"]["real"]
        assert ghost_b == [True, True, True, False, False, False]
        k = ds["point"].sel(cell).item()
        assert doc["variables"]["e_int"]["values"][0][ANGLES.index(cell["angle"])][
            DISTANCES.index(cell["distance"])] == pytest.approx(float(ds["e_int"].sel(level=LEVEL, **cell)))
        assert point["index"] == k
    # geometry-only formats of a distance scan are refused for a grid, in one line
    assert main(["export", str(path), "-o", str(tmp_path / "grid.xyz")]) == 2
    assert not (tmp_path / "grid.xyz").exists()


# ---------------------------------------------------------------------- report and show
def test_grid_report_and_show(saved_grid, tmp_path, capsys):
    require("matplotlib", "the notebook layer needs matplotlib (pip install -e .[test])")
    path, _ = saved_grid
    ds = ik.open_grid(path)
    out = tmp_path / "grid.html"
    assert main(["report", str(path), "-o", str(out)]) == 0
    text = out.read_text(encoding="utf-8")
    assert text.count('<img src="data:image/png;base64,') == 1            # the map of the one level
    assert "<script" not in text and "http" not in text.replace("http-equiv", "")
    assert "Lowest grid point" in text and "Caution." in text and "grid recipe" in text.lower()
    e = ds["e_int"].sel(level=LEVEL).values
    i, j = np.unravel_index(np.nanargmin(e), e.shape)
    assert f"{e[i, j]:.3f}" in text
    assert main(["report", str(path), "-o", str(out), "--reference", "x"]) == 2      # no such option for a grid
    capsys.readouterr()
    assert main(["show", str(path)]) == 0
    shown = capsys.readouterr().out
    line = next(x for x in shown.splitlines() if x.strip().startswith(f"{LEVEL}:"))
    assert f"{e[i, j]:.3f}" in line
    assert f"angle = {ANGLES[i]:g} degree, distance = {DISTANCES[j]:g} angstrom" in line
    assert "minimum-energy path" in shown and "model results" in shown


def test_one_axis_grid_report_draws_the_curve(tmp_path):
    require("matplotlib", "the notebook layer needs matplotlib (pip install -e .[test])")
    grid = ik.OrientationGrid(s22_dimer("Water_dimer"), ik.Rotation((0.0, 0.0, 1.0), [-20.0, 0.0, 20.0]))
    ds = ik.run_orientation_scan(grid, executor="serial", cache=None, progress=False, levels=[LEVEL])
    text = open(ik.write_grid_report(ds, tmp_path / "line.html"), encoding="utf-8").read()
    assert text.count("data:image/png;base64,") == 1 and "along angle" in text
    assert len(re.findall(r"<tr><td>", text)) >= 3    # the energy table has the three angles
