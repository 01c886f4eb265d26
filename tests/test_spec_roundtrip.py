"""Specs round-trip through TOML: ScanSpec.to_toml / write_spec, the Dataset's spec_toml,
``interkit spec``, the launcher's "save spec".

Reason (issue 13, item 3): a notebook scan must become a spec file for the cluster that
runs the same calculations. "The same" is checked by the store keys of the planned jobs
(every number-changing setting is part of a key), so no calculation is needed.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from conftest import hf_dimer, require

import interkit as ik


def _keys(spec) -> list[str]:
    from interkit.run.plan import plan_scan

    return sorted(plan_scan(spec, check=False).jobs)


def _read_back(spec, tmp_path):
    from interkit.share.spec_writer import write_spec

    path = write_spec(spec, tmp_path / "scan.toml")
    return ik.load_spec_toml(path)


def _frames_spec():
    dimer = hf_dimer()
    b = np.array(dimer.fragment_b)
    frames = []
    for shift in (0.0, 0.37, 0.81):   # B moved off the axis, so frames are not a rigid grid
        xyz = np.array(dimer.coordinates, dtype=float)
        xyz[b] += [shift * 0.3, 0.1 * shift, 0.2 + shift]
        frames.append(dimer.with_coordinates(xyz))   # Dimers: the frames carry their symbols
    return ik.ScanSpec(dimer=dimer, coordinate=ik.Frames(frames, ik.AtomPair(0, 2)), levels=["hf/sto-3g"])


def _open_shell():
    # two hydrogen atoms 2.5 Å apart: doublet fragments, singlet (broken-symmetry) dimer
    text = "2\nH2 stretched\nH 0 0 0\nH 0 0 2.5\n"
    return ik.Dimer.from_xyz_string(text, fragment_a=[0], multiplicities=(2, 2), dimer_multiplicity=1,
                                    name="h...h")


CASES = {
    "distances": lambda: ik.ScanSpec(dimer=hf_dimer(), distances=[2.61, 3.0, 3.7], levels=["hf/sto-3g"]),
    "factors and atom pair": lambda: ik.ScanSpec(dimer=hf_dimer(), coordinate=ik.AtomPair(1, 2),
                                                 factors=[0.95, 1.0, 1.3], levels=["hf/sto-3g"]),
    "vector": lambda: ik.ScanSpec(dimer=hf_dimer(), coordinate=ik.Vector((0.0, 0.3, 1.0)),
                                  distances=[2.9, 3.3], levels=["hf/sto-3g"]),
    "frames": _frames_spec,
    "level settings": lambda: ik.ScanSpec(
        dimer=hf_dimer(), distances=[3.0, 3.5],
        levels=[ik.parse_level("b3lyp/sto-3g", grid_level=4, grid_pruning="treutler", density_fitting=False),
                ik.parse_level("mp2/sto-3g", frozen_core=False, ri_auxbasis="def2-svp-ri"),
                ik.parse_level("hf/sto-3g", jk_auxbasis="def2-universal-jkfit")],
        scf_threshold_hartree=1e-9, memory_limit_mb=1234.5),
    "dispersion list": lambda: ik.ScanSpec(dimer=hf_dimer(), distances=[3.0, 3.4],
                                           levels=["b3lyp/sto-3g", "hf/sto-3g"],
                                           dispersion=["none", "d3bj", "d3zero-atm"]),
    "decomposition": lambda: ik.ScanSpec(dimer=hf_dimer(), distances=[3.0], levels=["hf/sto-3g"],
                                         decomposition="sapt0", decomposition_basis="sto-3g",
                                         sapt_memory_limit_mb=500.0, counterpoise=True, forces=True),
    "dimer multiplicity": lambda: ik.ScanSpec(dimer=_open_shell(), distances=[2.5, 3.0], levels=["hf/sto-3g"]),
    "no counterpoise": lambda: ik.ScanSpec(dimer=hf_dimer(), distances=[3.0, 3.2], levels=["hf/sto-3g"],
                                           counterpoise=False, name='a "quoted" name\\ with ünïcode'),
}


@pytest.mark.parametrize("case", list(CASES))
def test_spec_written_and_read_gives_the_same_jobs(case, tmp_path):
    spec = CASES[case]()
    back = _read_back(spec, tmp_path)
    assert _keys(back) == _keys(spec)
    # every field, not only the keyed ones (a Vector is normalised again when read: last digit)
    assert _same(back.to_dict(), spec.to_dict())
    assert _same(ik.load_spec_toml(_write(back.to_toml(), tmp_path)).to_dict(), spec.to_dict())


def _write(text, tmp_path):
    path = tmp_path / "again.toml"
    path.write_text(text, encoding="utf-8")
    return path


def _same(a, b) -> bool:
    if isinstance(a, dict):
        return isinstance(b, dict) and a.keys() == b.keys() and all(_same(a[k], b[k]) for k in a)
    if isinstance(a, (list, tuple)):
        return isinstance(b, (list, tuple)) and len(a) == len(b) and all(map(_same, a, b))
    if isinstance(a, float) and isinstance(b, float):
        return math.isclose(a, b, rel_tol=1e-14, abs_tol=1e-15)
    return a == b


def test_the_dataset_keeps_the_spec_as_toml_and_interkit_spec_extracts_it(tmp_path, capsys):
    from interkit.cli.main import main

    spec = ik.ScanSpec(dimer=hf_dimer(), distances=[2.8, 3.4], levels=["hf/sto-3g"])
    ds = ik.run_scan(spec, executor="serial", progress=False, cache=None)
    assert ds.attrs["spec_toml"] == spec.to_toml()
    ik.save_scan(ds, tmp_path / "scan.nc")
    assert ik.open_scan(tmp_path / "scan.nc").attrs["spec_toml"] == spec.to_toml()   # survives the file
    assert main(["spec", str(tmp_path / "scan.nc"), "-o", str(tmp_path / "again.toml")]) == 0
    again = ik.load_spec_toml(tmp_path / "again.toml")
    assert _keys(again) == _keys(spec)
    # the keys of the saved calculations are those of the spec read back
    saved = {str(k) for k in np.unique(ds["job_key"].values) if str(k)}
    assert saved == set(_keys(again))
    assert main(["spec", str(tmp_path / "scan.nc"), "-o", str(tmp_path / "bad.txt")]) == 2
    assert not (tmp_path / "bad.txt").exists()
    capsys.readouterr()
    assert main(["spec", str(tmp_path / "scan.nc")]) == 0     # without -o: printed
    assert capsys.readouterr().out == spec.to_toml()


def test_launcher_saves_the_spec_of_its_form(tmp_path):
    require("ipywidgets", "the notebook layer needs ipywidgets (pip install -e .[test])")
    from interkit.widgets.launcher import ScanLauncher

    launcher = ScanLauncher(executor="serial", cache=None)
    launcher.grid.value = "0.9, 1.0, 1.4"
    launcher.levels.value = "hf/sto-3g"
    path = launcher.save_spec(tmp_path / "form.toml")
    assert path is not None, launcher.message.value
    assert _keys(ik.load_spec_toml(path)) == _keys(launcher.build_spec())
    launcher.spec_path.value = str(tmp_path / "missing" / "x.toml")
    assert launcher.save_spec() is None and "does not exist" in launcher.message.value
