"""SAPT0 decomposition along scans: spec, plan, executor dispatch, store, Dataset,
files, plots, widgets and command line.

The SAPT0 terms themselves are tested in tests/test_sapt0.py; here the scan must carry
exactly the numbers of :func:`interkit.engine.sapt0.sapt0_terms`.
"""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap

import numpy as np
import pytest
from conftest import s22_dimer
from pyscf import lib

import interkit as ik
from interkit.data.sapt0 import COMPONENTS, TERM_VARIABLES, decomposition_report
from interkit.engine.sapt0 import sapt0_terms
from interkit.model.job import DECOMPOSITION_CONV_TOL_HARTREE
from interkit.run.feasibility import decomposition_cost
from interkit.run.plan import plan_scan
from interkit.units import HARTREE_TO_KCAL_PER_MOL

lib.num_threads(1)

#: S22B CCSD(T)/CBS interaction energy of the water dimer, kcal/mol: Marshall, Burns,
#: Sherrill, J. Chem. Phys. 135, 194102 (2011)
S22B_WATER_KCAL = -4.989
#: SAPT0/jun-cc-pVDZ reproduces S22-type hydrogen bonds to about 0.5 kcal/mol: recalled
#: from Parker et al., J. Chem. Phys. 140, 094106 (2014) (memory, hence the loose bound)
SAPT0_JUN_DZ_TOLERANCE_KCAL = 0.5
FACTORS = (0.95, 1.0, 1.25)


@pytest.fixture(scope="module")
def water_spec():
    return ik.ScanSpec(dimer=s22_dimer("Water_dimer"), coordinate=ik.CentreOfMass(), factors=FACTORS,
                       levels=["hf/sto-3g"], decomposition="sapt0", name="water dimer SAPT0")


@pytest.fixture(scope="module")
def store(tmp_path_factory):
    return tmp_path_factory.mktemp("sapt-store")


@pytest.fixture(scope="module")
def water_scan(water_spec, store):
    return ik.run_scan(water_spec, executor="processes", workers=2, cache=store, progress=False)


@pytest.fixture(scope="module")
def direct_terms(water_spec):
    """sapt0_terms called directly on each point's geometry (same SCF threshold)."""
    return [sapt0_terms(p.dimer, "jun-cc-pvdz", conv_tol=DECOMPOSITION_CONV_TOL_HARTREE, scaled=True)
            for p in water_spec.points]


# --------------------------------------------------------------------------- spec and plan
def test_spec_fields_round_trip(water_spec):
    assert water_spec.decomposition == "sapt0"
    assert water_spec.decomposition_basis == "jun-cc-pvdz"
    assert water_spec.sapt_memory_limit_mb == 8000.0
    assert decomposition_cost(water_spec)["nbasis"] == 56
    again = ik.ScanSpec.from_json(water_spec.to_json())
    assert again.to_dict() == water_spec.to_dict()
    plain = ik.ScanSpec(dimer=water_spec.dimer, factors=[1.0], decomposition="none")
    assert plain.decomposition is None and decomposition_cost(plain) is None


def test_plan_has_one_sapt0_job_per_point_with_the_fragment_split(water_spec):
    plan = plan_scan(water_spec)
    assert sorted(plan.decomposition) == [0, 1, 2]
    d0 = water_spec.dimer
    for pi, key in plan.decomposition.items():
        job = plan.jobs[key]
        desc = job.describe()
        assert job.outputs == ("sapt0",) and not any(job.ghost)
        assert desc["fragment_a"] == list(d0.fragment_a) and desc["fragment_charges"] == [0, 0]
        assert desc["level"]["method"] == "hf" and desc["level"]["basis"] == "jun-cc-pvdz"
        np.testing.assert_allclose(job.coordinates, water_spec.points[pi].dimer.coordinates, atol=1e-9)
    # counterpoise jobs keep their description (store keys of existing caches stay valid)
    energy_jobs = [j for j in plan.jobs.values() if j.outputs != ("sapt0",)]
    assert energy_jobs and all("fragment_a" not in j.describe() for j in energy_jobs)
    # the split and the charges are part of the key; the memory limit is not
    import dataclasses

    job = plan.jobs[plan.decomposition[1]]
    other_split = dataclasses.replace(job, fragment_a=(0, 1), key="")
    assert other_split.key != job.key
    assert dataclasses.replace(job, memory_limit_mb=1.0, key="").key == job.key
    # every SAPT0 job is in exactly one chunk, with its own role
    tasks = [t for chunk in plan.chunks(2) for t in chunk]
    assert sorted(k for r, k in tasks if r == "sapt0") == sorted(plan.decomposition.values())


