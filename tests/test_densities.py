"""Deformation densities of one scan point: stored matrices, grids, profiles, cube files."""

from __future__ import annotations

import json

import numpy as np
import pytest
from pyscf import gto, scf
from pyscf.dft import numint

import interkit as ik
from interkit.cli.main import main
from interkit.data.cube import read_cube
from interkit.model.demo import load_demo
from interkit.run.densities import (
    DensitiesNotStoredError,
    compute_point_densities,
    load_point_densities,
)
from interkit.run.store import ResultStore
from interkit.units import ANGSTROM_TO_BOHR

LEVEL = "hf/sto-3g"


def _spec(keep: bool):
    return ik.ScanSpec(dimer=load_demo("water_methanol"), coordinate=ik.CentreOfMass(),
                       factors=[1.0, 1.3], levels=[LEVEL], keep_densities=keep)


@pytest.fixture(scope="module")
def stored(tmp_path_factory):
    """A two-point scan run with keep_densities=True into a store (about 1 s)."""
    root = tmp_path_factory.mktemp("dens")
    cache = root / "cache"
    ds = ik.run_scan(_spec(True), executor="serial", cache=cache, progress=False)
    path = root / "scan.nc"
    ik.save_scan(ds, path)
    return ds, cache, path


def test_deformation_density_integrates_to_zero(stored):
    ds, cache, _ = stored
    pdens = load_point_densities(ds, 0, cache=cache)
    counts = pdens.electron_counts(grid_level=3)
    # ∫Δρ = N_AB − N_A − N_B = 28 − 10 − 18 = 0: the ghosted monomers share the dimer's
    # basis and the DFT grid's quadrature error cancels in the difference (required by
    # the issue to 1e-6 electrons)
    assert abs(counts["deformation"]) < 1e-6
    # electron counts of water (10) and methanol (18): the grid integrates them to 1e-4
    assert counts["dimer"] == pytest.approx(28.0, abs=1e-4)
    assert counts["a_dimer_basis"] == pytest.approx(10.0, abs=1e-4)
    assert counts["b_dimer_basis"] == pytest.approx(18.0, abs=1e-4)


def test_stored_dimer_density_is_the_pyscf_density(stored):
    ds, cache, _ = stored
    pdens = load_point_densities(ds, 1, cache=cache)
    xyz = ds["coordinates"].values[1] * ANGSTROM_TO_BOHR
    # a direct pyscf RHF of the dimer at point 1 (same geometry, bohr, sto-3g)
    mol = gto.M(atom=[(s, tuple(p)) for s, p in zip(ds["symbol"].values, xyz)], unit="Bohr",
                basis="sto-3g", verbose=0)
    mf = scf.RHF(mol)
    mf.conv_tol = 1e-10
    mf.kernel()
    assert np.allclose(pdens.matrices["dimer"], mf.make_rdm1(), atol=1e-4)


def test_keep_densities_changes_no_key_and_no_number(stored, tmp_path):
    ds, _, _ = stored
    plain = ik.run_scan(_spec(False), executor="serial", progress=False)
    # the option changes what the store entry holds, never a key or an energy
    assert (plain["job_key"].values == ds["job_key"].values).all()
    assert np.allclose(plain["e_int"].values, ds["e_int"].values, atol=1e-7)


def test_missing_densities_say_so_and_one_point_is_computed(tmp_path):
    cache = tmp_path / "cache"
    ds = ik.run_scan(_spec(False), executor="serial", cache=cache, progress=False)
    with pytest.raises(DensitiesNotStoredError, match="compute_point_densities"):
        load_point_densities(ds, 1, cache=cache)
    store = ResultStore(cache)
    key = str(ds["job_key"].sel(level=LEVEL, role="dimer").values[1])
    before = store.get(key)["energy_hartree"]
    n_entries = len(store.keys())
    pdens = compute_point_densities(ds, 1, cache=cache)
    after = ResultStore(cache).get(key)
    # the entry keeps its recorded numbers and gains the matrix; no other entry appears
    assert after["energy_hartree"] == before and "density_matrix" in after
    assert len(ResultStore(cache).keys()) == n_entries
    assert np.allclose(load_point_densities(ds, 1, cache=cache).deformation_matrix, pdens.deformation_matrix)
    with pytest.raises(DensitiesNotStoredError):   # point 0 stays without densities
        load_point_densities(ds, 0, cache=cache)


