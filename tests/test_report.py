"""The static HTML report and the exports (tidy CSV, JSON with QCSchema molecules).

The report in a real browser is checked in tests/browser/test_report_offline.py.
"""

from __future__ import annotations

import base64
import csv
import html
import json
import re

import numpy as np
import pytest
from conftest import hf_dimer

import interkit as ik
from interkit.cli.main import main
from interkit.data.schema import CAUTION
from interkit.share import export, report
from interkit.units import ANGSTROM_TO_BOHR

HOSTILE = 'HF dimer <script>alert(1)</script> & "friends"'


@pytest.fixture(scope="module")
def scan(tmp_path_factory):
    """Two levels, forces and SAPT0 on a hydrogen-fluoride dimer built here (cheap bases)."""
    dimer = hf_dimer()
    spec = ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(1, 2), factors=[0.95, 1.0, 1.1, 1.3],
                       levels=["hf/sto-3g", "hf/def2-svp"], forces=True, decomposition="sapt0",
                       decomposition_basis="def2-svp", name=HOSTILE)
    ds = ik.run_scan(spec, executor="serial", progress=False)
    path = tmp_path_factory.mktemp("report") / "scan.nc"
    ik.save_scan(ds, path)
    return path


# ---------------------------------------------------------------------- report
def test_report_is_self_contained_and_escapes_labels(scan, tmp_path):
    out = tmp_path / "report.html"
    assert main(["report", str(scan), "-o", str(out)]) == 0
    text = out.read_text(encoding="utf-8")
    assert "<script" not in text.lower()                 # no scripts at all, the name included
    assert html.escape(HOSTILE, quote=True) in text
    assert not re.search(r"""(src|href)\s*=\s*["']?(https?:|//)""", text, re.I), "external resource"
    assert "@import" not in text and "url(" not in text
    images = re.findall(r'<img src="data:image/png;base64,([A-Za-z0-9+/=]+)"', text)
    assert len(images) >= 4                                # curves, forces, force split, SAPT0
    for data in images:
        assert base64.b64decode(data).startswith(b"\x89PNG\r\n\x1a\n")
    for heading in ("Interaction-energy curves", "Minimum and well depth", "Forces between the fragments",
                    "SAPT0 components", "Levels against a reference", "Provenance"):
        assert f"<h2>{heading}</h2>" in text
    ds = ik.open_scan(scan)
    assert CAUTION in text
    assert ds.attrs["pyscf_version"] in text and "CODATA 2018" in text
    # 2 levels x (4 points x 3 counterpoise calculations + 2 own-basis monomers)
    assert 'calculations with a store key</td><td class="text">28</td>' in text
    # the one rule (model.levels.default_reference): no wavefunction level, so the first curve
    assert "Reference: <b>HF/STO-3G</b>" in text


def test_report_numbers_come_from_the_dataset(scan):
    ds = ik.open_scan(scan)
    text = report.render_report(ds)
    for level in ("hf/sto-3g", "hf/def2-svp"):
        for v in ds["e_int"].sel(level=level).values:
            assert f"<td>{v:.3f}</td>" in text
    rows = ik.comparison.ranking_table(ds, reference_level="hf/sto-3g")
    assert f"<td>{rows[0]['rmse_kcal_per_mol']:.3f}</td>" in text


def test_reference_choice():
    import xarray as xr

    def levels(*names):
        values = np.full((len(names), 2), -1.0)
        return xr.Dataset({"e_int": (("level", "distance"), values, {"units": "kcal/mol"})},
                          coords={"level": list(names), "distance": [3.0, 3.5]})

    # the one rule of report, compare and widget (model.levels.default_reference): the most
    # accurate wavefunction method (CCSD(T), then MP2, then SCS-MP2), its first level; else the first curve
    assert report.choose_reference(levels("hf/def2-svp", "mp2/aug-cc-pvdz", "b3lyp-d3bj/def2-tzvp")) \
        == "mp2/aug-cc-pvdz"
    assert report.choose_reference(levels("ccsd(t)/cc-pvdz", "mp2/aug-cc-pvtz")) == "ccsd(t)/cc-pvdz"
    assert report.choose_reference(levels("mp2/cc-pvdz", "mp2/aug-cc-pvdz", "mp2/def2-svp")) == "mp2/cc-pvdz"
    assert report.choose_reference(levels("b3lyp/def2-svp", "hf/def2-svp")) == "b3lyp/def2-svp"
    assert report.choose_reference(levels("hf/sto-3g")) is None
    assert report.choose_reference(levels("hf/sto-3g", "hf/def2-svp"), "hf/sto-3g") == "hf/sto-3g"
    with pytest.raises(ik.InputError, match="--reference: 'mp2/x' is not a curve"):
        report.choose_reference(levels("hf/sto-3g", "hf/def2-svp"), "mp2/x")