def test_open_shell_fragment_is_refused_at_spec_time():
    dimer = ik.load_demo("hydroxyl_water")
    with pytest.raises(ik.NotAvailableError, match=r"^decomposition: fragment A has multiplicity 2; "):
        ik.ScanSpec(dimer=dimer, coordinate=ik.CentreOfMass(), factors=[1.0], decomposition="sapt0")


def test_memory_limit_is_refused_before_running(water_spec, monkeypatch):
    # building the spec is cheap; the estimate runs when the plan is made, before any job
    spec = ik.ScanSpec(dimer=water_spec.dimer, factors=[1.0], decomposition="sapt0", sapt_memory_limit_mb=1)
    import interkit.run.executors as executors

    monkeypatch.setattr(executors, "run_chunk", lambda *a, **k: pytest.fail("a calculation ran"))
    with pytest.raises(ik.ResourceError) as info:
        ik.run_scan(spec, executor="serial", progress=False)
    text = str(info.value)
    assert "\n" not in text and text.startswith("sapt_memory_limit_mb: ") and "above the limit of 1 MB" in text


# --------------------------------------------------------------------------- the scan
def test_dataset_terms_equal_direct_sapt0(water_scan, direct_terms):
    ds = water_scan
    assert list(ds["sapt_status"].values) == ["ok"] * 3
    for name, (key, _) in TERM_VARIABLES.items():
        assert ds[name].dims == ("distance",) and ds[name].attrs["units"] == "kcal/mol"
        expected = [t[key] * HARTREE_TO_KCAL_PER_MOL for t in direct_terms]
        np.testing.assert_allclose(ds[name].values, expected, rtol=0, atol=1e-8, err_msg=name)
    np.testing.assert_allclose(ds["e_ssapt0"].values,
                               [t["total_ssapt0"] * HARTREE_TO_KCAL_PER_MOL for t in direct_terms],
                               rtol=0, atol=1e-8)


def test_grouped_components_are_the_sums_of_the_terms(water_scan):
    ds = water_scan
    np.testing.assert_allclose(ds["e_elst"], ds["sapt_e10_elst"], atol=1e-12)
    np.testing.assert_allclose(ds["e_exch"], ds["sapt_e10_exch"], atol=1e-12)
    np.testing.assert_allclose(ds["e_ind"], ds["sapt_e20_ind_resp"] + ds["sapt_e20_exind_resp"] + ds["sapt_delta_hf"], atol=1e-10)
    np.testing.assert_allclose(ds["e_disp"], ds["sapt_e20_disp"] + ds["sapt_e20_exdisp"], atol=1e-10)
    np.testing.assert_allclose(ds["e_sapt0"], sum(ds[n] for n in COMPONENTS), atol=1e-10)
    np.testing.assert_allclose(ds["sapt_e20_ind_resp"], ds["sapt_e20_ind_resp_a"] + ds["sapt_e20_ind_resp_b"], atol=1e-10)
    # δHF closes the HF interaction energy (bookkeeping identity of the definition)
    first_second = ds["sapt_e10_elst"] + ds["sapt_e10_exch"] + ds["sapt_e20_ind_resp"] + ds["sapt_e20_exind_resp"]
    np.testing.assert_allclose(first_second + ds["sapt_delta_hf"], ds["sapt_e_int_hf"], atol=1e-10)


