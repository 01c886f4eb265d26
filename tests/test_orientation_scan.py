"""Orientation scans computed: the analytic torque against the finite difference of the
counterpoise energy in the rotation angle, a 2-D scan against the matching 1-D scans, the
grid Dataset (dimensions, units, netCDF round trip, cell geometries), orientation samples,
the map and the ``interkit orient`` command.

Geometry: the S22 water dimer from ase.data.s22 (Jurečka et al., PCCP 8, 1985 (2006));
levels hf/sto-3g and hf/def2-svp (cheap).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import xarray as xr
from conftest import require, s22_dimer

import interkit as ik
from interkit.units import HARTREE_TO_KCAL_PER_MOL

LEVEL = "hf/sto-3g"
TIGHT = 1e-11   # hartree: SCF threshold of the derivative and equality checks
ANGLES = [0.0, 20.0, 40.0]
DISTANCES = [2.8, 3.0, 3.3]


@pytest.fixture(scope="module")
def water():
    return s22_dimer("Water_dimer")


@pytest.fixture(scope="module")
def angle_map(water, tmp_path_factory):
    """3 x 3 angle x distance map (B turned about a tilted axis through its centre of mass)."""
    grid = ik.OrientationGrid(water, [ik.Rotation((0.2, -0.4, 0.9), ANGLES), ik.Separation(DISTANCES)])
    ds = ik.run_orientation_scan(grid, executor="serial", cache=tmp_path_factory.mktemp("map-store"),
                                 progress=False, levels=[LEVEL], scf_threshold_hartree=TIGHT)
    assert (ds["status"] == "ok").all(), ds["status_detail"].values
    return grid, ds


def test_torque_equals_finite_difference_of_the_energy_in_the_angle(water):
    # dE/dtheta = -n . tau for B turned about axis n through its centre of mass
    # (rigid-body mechanics, recalled from memory); central difference, step 1e-3 rad
    h = 1e-3
    n = np.array([0.3, -0.5, 0.8]) / np.linalg.norm([0.3, -0.5, 0.8])
    grid = ik.OrientationGrid(water, ik.Rotation(n, [-math.degrees(h), 0.0, math.degrees(h)]))
    ds = ik.run_orientation_scan(grid, executor="serial", cache=None, progress=False, levels=["hf/def2-svp"],
                                 forces=True, scf_threshold_hartree=TIGHT)
    assert ds["e_int"].dims == ("level", "angle") and ds["angle"].attrs["units"] == "degree"
    e = ds["e_int"].values[0] / HARTREE_TO_KCAL_PER_MOL               # hartree
    de_dtheta = (e[2] - e[0]) / (2 * h)                               # hartree/rad
    torque = ds["fragment_torque"].sel(end="B").values[0, 1] / HARTREE_TO_KCAL_PER_MOL   # hartree/rad
    assert abs(de_dtheta) > 1e-4                                      # a real slope, not a zero test
    assert -torque @ n == pytest.approx(de_dtheta, abs=1e-6)


def test_two_axis_scan_equals_the_one_axis_scans(water, angle_map):
    grid, ds = angle_map
    assert ds["e_int"].dims == ("level", "angle", "distance")
    assert ds["distance"].attrs["units"] == "angstrom" and ds["angle"].attrs["units"] == "degree"
    assert ds["coordinates"].dims == ("angle", "distance", "atom", "xyz")
    rot = grid.axes[0]
    for i, angle in enumerate(ANGLES):
        # 1-D distance scan of the turned dimer, fresh calculations (no store)
        turned = rot.place(water, i)
        spec = ik.ScanSpec(dimer=turned, coordinate=ik.CentreOfMass(), distances=DISTANCES, levels=[LEVEL],
                           scf_threshold_hartree=TIGHT)
        line = ik.run_scan(spec, executor="serial", cache=None, progress=False)
        got = ds["e_int"].sel(angle=angle).values[0] / HARTREE_TO_KCAL_PER_MOL
        want = line["e_int"].values[0] / HARTREE_TO_KCAL_PER_MOL
        assert np.abs(got - want).max() < 1e-10
        assert np.allclose(ds["coordinates"].sel(angle=angle).values, line["coordinates"].values, atol=1e-12)
    # 1-D rotation scan at the second distance, fresh (rotation about B's centre of mass
    # commutes with the centre-of-mass translation)
    start = ik.Separation([DISTANCES[1]]).place(water, 0)
    turn = ik.OrientationGrid(start, ik.Rotation((0.2, -0.4, 0.9), ANGLES))
    line = ik.run_orientation_scan(turn, executor="serial", cache=None, progress=False, levels=[LEVEL],
                                   scf_threshold_hartree=TIGHT)
    got = ds["e_int"].sel(distance=DISTANCES[1]).values[0] / HARTREE_TO_KCAL_PER_MOL
    assert np.abs(got - line["e_int"].values[0] / HARTREE_TO_KCAL_PER_MOL).max() < 1e-10


def test_grid_dataset_keeps_every_variable_and_round_trips(angle_map, tmp_path):
    grid, ds = angle_map
    for name in ("e_int", "e_int_nocp", "bsse", "status", "status_detail", "job_key", "coordinates", "point"):
        assert name in ds.variables
    assert ds["point"].values.tolist() == [[0, 1, 2], [3, 4, 5], [6, 7, 8]]
    flat = ik.spec_of(ds)                                    # the flat run's spec is the provenance
    assert len(flat.points) == 9
    assert np.array_equal(flat.points[5].dimer.coordinates, ds["coordinates"].values[1, 2])
    # a rotation scan keeps both monomers rigid in the Dataset as well
    c0 = np.asarray(ds["coordinates"].values[0, 0])
    for p in ds["coordinates"].values.reshape(-1, 6, 3):
        for idx in ([0, 1, 2], [3, 4, 5]):
            d0 = np.linalg.norm(c0[idx][:, None] - c0[idx][None], axis=-1)
            d1 = np.linalg.norm(p[idx][:, None] - p[idx][None], axis=-1)
            assert np.abs(d1 - d0).max() < 1e-10
    path = tmp_path / "map.nc"
    ik.save_grid(ds, path)
    back = ik.open_grid(path)
    xr.testing.assert_identical(back, ds)
    assert ik.open_grid(path).attrs["grid_json"] == ds.attrs["grid_json"]
    cell = ik.cell_dimer(back, angle=20.0, distance=3.3)
    assert np.array_equal(cell.coordinates, grid.dimers()[1 * 3 + 2].coordinates)
    with pytest.raises(ik.InputError, match="cell angle: 25.0 is not one of"):
        ik.cell_dimer(back, angle=25.0, distance=3.3)
    with pytest.raises(ik.InputError, match="schema"):
        ik.save_scan(ds, tmp_path / "wrong.nc")       # a grid is not a distance scan


def test_map_marks_the_grid_minimum_and_the_minimum_energy_path(angle_map):
    require("matplotlib", "the notebook layer needs matplotlib (pip install -e .[test])")
    import matplotlib

    matplotlib.use("Agg")
    from interkit.plot.maps import MINIMUM_GID, PATH_GID, plot_map

    _, ds = angle_map
    ax = plot_map(ds)
    e = ds["e_int"].values[0]          # (angle, distance)
    i, j = np.unravel_index(np.nanargmin(e), e.shape)
    marker = next(line for line in ax.lines if line.get_gid() == MINIMUM_GID)
    assert marker.get_xdata()[0] == ANGLES[i] and marker.get_ydata()[0] == DISTANCES[j]
    path = next(line for line in ax.lines if line.get_gid() == PATH_GID)
    assert list(path.get_xdata()) == ANGLES
    assert list(path.get_ydata()) == [DISTANCES[k] for k in np.argmin(e, axis=1)]
    import matplotlib.pyplot as plt

    plt.close(ax.figure)


def test_orientation_sample_scan_has_distance_and_orientation_dimensions(water, tmp_path):
    sample = ik.OrientationSample(3, seed=4)
    grid = ik.OrientationGrid(water, [ik.Separation([3.0, 3.4]), sample])
    ds = ik.run_orientation_scan(grid, executor="serial", cache=tmp_path / "store", progress=False, levels=[LEVEL])
    assert ds["e_int"].dims == ("level", "distance", "orientation")
    assert np.array_equal(ds["quaternion"].values, sample.quaternions)
    assert ds["quaternion"].dims == ("orientation", "quaternion_component")
    assert np.isfinite(ds["e_int"].values).all()
    # a different orientation gives a different energy (the sample really turns B)
    assert np.ptp(ds["e_int"].values[0, 0]) > 1e-3
    ik.save_grid(ds, tmp_path / "sample.nc")
    back = ik.open_grid(tmp_path / "sample.nc")
    xr.testing.assert_identical(back, ds)
    from interkit.data.grid import grid_of

    again = grid_of(back)
    assert np.array_equal(again.axes[1].quaternions, sample.quaternions)


ORIENT_TOML = """
name = "water turn"
[system]
xyz = '''{xyz}'''
fragment_a = [0, 1, 2]
[calculation]
levels = ["hf/sto-3g"]
[[orientation.axis]]
kind = "rotation"
about = [3, 4]
pivot = 3
degrees = [0, 30]
"""


def test_orient_command_writes_the_grid_and_refuses_bad_input(water, tmp_path, capsys):
    from interkit.cli.main import main

    spec = tmp_path / "turn.toml"
    spec.write_text(ORIENT_TOML.format(xyz=water.to_xyz_string()))
    out = tmp_path / "turn.nc"
    code = main(["orient", str(spec), "-o", str(out), "--serial", "--quiet", "--cache", str(tmp_path / "store")])
    text = capsys.readouterr().out
    assert code == 0 and "lowest E_int" in text
    ds = ik.open_grid(out)
    assert ds["e_int"].dims == ("level", "angle") and ds["angle"].values.tolist() == [0.0, 30.0]
    bad = tmp_path / "bad.toml"
    bad.write_text(ORIENT_TOML.format(xyz=water.to_xyz_string()).replace("about = [3, 4]", "about = [0, 0, 0]"))
    code = main(["orient", str(bad), "-o", str(tmp_path / "bad.nc"), "--serial", "--quiet"])
    err = capsys.readouterr().err.strip()
    assert code == 2 and err.count("\n") == 0
    assert "orientation.axis[0]: rotation axis: [0, 0, 0] is a zero vector" in err
    assert not (tmp_path / "bad.nc").exists()
    bad.write_text(ORIENT_TOML.format(xyz=water.to_xyz_string()).replace("pivot = 3", "hinge = 3"))
    assert main(["orient", str(bad), "-o", str(tmp_path / "bad.nc"), "--serial", "--quiet"]) == 2
    assert "orientation.axis[0].hinge: not a key of a rotation axis" in capsys.readouterr().err


def test_map_explorer_click_shows_that_cell(angle_map):
    require("ipywidgets", "the notebook layer needs ipywidgets (pip install -e .[test])")
    from types import SimpleNamespace

    from interkit.widgets.map_explorer import MapExplorer

    grid, ds = angle_map
    for interactive in (False, True):
        if interactive:
            require("ipympl", "the notebook layer needs ipympl (pip install -e .[test])")
        ex = MapExplorer(ds, interactive=interactive)
        e = ds["e_int"].values[0]
        assert ex.cell == np.unravel_index(np.nanargmin(e), e.shape)      # opens on the grid minimum
        # a click near (angle 40, distance 2.8) selects that cell: frame and numbers of point 6
        ex._on_click(SimpleNamespace(inaxes=ex.ax, xdata=38.5, ydata=2.83))
        assert ex.cell == (2, 0) and ex.view3d.frame == 6
        assert np.allclose(ex.view3d.frames[6]["xyz"], grid.dimers()[6].coordinates, atol=1e-5)
        nums = ex.numbers()
        assert nums["angle"] == 40.0 and nums["distance"] == 2.8
        assert nums["e_int"] == float(ds["e_int"].values[0, 2, 0])
        assert f"{nums['e_int']:.4f} kcal/mol" in ex.readout.value
        ex.pickers[1].value = 2                                            # the drop-down moves it too
        assert ex.cell == (2, 2) and ex.view3d.frame == 8
