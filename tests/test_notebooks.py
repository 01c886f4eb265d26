"""Execute the example notebooks with nbclient (kernel from this Python environment)."""

from __future__ import annotations

import shutil
import sys
import time
from pathlib import Path

import nbformat
import pytest

NOTEBOOKS = Path(__file__).resolve().parent.parent / "notebooks"
NAMES = ["01-quickstart.ipynb", "02-levels.ipynb", "03-reopen.ipynb", "04-forces.ipynb", "05-decomposition.ipynb",
         "06-dispersion.ipynb", "07-share-and-scale.ipynb", "08-studies.ipynb",
         "09-composite-reference.ipynb", "10-orientations.ipynb"]
WIDGET_VIEW = "application/vnd.jupyter.widget-view+json"


def _execute(path: Path, cwd: Path) -> nbformat.NotebookNode:
    from nbclient import NotebookClient

    nb = nbformat.read(path, as_version=4)
    client = NotebookClient(nb, timeout=600, kernel_name="python3", resources={"metadata": {"path": str(cwd)}})
    client.execute()
    return nb


def _texts(nb) -> str:
    out = []
    for cell in nb.cells:
        for o in cell.get("outputs", []):
            out.append(o.get("text", ""))
            out.append(str(o.get("data", {}).get("text/plain", "")))
    return "\n".join(out)


def _widget_views(nb) -> int:
    return sum(WIDGET_VIEW in o.get("data", {}) for c in nb.cells for o in c.get("outputs", []))


def _no_errors(nb) -> None:
    for cell in nb.cells:
        for o in cell.get("outputs", []):
            assert o.get("output_type") != "error", f"{o.get('ename')}: {o.get('evalue')}"


@pytest.mark.parametrize("name", NAMES)
def test_notebook_is_stored_without_outputs(name):
    nb = nbformat.read(NOTEBOOKS / name, as_version=4)
    for cell in nb.cells:
        if cell.cell_type == "code":
            assert cell.outputs == [] and cell.execution_count is None, f"{name}: outputs are not stripped"


@pytest.fixture(scope="module")
def saved_scan(tmp_path_factory):
    """A small real scan on disk for 03-reopen (HF/STO-3G, 4 points)."""
    import interkit as ik
    from interkit.model.demo import demo_catalog

    i, j = demo_catalog()["water_methanol"]["contact"]
    spec = ik.ScanSpec(dimer=ik.load_demo("water_methanol"), coordinate=ik.AtomPair(i, j),
                       factors=[0.9, 1.0, 1.2, 1.6], levels=["hf/sto-3g"])
    path = tmp_path_factory.mktemp("saved") / "saved-scan.nc"
    ik.save_scan(ik.run_scan(spec, executor="processes", progress=False), path)
    return path