def test_physics_along_the_scan(water_scan):
    ds = water_scan
    eq = int(np.argmin(np.abs(ds["factor"].values - 1.0)))
    e_eq = float(ds["e_sapt0"].values[eq])
    assert abs(e_eq - S22B_WATER_KCAL) < SAPT0_JUN_DZ_TOLERANCE_KCAL, e_eq
    # hydrogen bond: electrostatics outweigh induction; exchange repulsive; all decay outwards
    assert np.all(np.abs(ds["e_elst"].values) > np.abs(ds["e_ind"].values))
    assert np.all(ds["e_exch"].values > 0) and np.all(ds["e_disp"].values < 0)
    assert np.all(np.diff(ds["e_exch"].values) < 0)
    assert np.all(np.diff(np.abs(ds["e_disp"].values)) < 0)
    # the components do not change the level's own curve
    assert list(ds["status"].values.ravel()) == ["ok"] * 3


def test_attrs_name_the_bases(water_scan):
    a = water_scan.attrs
    assert a["decomposition_basis"] == "jun-cc-pvdz"
    assert "O: aug-cc-pvdz-jkfit" in a["decomposition_jk_fitting_basis"]
    assert "H: cc-pvdz-ri" in a["decomposition_ri_fitting_basis"]


def test_rerun_from_store_computes_nothing(water_spec, water_scan, store):
    again = ik.run_scan(water_spec, executor="serial", cache=store, progress=False)
    assert again.attrs["calculations_computed"] == 0
    for name in list(TERM_VARIABLES) + ["e_sapt0", "e_ssapt0"]:
        np.testing.assert_array_equal(again[name].values, water_scan[name].values)


def test_save_open_round_trip_is_exact(water_scan, tmp_path):
    path = tmp_path / "sapt.nc"
    ik.save_scan(water_scan, path)
    back = ik.open_scan(path)
    for name in list(TERM_VARIABLES) + list(COMPONENTS) + ["e_sapt0", "e_ssapt0", "sapt_status"]:
        np.testing.assert_array_equal(back[name].values, water_scan[name].values)
        assert back[name].attrs == water_scan[name].attrs
    assert back.attrs["decomposition_ri_fitting_basis"] == water_scan.attrs["decomposition_ri_fitting_basis"]


def test_file_of_schema_1_is_converted_on_reading(water_scan, tmp_path):
    # a file as interkit wrote it before the SAPT0 terms were renamed (schema 1)
    from interkit.data.upgrade import SAPT_RENAMES_1_TO_2

    old = water_scan.rename({new: old for old, new in SAPT_RENAMES_1_TO_2.items()})
    old.attrs["schema"] = "interkit-scan/1"
    old.to_netcdf(tmp_path / "old.nc", engine="h5netcdf")
    with pytest.warns(ik.InterkitWarning, match="converted from schema interkit-scan/1 to interkit-scan/2"):
        back = ik.open_scan(tmp_path / "old.nc")
    assert back.attrs["converted_from_schema"] == "interkit-scan/1"
    for name in TERM_VARIABLES:
        np.testing.assert_array_equal(back[name].values, water_scan[name].values)
    assert not any(old_name in back.variables for old_name in SAPT_RENAMES_1_TO_2)



def test_schema_1_spec_threshold_and_label_notes_are_renamed(tmp_path):
    # schema 1 named the SCF threshold `conv_tol` and marked unfitted SCFs `(no-ri)`
    import json

    from interkit.data.upgrade import upgrade

    spec = ik.ScanSpec(dimer=s22_dimer("Water_dimer"), factors=[1.0], levels=["hf/sto-3g (exact scf)"])
    ds = ik.run_scan(spec, executor="serial", progress=False)
    old = ds.assign_coords(level=["hf/sto-3g (no-ri)"])
    data = json.loads(old.attrs["spec_json"])
    data["conv_tol"] = data.pop("scf_threshold_hartree")
    old.attrs.update(spec_json=json.dumps(data), schema="interkit-scan/1")
    new, note = upgrade(old, "interkit-scan/2")
    assert note == "converted from schema interkit-scan/1 to interkit-scan/2"
    assert list(new["level"].values) == ["hf/sto-3g (exact scf)"]
    assert ik.spec_of(new).scf_threshold_hartree == spec.scf_threshold_hartree
    ik.validate(new)