# ---------------------------------------------------------------------- tidy CSV
def test_tidy_csv_has_one_row_per_value(scan, tmp_path):
    ds = ik.open_scan(scan)
    out = tmp_path / "scan.csv"
    assert main(["export", str(scan), "-o", str(out)]) == 0
    with open(out, newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert list(rows[0]) == ["level", "distance_angstrom", "factor", "variable", "value", "unit", "status"]
    names = export.tidy_variables(ds)
    assert {"e_int", "e_int_nocp", "bsse", "force_along", "e_elst", "e_sapt0"} <= set(names)
    assert "wall_time_s" not in names and "forces" not in names     # run data and per-atom arrays
    assert len(rows) == sum(ds[n].size for n in names)
    for row in rows:
        if row["variable"] == "e_int":
            expected = float(ds["e_int"].sel(level=row["level"]).sel(distance=float(row["distance_angstrom"]),
                                                                      method="nearest"))
            assert float(row["value"]) == pytest.approx(expected, abs=1e-8)
            assert row["unit"] == "kcal/mol" and row["status"] == "ok"
        if row["variable"] == "e_elst":
            assert row["level"] == "" and row["status"] == "ok"
        if row["variable"] == "force_along":
            assert row["unit"] == "kcal/mol/angstrom"


def test_tidy_csv_converts_energies_and_leaves_missing_values_empty(scan, tmp_path):
    ds = ik.open_scan(scan)
    ds["e_int"].values[0, 0] = np.nan
    header, rows = export.tidy_rows(ds, unit="kJ/mol")
    col = {name: k for k, name in enumerate(header)}
    e_int = [r for r in rows if r[col["variable"]] == "e_int"]
    assert e_int[0][col["value"]] == "" and e_int[0][col["unit"]] == "kJ/mol"
    assert float(e_int[1][col["value"]]) == pytest.approx(float(ds["e_int"].values[0, 1]) * 4.184, rel=1e-9)
    force = next(r for r in rows if r[col["variable"]] == "force_along" and r[col["value"]])
    # forces follow the energy unit (kJ/mol -> kJ/mol/angstrom); 1 kcal = 4.184 kJ exactly
    # (thermochemical calorie, by definition)
    assert force[col["unit"]] == "kJ/mol/angstrom"
    level, r = force[col["level"]], float(force[col["distance_angstrom"]])
    kcal = float(ds["force_along"].sel(level=level).sel(distance=r, method="nearest"))
    assert float(force[col["value"]]) == pytest.approx(kcal * 4.184, rel=1e-9)


# ---------------------------------------------------------------------- JSON
def test_json_export_is_standard_json_with_qcschema_molecules(scan, tmp_path):
    ds = ik.open_scan(scan)
    ds["e_int"].values[1, 2] = np.nan
    out = export.write_json(ds, tmp_path / "scan.json")
    text = open(out, encoding="utf-8").read()
    assert "NaN" not in text and "Infinity" not in text
    doc = json.loads(text)
    assert doc["schema_name"] == "interkit_scan_export" and doc["units"]["energy"] == "kcal/mol"
    assert doc["provenance"]["spec"]["name"] == HOSTILE
    e_int = doc["variables"]["e_int"]
    assert e_int["dims"] == ["level", "distance"] and e_int["values"][1][2] is None
    assert e_int["values"][0][1] == pytest.approx(float(ds["e_int"].values[0, 1]))
    assert len(doc["points"]) == ds.sizes["distance"]
    point = doc["points"][2]
    mol = point["molecule"]
    assert mol["schema_name"] == "qcschema_molecule" and mol["schema_version"] == 2
    assert mol["symbols"] == ["F", "H", "F", "H"]
    assert np.allclose(np.reshape(mol["geometry"], (4, 3)),
                       ds["coordinates"].values[2] * ANGSTROM_TO_BOHR, atol=1e-12)
    assert mol["fragments"] == [[0, 1], [2, 3]] and mol["real"] == [True] * 4
    assert mol["molecular_charge"] == 0 and mol["molecular_multiplicity"] == 1
    ghosts = point["counterpoise_molecules"]
    assert ghosts["a_dimer_basis"]["real"] == [True, True, False, False]
    assert ghosts["b_dimer_basis"]["real"] == [False, False, True, True]
    assert ghosts["a_dimer_basis"]["geometry"] == mol["geometry"]


def test_qcschema_molecule_charges_follow_the_real_atoms():
    sym = ["O", "H", "H", "Na"]
    xyz = [[0, 0, 0], [0.96, 0, 0], [-0.24, 0.93, 0], [0, 0, 2.3]]
    dimer = export.qcschema_molecule(sym, xyz, [0, 1, 2], (0, 1), (1, 1))
    assert dimer["molecular_charge"] == 1 and dimer["fragment_charges"] == [0, 1]
    ghost_b = export.qcschema_molecule(sym, xyz, [0, 1, 2], (0, 1), (1, 1), real=[True] * 3 + [False])
    assert ghost_b["molecular_charge"] == 0 and ghost_b["fragment_charges"] == [0, 0]
    radical = export.qcschema_molecule(["O", "H", "N", "H", "H", "H"], np.zeros((6, 3)), [0, 1], (0, 0), (2, 1))
    assert radical["molecular_multiplicity"] == 2 and radical["fragment_multiplicities"] == [2, 1]
    only_b = export.qcschema_molecule(["O", "H", "N", "H", "H", "H"], np.zeros((6, 3)), [0, 1], (0, 0), (2, 1),
                                      real=[False, False] + [True] * 4)
    assert only_b["molecular_multiplicity"] == 1 and only_b["fragment_multiplicities"] == [1, 1]


def test_export_format_follows_suffix_or_option(scan, tmp_path):
    assert main(["export", str(scan), "-o", str(tmp_path / "x.dat"), "--format", "json"]) == 0
    assert json.loads((tmp_path / "x.dat").read_text())["schema_name"] == "interkit_scan_export"
