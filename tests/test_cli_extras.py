"""Command-line comforts: --version, inspect, systems with contacts, methods.

Sources: distances computed here with numpy from the test geometry; the demo contacts
from the demo catalog; the version from interkit.__version__.
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import HF_DIMER_XYZ

import interkit as ik
from interkit.cli.main import main
from interkit.model.demo import demo_catalog


def test_version(capsys):
    with pytest.raises(SystemExit) as exit_info:
        main(["--version"])
    assert exit_info.value.code == 0
    assert capsys.readouterr().out.strip() == f"interkit {ik.__version__}"


def test_inspect_lists_atoms_fragments_and_closest_contacts(tmp_path, capsys):
    path = tmp_path / "hf2.xyz"
    path.write_text(HF_DIMER_XYZ)
    assert main(["inspect", str(path), "--charges", "0", "0", "--contacts", "3"]) == 0
    out = capsys.readouterr().out
    assert "atom numbers are 0-based" in out.splitlines()[0]
    atom_rows = [line.split() for line in out.splitlines() if line[:4].strip().isdigit()]
    assert [(int(r[0]), r[1], r[2]) for r in atom_rows] == [(0, "F", "A"), (1, "H", "A"), (2, "F", "B"),
                                                            (3, "H", "B")]
    assert "A: atoms 0-1 (FH), charge 0" in out and "B: atoms 2-3 (FH), charge 0" in out
    assert "split by covalent connectivity" in out
    # the three closest A-B pairs, computed here from the coordinates
    xyz = np.array([[float(v) for v in line.split()[1:]] for line in HF_DIMER_XYZ.splitlines()[2:6]])
    pairs = sorted((float(np.linalg.norm(xyz[i] - xyz[j])), i, j) for i in (0, 1) for j in (2, 3))[:3]
    suggestions = [line.strip() for line in out.splitlines() if line.strip().startswith("atoms = [")]
    assert len(suggestions) == 3
    for (d, i, j), line in zip(pairs, suggestions):
        assert line.startswith(f"atoms = [{i}, {j}]") and f"{d:.3f} Å" in line


def test_inspect_takes_charges_and_refuses_impossible_ones(tmp_path, capsys):
    path = tmp_path / "hf2.xyz"
    path.write_text(HF_DIMER_XYZ)
    assert main(["inspect", str(path), "--charges", "1", "-1", "--multiplicities", "2", "2"]) == 0
    out = capsys.readouterr().out
    assert "charge 1, multiplicity 2" in out and "charge -1, multiplicity 2" in out
    assert main(["inspect", str(path), "--charges", "1", "0"]) == 2   # odd electrons, singlet
    err = capsys.readouterr().err
    assert err.startswith("interkit: error: multiplicities") and len(err.strip().splitlines()) == 1


def test_systems_shows_each_demo_contact(capsys):
    assert main(["systems"]) == 0
    out = capsys.readouterr().out
    for name, entry in demo_catalog().items():
        line = next(x for x in out.splitlines() if x.startswith(name + " "))
        i, j = entry["contact"]
        assert f"atoms = [{i}, {j}]" in line


def test_methods_command_prints_the_paragraph_and_writes_bibtex(tmp_path, capsys):
    from conftest import hf_dimer

    spec = ik.ScanSpec(dimer=hf_dimer(), coordinate=ik.AtomPair(1, 2), factors=[1.0, 1.3], levels=["hf/sto-3g"])
    nc = tmp_path / "s.nc"
    ik.save_scan(ik.run_scan(spec, executor="serial", cache=None, progress=False), nc)
    bib = tmp_path / "refs.bib"
    assert main(["methods", str(nc), "--bibtex", str(bib)]) == 0
    out = capsys.readouterr().out
    assert "Boys–Bernardi counterpoise scheme" in out and "STO-3G" in out
    assert "@article{boys1970," in bib.read_text()
    assert main(["methods", str(nc), "--bibtex", str(tmp_path / "absent" / "r.bib")]) == 2
    assert "--bibtex: folder" in capsys.readouterr().err