def test_validate_with_and_without_the_decomposition(water_scan):
    ik.validate(water_scan)
    names = [n for n in water_scan.data_vars if n.startswith("sapt_") or n in COMPONENTS
             or n in ("e_sapt0", "e_ssapt0")]
    ik.validate(water_scan.drop_vars(names))
    bad = water_scan.copy()
    bad["e_elst"] = bad["e_elst"].assign_attrs(units="kJ/mol")
    with pytest.raises(ik.InputError, match="e_elst: units 'kJ/mol'"):
        ik.validate(bad)


def test_failed_sapt0_point_is_nan_with_its_reason(water_spec, tmp_path, monkeypatch):
    """A point whose SAPT0 fails is NaN with the reason; the other points and the
    level's curve complete, and the failure is not cached."""
    import interkit.engine.decomposition as engine_decomposition

    real = engine_decomposition.sapt0_terms
    shortest = min(p.distance for p in water_spec.points)

    def flaky(dimer, *args, **kwargs):
        r = np.linalg.norm(dimer.centre_of_mass("B") - dimer.centre_of_mass("A"))
        if abs(r - shortest) < 1e-6:
            raise ik.ConvergenceError("sapt0: CPHF residual 1.0e-03 after 100 iterations, above the tolerance")
        return real(dimer, *args, **kwargs)

    monkeypatch.setattr(engine_decomposition, "sapt0_terms", flaky)
    ds = ik.run_scan(water_spec, executor="serial", cache=tmp_path / "store", progress=False)
    assert list(ds["sapt_status"].values) == ["failed", "ok", "ok"]
    assert "ConvergenceError" in str(ds["sapt_status_detail"].values[0])
    assert "CPHF residual" in str(ds["sapt_status_detail"].values[0])
    assert np.isnan(ds["e_sapt0"].values[0]) and np.all(np.isfinite(ds["e_sapt0"].values[1:]))
    assert list(ds["status"].values.ravel()) == ["ok"] * 3
    assert any("without a decomposition" in line for line in decomposition_report(ds))
    monkeypatch.setattr(engine_decomposition, "sapt0_terms", real)
    again = ik.run_scan(water_spec, executor="serial", cache=tmp_path / "store", progress=False)
    assert again.attrs["calculations_computed"] == 1 and list(again["sapt_status"].values) == ["ok"] * 3


# --------------------------------------------------------------------------- views
def test_plot_components(water_scan):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from interkit.plot.components import COMPONENT_COLOURS, plot_components

    ax = plot_components(water_scan, unit="kJ/mol", level="hf/sto-3g")
    lines = {ln.get_label(): ln for ln in ax.get_lines()}
    assert {"electrostatics", "exchange", "induction", "dispersion", "SAPT0 total", "HF/STO-3G (CP)"} <= set(lines)
    np.testing.assert_allclose(lines["exchange"].get_ydata(), water_scan["e_exch"].values * 4.184, rtol=1e-12)
    assert lines["dispersion"].get_color() == COMPONENT_COLOURS["e_disp"]
    assert "kJ mol⁻¹" in ax.get_ylabel()   # trade spelling of the unit on the axis
    plt.close(ax.figure)
    with pytest.raises(ik.InputError, match="no SAPT0 components"):
        plot_components(water_scan.drop_vars(["e_elst"]))