@pytest.mark.parametrize("name", NAMES)
def test_notebook_executes(name, tmp_path, monkeypatch, saved_scan):
    assert Path(sys.executable).exists()
    work = tmp_path / "nb"
    work.mkdir()
    shutil.copy(NOTEBOOKS / name, work / name)
    monkeypatch.setenv("INTERKIT_SCAN", str(saved_scan))
    t0 = time.perf_counter()
    nb = _execute(work / name, work)
    seconds = time.perf_counter() - t0
    print(f"{name}: executed in {seconds:.1f} s")
    _no_errors(nb)
    text = _texts(nb)
    if name == "01-quickstart.ipynb":
        assert "calculations in" in text and _widget_views(nb) == 2    # explorer and launcher
    elif name == "02-levels.ipynb":
        assert text.count("lowest point") == 3 and _widget_views(nb) == 1
    elif name == "04-forces.ipynb":
        assert "analytic forces" in text and _widget_views(nb) == 1
        line = next(x for x in text.splitlines() if x.startswith("energy minimum at"))
        r_min, r_zero = (float(w) for w in line.replace("Å", "").replace(",", "").split() if w[0].isdigit())
        assert abs(r_min - r_zero) < 0.05    # the force vanishes at the minimum
    elif name == "05-decomposition.ipynb":
        assert text.count("SAPT0 decomposition (jun-cc-pvdz) at R =") == 2 and _widget_views(nb) == 1
        assert "water_methanol: largest attractive component: electrostatics" in text
        assert "methane_ethene: largest attractive component: dispersion" in text
    elif name == "06-dispersion.ipynb":
        assert text.count("calculations for 9 curves") == 2 and _widget_views(nb) == 1
        assert text.count("closest to the reference:") == 2
        # the dispersion-bound contact barely binds without a correction (common practice)
        line = next(x for x in text.splitlines() if x.startswith("methane_ethene: well depth B3LYP"))
        bare, corrected = [float(w) for w in line.replace(",", " ").split() if w.replace(".", "").isdigit()][:2]
        assert bare < 0.2 < corrected
    elif name == "07-share-and-scale.ipynb":
        import re

        lines = text.splitlines()
        # the Dask cluster and local processes agree within the stated tolerance
        line = next(x for x in lines if x.startswith("max |E_int(Dask) - E_int(processes)|"))
        worst, tol = (float(w) for w in re.findall(r"\d\.\d+e[-+]\d+", line))
        assert worst < tol and "all within tolerance: True" in text
        # 4 points x 2 levels x 3 counterpoise calculations + 2 x 2 own-basis monomers
        assert "Dask: 28 calculations on 2 workers" in text
        assert "store keys in the file: 28; calculations computed: 28" in text
        assert "verifying 2 of 4 points (seed 0)" in text and "verify: every variable within its tolerance" in text
        assert "cluster closed" in text
        report = next(x for x in lines if x.startswith("report "))
        assert int(re.search(r"(\d+) inline figures", report).group(1)) >= 1
        assert "0 scripts, 0 web addresses" in report
        assert "level,distance_angstrom,factor,variable,value,unit,status" in text
        assert "molecule: qcschema_molecule, 9 atoms" in text
        assert "28 calculations from the store, 0 computed" in text and "rerun: every variable within" in text
        pruned = next(x for x in lines if x.startswith("pruned to "))
        limit, removed, left, remaining = (int(n) for n in re.findall(r"(\d+) (?:bytes \(|entries|left|bytes$)",
                                                                      pruned))
        assert removed > 0 and left > 0 and remaining <= limit
    elif name == "08-studies.ipynb":
        # 3 systems x 2 levels x (3 points x 3 counterpoise calculations + 2 own-basis monomers)
        assert "66 calculations of 3 systems in one executor call: 66 computed, 0 from the store" in text
        assert "second run: 0 computed, 66 from the store" in text
        assert "reopened s22-study.nc: every node identical" in text
        assert "verify: every variable within its tolerance" in text and _widget_views(nb) == 1
        assert text.count("ranking against S22B") == 1 and "self-contained" in text
        # the dispersion correction brings the STO-3G B3LYP errors down for these dimers (practice:
        # uncorrected B3LYP underbinds)
        ranks = [x.split()[1] for x in text.splitlines() if x[:3] in ("1. ", "2. ", "3. ")]
        assert ranks.index("b3lyp-d3bj/sto-3g") < ranks.index("b3lyp/sto-3g")
        assert "row 4, column 'reference_energy'" in text
    elif name == "09-composite-reference.ipynb":
        _check_composite_notebook(text)
    elif name == "10-orientations.ipynb":
        import re

        lines = text.splitlines()
        assert "converged: True" in text and _widget_views(nb) == 0
        start, best = (float(v) for v in re.findall(r"(-?\d+\.\d+) kcal/mol at the", next(
            x for x in lines if x.startswith("E_int (counterpoise-corrected):"))))
        assert best < start     # the optimiser went downhill from the tabulated geometry
        low = next(x for x in lines if x.startswith("lowest grid point:"))
        r_grid = float(re.search(r"H···O = ([\d.]+) Å", low).group(1))
        r_opt = float(re.search(r"H···O = ([\d.]+) Å", next(x for x in lines if x.startswith("optimiser:"))).group(1))
        # a minimum in all six rigid-body coordinates is the minimum of every 2-D slice through
        # it (rigid-body mechanics, common practice): angle 0, the grid distance next to it (spacing 0.2 Å)
        assert "angle = 0°" in low and abs(r_grid - r_opt) < 0.1
        assert "verify: every variable within its tolerance" in text
        assert "level,angle_degree,distance_angstrom,point,variable,value,unit,status" in text
        assert "site-site fit X-X epsilon" in text and "site-site fit X-X sigma" in text
    else:
        assert "found saved scan" in text and "nothing to compute" in text
        assert "computed and saved" not in text and _widget_views(nb) == 1


def _check_composite_notebook(text: str) -> None:
    """09-composite-reference: the composite is built from its components and ranks 2 functionals
    x 3 schemes."""
    import re

    lines = text.splitlines()
    kinds = [x.split()[0] for x in lines if x.startswith("  ") and x.split()[:1] in (["requested"], ["component"],
                                                                                     ["composite"])]
    assert kinds.count("composite") == 1 and kinds.count("requested") == 2 and kinds.count("component") >= 3
    assert "ranked 6 curves against mp2/cc-pvdz~cc-pvtz + ccsd(t)/cc-pvdz" in text
    line = next(x for x in lines if x.startswith("composite reference: lowest point"))
    e_min, _, u_min = (float(w) for w in re.findall(r"-?\d+\.\d+", line))
    # recalled from memory: neutral hydrogen-bonded dimers bind by roughly 2-8 kcal/mol, and a
    # cc-pVDZ/cc-pVTZ extrapolation is uncertain by tenths of a kcal/mol, not by whole ones
    assert -8.0 < e_min < -1.5 and 0.0 < u_min < 1.0
    ranked = [x for x in lines if re.match(r"^\s*\d+\. \S+/def2-svp", x)]
    assert len(ranked) == 6
    # the uncertainty column holds one value for every row (all compared at the same points)
    assert len({x.split()[4] for x in ranked}) == 1
    assert "closest to the composite reference:" in text and "half-counterpoise" in text
