"""``interkit optimise`` and ``interkit fit-sites``: files written, bad input refused with
exit 2 and nothing written. Geometry: the S22 water dimer (ase.data.s22, Jurečka et al.,
PCCP 8, 1985 (2006)); HF/STO-3G to keep it cheap."""

from __future__ import annotations

import csv
import json

import numpy as np
from conftest import s22_dimer

import interkit as ik
from interkit.analysis import site_fits as sf
from interkit.cli.main import main
from interkit.data.rigid_trajectory import open_trajectory
from interkit.model.rigid import moved_b


def test_optimise_writes_trajectory_and_xyz(tmp_path, capsys):
    xyz = tmp_path / "start.xyz"
    xyz.write_text(moved_b(s22_dimer("Water_dimer"), (0.2, 0.0, 0.0), (0.0, 0.0, 0.2)).to_xyz_string())
    out = tmp_path / "traj.nc"
    rc = main(["optimise", str(xyz), "-o", str(out), "--level", "hf/sto-3g", "--cache", str(tmp_path / "st")])
    assert rc == 0
    tr = open_trajectory(out)
    assert tr.attrs["converged"] and tr.attrs["level"] == "hf/sto-3g"
    final = ik.Dimer.from_xyz(tmp_path / "traj.xyz", fragment_a=[0, 1, 2])
    np.testing.assert_allclose(final.coordinates, tr["coordinates"].values[-1], atol=1e-9)
    assert "converged" in capsys.readouterr().out


def test_optimise_refuses_bad_input_and_writes_nothing(tmp_path, capsys):
    xyz = tmp_path / "start.xyz"
    xyz.write_text(s22_dimer("Water_dimer").to_xyz_string())
    out = tmp_path / "traj.nc"
    for extra in (["--level", "ccsd(t)/sto-3g"], [], ["--level", "hf/sto-3g", "--max-steps", "0"]):
        assert main(["optimise", str(xyz), "-o", str(out), "--cache", str(tmp_path / "st"), *extra]) == 2
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and err[0].startswith("interkit: error:")
    assert not out.exists() and not (tmp_path / "traj.xyz").exists()


def test_fit_sites_writes_the_parameter_tables(tmp_path, capsys):
    d = s22_dimer("Water_dimer")
    spec = ik.ScanSpec(dimer=d, coordinate=ik.AtomPair(0, 3), factors=[0.9, 1.0, 1.1, 1.2, 1.4, 1.7],
                       levels=["hf/sto-3g"])
    ds = ik.run_scan(spec, executor="serial", cache=None, progress=False)
    geoms = [d.with_coordinates(c) for c in ds["coordinates"].values]
    data = sf._collect([(g, 0.0) for g in geoms], [0] * 6, sf._types_of(geoms, {"O": "X", "H": "X"}), None)
    ds["e_int"].values[0] = sf._model("lj", False, data, np.array([0.1, 2.9]))  # synthetic LJ energies
    ik.save_scan(ds, tmp_path / "scan.nc")
    args = ["fit-sites", str(tmp_path / "scan.nc"), "--model", "lj", "--type", "O=X", "--type", "H=X",
            "--csv", str(tmp_path / "p.csv"), "--json", str(tmp_path / "p.json"), "--plot", str(tmp_path / "f.png")]
    assert main(args) == 0
    rows = list(csv.DictReader(open(tmp_path / "p.csv")))
    assert abs(float(rows[0]["value"]) - 0.1) < 1e-6 and rows[0]["parameter"] == "epsilon"
    assert json.load(open(tmp_path / "p.json"))["model"] == "lj"
    assert (tmp_path / "f.png").stat().st_size > 0
    capsys.readouterr()
    assert main(["fit-sites", str(tmp_path / "scan.nc"), "--model", "lj", "--type", "O",
                 "--csv", str(tmp_path / "q.csv")]) == 2
    assert "--type" in capsys.readouterr().err and not (tmp_path / "q.csv").exists()
