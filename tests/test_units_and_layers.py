"""Constants, unit conversion and the layering contract of the compute core."""

from __future__ import annotations

from pathlib import Path

import pytest

import interkit as ik
from interkit import units


def test_constants_are_codata_2018():
    # Source: CODATA 2018 recommended values (Tiesinga et al., Rev. Mod. Phys. 93,
    # 025010 (2021)), as listed in shared/REFERENCES.md.
    assert units.CODATA_EDITION == "CODATA 2018"
    assert units.HARTREE_TO_KCAL_PER_MOL == pytest.approx(627.5094740631, abs=1e-10)
    assert units.HARTREE_TO_KJ_PER_MOL == pytest.approx(2625.4996394799, abs=1e-10)
    assert units.HARTREE_TO_EV == pytest.approx(27.211386245988, abs=1e-12)
    assert units.HARTREE_TO_WAVENUMBER == pytest.approx(219474.6313632, abs=1e-7)
    assert units.BOHR_TO_ANGSTROM == pytest.approx(0.529177210903, abs=1e-12)


def test_molecules_use_our_bohr_not_pyscfs(water_dimer):
    # pyscf 2.14 converts angstrom with an older CODATA bohr (0.52917721092); interkit
    # hands pyscf bohr converted with CODATA 2018 so the editions never mix.
    import numpy as np

    from interkit.engine.molecule import build_molecule
    from interkit.run.plan import _job_for

    job = _job_for(water_dimer, range(6), (), 0, 0, ik.parse_level("hf/sto-3g"), 1e-10)
    mol = build_molecule(job)
    expected = np.array(job.coordinates) / 0.529177210903
    assert np.abs(mol.atom_coords() - expected).max() < 1e-12


def test_convert_energy_roundtrip():
    x = ik.convert_energy(1.0, "hartree", "cm-1")
    assert x == pytest.approx(219474.6313632)
    assert ik.convert_energy(x, "cm-1", "kcal/mol") == pytest.approx(627.5094740631)
    with pytest.raises(ik.InputError, match="to_unit"):
        ik.convert_energy(1.0, "kcal/mol", "furlongs")


#: the compute core: what to compute (model/) and the only code that talks to pyscf (engine/)
CORE_MODULES = sorted(
    str(p.relative_to(Path(ik.__file__).parent))
    for folder in ("model", "engine") for p in (Path(ik.__file__).parent / folder).glob("*.py")
) + ["units.py", "errors.py"]
FORBIDDEN = {"ipywidgets", "py3Dmol", "matplotlib", "dask", "distributed", "tqdm", "xarray", "IPython"}


@pytest.mark.parametrize("module", CORE_MODULES)
def test_compute_core_layer_contract(module):
    """The compute core imports numpy/scipy/pyscf only, never prints, never writes files."""
    import ast

    path = Path(ik.__file__).parent / module
    tree = ast.parse(path.read_text())
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names = [a.name.split(".")[0] for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.level == 0:
            names = [(node.module or "").split(".")[0]]
        else:
            names = []
        assert not FORBIDDEN.intersection(names), f"{module} imports {names}"
        if isinstance(node, ast.Call) and isinstance(node.func, ast.Name):
            assert node.func.id != "print", f"{module} prints"
            if node.func.id == "open" and len(node.args) > 1:
                mode = node.args[1]
                assert not (isinstance(mode, ast.Constant) and any(c in str(mode.value) for c in "wa")), \
                    f"{module} writes a file"