def test_explorer_shows_stacked_component_bars(water_scan):
    from interkit import widgets as W

    ex = W.ScanExplorer(water_scan)
    assert ex.components.children == (ex._component_image,)
    first = ex._component_image.value
    assert first[:4] == b"\x89PNG"
    ex.index = 2
    assert ex._component_image.value != first
    ex.unit = "eV"
    assert ex._component_image.value[:4] == b"\x89PNG"


def test_cli_scan_and_show_with_decomposition(tmp_path):
    (tmp_path / "spec.toml").write_text(textwrap.dedent("""\
        name = "water-methanol SAPT0"
        [system]
        demo = "water_methanol"
        [scan]
        coordinate = "atom-pair"
        atoms = [1, 3]
        factors = [1.0, 1.3]
        [calculation]
        levels = ["hf/sto-3g"]
        decomposition = "sapt0"
        decomposition_basis = "cc-pvdz"
        sapt_memory_limit_mb = 2000
        """))
    env = dict(os.environ, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1")
    out = subprocess.run([sys.executable, "-m", "interkit.cli", "scan", str(tmp_path / "spec.toml"), "-o",
                          str(tmp_path / "scan.nc"), "--cache", str(tmp_path / "store"), "--quiet",
                          "--workers", "2"], capture_output=True, text=True, env=env, timeout=300)
    assert out.returncode == 0, out.stderr
    assert "SAPT0 decomposition (cc-pvdz) at R =" in out.stdout
    show = subprocess.run([sys.executable, "-m", "interkit.cli", "show", str(tmp_path / "scan.nc")],
                          capture_output=True, text=True, env=env, timeout=120)
    assert show.returncode == 0, show.stderr
    lines = show.stdout.splitlines()
    head = next(i for i, line in enumerate(lines) if line.startswith("SAPT0 decomposition (cc-pvdz) at R ="))
    ds = ik.open_scan(tmp_path / "scan.nc")
    i = int(np.nanargmin(ds["e_sapt0"].values))
    assert f"R = {float(ds['distance'][i]):.3f} Å" in lines[head]
    rows = {}
    for line in lines[head + 1:head + 6]:
        words = line.split()
        for name in ("electrostatics", "exchange", "induction", "dispersion", "SAPT0"):
            if name in words:
                rows[name] = float(words[words.index(name) + 1])
    assert rows["electrostatics"] == pytest.approx(float(ds["e_elst"][i]), abs=1e-3)
    assert rows["dispersion"] == pytest.approx(float(ds["e_disp"][i]), abs=1e-3)
    assert rows["exchange"] == pytest.approx(float(ds["e_exch"][i]), abs=1e-3)
    assert rows["SAPT0"] == pytest.approx(float(ds["e_sapt0"][i]), abs=1e-3)
    # attractive components come first, largest first
    attractive = [n for n in ("electrostatics", "induction", "dispersion") if rows[n] < 0]
    order = [n for n in rows if n in attractive]
    assert order == sorted(attractive, key=lambda n: rows[n])
    assert ds.attrs["decomposition_basis"] == "cc-pvdz"
    assert "cc-pvdz-jkfit" in ds.attrs["decomposition_jk_fitting_basis"]


@pytest.mark.parametrize("module", ["engine/decomposition.py", "engine/sapt0.py",
                                    "engine/sapt0_scf.py", "engine/sapt0_setup.py"])
def test_decomposition_engine_keeps_the_core_layer_contract(module):
    """The SAPT0 engine modules are compute core: same contract as the other engine files."""
    from test_units_and_layers import test_compute_core_layer_contract

    test_compute_core_layer_contract(module)


def test_csv_export_carries_the_components(water_scan, tmp_path):
    import csv

    from interkit.widgets.exports import write_csv

    path = write_csv(water_scan, tmp_path / "components.csv", unit="kJ/mol")
    with open(path, newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == water_scan.sizes["level"] * water_scan.sizes["distance"]
    expected = float(water_scan["e_elst"].values[1]) * 4.184  # kcal -> kJ (thermochemical calorie)
    assert float(rows[1]["e_elst_kj_per_mol"]) == pytest.approx(expected, rel=1e-7)