def test_cube_files_read_back_and_match_the_profile(stored, tmp_path, capsys):
    ds, cache, path = stored
    out = tmp_path / "cubes"
    assert main(["cube", str(path), "--point", "0", "-o", str(out), "--cache", str(cache),
                 "--spacing", "0.3"]) == 0
    names = sorted(p.name for p in out.iterdir())
    assert names == [f"point-0-{n}.cube" for n in ("a_dimer_basis", "b_dimer_basis", "deformation", "dimer")]
    cube = read_cube((out / "point-0-deformation.cube").read_text())
    dimer = read_cube((out / "point-0-dimer.cube").read_text())
    # header: the atoms of the scan point (atomic numbers, positions in bohr)
    assert list(cube.atomic_numbers) == [8, 1, 1, 8, 1, 6, 1, 1, 1]
    assert np.allclose(cube.atom_positions_bohr, ds["coordinates"].values[0] * ANGSTROM_TO_BOHR, atol=1e-5)
    # values: the files agree with each other, Δρ = ρ_AB − ρ_A − ρ_B voxel by voxel
    # (6 significant digits are written)
    a = read_cube((out / "point-0-a_dimer_basis.cube").read_text())
    b = read_cube((out / "point-0-b_dimer_basis.cube").read_text())
    assert dimer.shape == a.shape == b.shape == cube.shape
    assert np.all(np.abs(dimer.values - a.values - b.values - cube.values) <= 2e-5 * np.abs(dimer.values) + 1e-9)
    # one voxel against a direct evaluation of the stored density there (pyscf eval_gto)
    pdens = load_point_densities(ds, 0, cache=cache)
    idx = np.unravel_index(np.argmax(np.abs(cube.values)), cube.shape)
    point = cube.origin_bohr + np.asarray(idx) @ cube.axes_bohr
    ao = pdens.mol.eval_gto("GTOval", point[None, :])
    assert cube.values[idx] == pytest.approx(
        numint.eval_rho(pdens.mol, ao, pdens.deformation_matrix, xctype="LDA")[0], rel=1e-4)
    # the cube's planes are perpendicular to the scan: plane sums × voxel area give the
    # charge shift along the contact; the profile (a finer 0.15 bohr grid) agrees to
    # 3 % of its largest value (stated tolerance for two grid resolutions: either one
    # is within 1.6 % of a 0.07 bohr grid here, measured)
    step = float(np.linalg.norm(cube.axes_bohr[0]))
    cube_profile = cube.values.sum(axis=(1, 2)) * cube.voxel_volume_bohr3 / step * ANGSTROM_TO_BOHR
    x, prof = pdens.profile(spacing_bohr=0.15)
    w = cube.axes_bohr[0] / step
    start = ds["anchors"].values[0][0] * ANGSTROM_TO_BOHR
    cube_x = (np.dot(cube.origin_bohr - start, w) + step * np.arange(cube.shape[0])) / ANGSTROM_TO_BOHR
    assert np.abs(np.interp(cube_x, x, prof) - cube_profile).max() < 0.03 * np.abs(prof).max()
    # and its integral along the contact is the (zero) total charge shift
    assert abs(prof.sum() * (x[1] - x[0])) < 1e-3


def test_cube_without_stored_densities_is_refused(tmp_path, capsys):
    ds = ik.run_scan(_spec(False), executor="serial", cache=tmp_path / "c", progress=False)
    ik.save_scan(ds, tmp_path / "s.nc")
    out = tmp_path / "cubes"
    assert main(["cube", str(tmp_path / "s.nc"), "--point", "1", "-o", str(out), "--cache", str(tmp_path / "c")]) == 2
    err = capsys.readouterr().err
    assert "--compute" in err and len(err.strip().splitlines()) == 1 and not out.exists()
    assert main(["cube", str(tmp_path / "s.nc"), "--point", "7", "-o", str(out)]) == 2
    assert "point: 7" in capsys.readouterr().err


def test_spec_records_keep_densities_only_when_set():
    # common practice: a new optional field leaves older spec JSON unchanged
    assert "keep_densities" not in json.loads(_spec(False).to_json())
    assert ik.ScanSpec.from_json(_spec(True).to_json()).keep_densities is True


def test_keep_densities_must_be_true_or_false():
    # one line naming the field (product rule for bad input)
    with pytest.raises(ik.InputError, match="keep_densities: 'yes'"):
        ik.ScanSpec(dimer=load_demo("water_methanol"), factors=[1.0], levels=[LEVEL], keep_densities="yes")
