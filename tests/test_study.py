"""Studies: many dimers through one plan, one executor, one store; statistics over them.

Geometries: the S22 set as shipped in ``ase.data.s22`` (Jurečka, Šponer, Černý, Hobza,
PCCP 8, 1985 (2006)); reference energies S22B (Marshall, Burns, Sherrill, JCP 135,
194102 (2011)).
"""

from __future__ import annotations

import math
import threading

import numpy as np
import pytest
import xarray as xr
from conftest import require

import interkit as ik
from interkit.data.study_tree import build_study_tree, open_study, save_study, system_datasets
from interkit.errors import InputError

THREE = ["Water_dimer", "Ammonia_dimer", "Methane_dimer"]


@pytest.fixture(scope="module")
def three_study():
    return ik.s22_study(levels=["hf/sto-3g"], systems=THREE)


@pytest.fixture(scope="module")
def three_tree(three_study):
    return ik.run_study(three_study, executor="processes", workers=2, progress=False)


# ---------------------------------------------------------------------- statistics
def _synthetic():
    """Three systems, two categories, two methods, hand-chosen errors (no calculation)."""
    dimer = ik.load_demo("water_methanol")
    refs = {"A": {0.9: -3.0, 1.0: -5.0, 1.2: -2.0}, "B": {1.0: -1.0}, "C": {1.0: -10.0, 1.5: -0.05}}
    cats = {"A": "hb", "B": "disp", "C": "hb"}
    err_m1 = {"A": [1.0, -1.0, 0.5], "B": [-0.5], "C": [2.0, 0.1]}
    systems = [ik.StudySystem(n, dimer, factors=sorted(r), category=cats[n],
                              reference=[ik.ReferenceValue(e, factor=f) for f, e in r.items()])
               for n, r in refs.items()]
    study = ik.Study("synthetic", systems, levels=["hf/sto-3g", "b3lyp/sto-3g"])
    datasets = {}
    for name, spec in zip(study.names, study.specs):
        ref = np.array([refs[name][p.factor] for p in spec.points])
        e = np.vstack([ref + np.array(err_m1[name]), ref + 0.2])
        datasets[name] = xr.Dataset(
            {"e_int": (("level", "distance"), e, {"units": "kcal/mol"}),
             "status": (("level", "distance"), np.full(e.shape, "ok"))},
            coords={"level": ["hf/sto-3g", "b3lyp/sto-3g"], "distance": [p.distance for p in spec.points],
                    "factor": ("distance", [p.factor for p in spec.points])})
    return build_study_tree(study, datasets)


def test_statistics_of_a_synthetic_collection_equal_hand_computed_values():
    tree = _synthetic()
    stats = ik.study_statistics(tree)     # stored references, every point
    m1 = stats[(stats["curve"] == "hf/sto-3g") & (stats["category"] == "all")].iloc[0]
    # hand computed from the errors 1, -1, 0.5, -0.5, 2, 0.1 (kcal/mol)
    assert m1["n_points"] == 6 and m1["n_systems"] == 3
    assert m1["mae_kcal_per_mol"] == pytest.approx(5.1 / 6, abs=1e-12)
    assert m1["mean_signed_error_kcal_per_mol"] == pytest.approx(2.1 / 6, abs=1e-12)
    assert m1["rmse_kcal_per_mol"] == pytest.approx(math.sqrt(6.51 / 6), abs=1e-12)
    assert m1["max_abs_error_kcal_per_mol"] == pytest.approx(2.0) and m1["max_error_system"] == "C"
    # relative errors where |reference| >= 0.1 kcal/mol: 1/3, 1/5, 0.5/2, 0.5/1, 2/10 (the -0.05 point is left out)
    assert m1["n_relative"] == 5
    assert m1["mean_abs_relative_error_percent"] == pytest.approx(100 * (1 / 3 + 0.2 + 0.25 + 0.5 + 0.2) / 5)
    hb = stats[(stats["curve"] == "hf/sto-3g") & (stats["category"] == "hb")].iloc[0]
    assert hb["mae_kcal_per_mol"] == pytest.approx(4.6 / 5) and hb["n_systems"] == 2
    # near the minimum: reference <= half its system's lowest value: errors 1, -1 (A), -0.5 (B), 2 (C)
    near = ik.study_statistics(tree, region="minimum", by_category=False)
    assert near[near["curve"] == "hf/sto-3g"]["mae_kcal_per_mol"].item() == pytest.approx(4.5 / 4)
    # at the equilibrium points (factor 1): errors -1, -0.5, 2
    eq = ik.study_statistics(tree, points="equilibrium", by_category=False)
    row = eq[eq["curve"] == "hf/sto-3g"].iloc[0]
    assert row["mae_kcal_per_mol"] == pytest.approx(3.5 / 3)
    assert row["mean_signed_error_kcal_per_mol"] == pytest.approx(0.5 / 3)
    # ranking: the constant +0.2 error beats the other one
    ranking = ik.rank_methods(tree)
    assert list(ranking["curve"]) == ["b3lyp/sto-3g", "hf/sto-3g"] and list(ranking["rank"]) == [1, 2]
    assert ranking["mae_kcal_per_mol"].iloc[0] == pytest.approx(0.2)
    # a level of the study as reference: hf - b3lyp errors are err_m1 - 0.2 at every point
    against = ik.study_statistics(tree, reference="b3lyp/sto-3g", by_category=False)
    assert against["mean_signed_error_kcal_per_mol"].item() == pytest.approx(2.1 / 6 - 0.2)


def test_statistics_refuse_an_unknown_reference():
    with pytest.raises(InputError, match="reference: 'nonsense'"):
        ik.study_statistics(_synthetic(), reference="nonsense")


# ---------------------------------------------------------------------- running
def test_study_of_three_s22_dimers_equals_three_separate_scans(three_study, three_tree):
    for spec in three_study.specs:
        ds = ik.run_scan(spec, executor="processes", workers=2, progress=False)
        node = three_tree[spec.name].to_dataset(inherit=False)
        # same calculations, same keys: identical to 1e-10 hartree (the bound)
        assert np.nanmax(np.abs(node["e_total_hartree"].values - ds["e_total_hartree"].values)) < 1e-10
        np.testing.assert_array_equal(node["job_key"].values, ds["job_key"].values)
        assert (node["status"] == "ok").all()


def test_one_executor_call_and_one_progress_count(three_study, monkeypatch):
    import interkit.run.scan as run_study_module  # run_study hands its chunks to scan.execute_chunks

    calls = []
    original = run_study_module.run_serial

    def counting(chunks, jobs, *args, **kwargs):
        calls.append(sum(len(c) for c in chunks))
        return original(chunks, jobs, *args, **kwargs)

    monkeypatch.setattr(run_study_module, "run_serial", counting)
    seen = []
    tree = ik.run_study(three_study, executor="serial", progress=lambda done, total, k, r: seen.append((done, total)))
    # 3 systems x (dimer + 2 ghosted monomers + 2 own-basis monomers), one call, one count
    assert calls == [15] and seen[-1] == (15, 15) and tree.attrs["calculations_computed"] == 15


def test_killed_study_resumes_and_computes_only_what_is_missing(three_study, tmp_path):
    cancel = threading.Event()

    def stop_after_four(done, total, key, record):
        if done >= 4:
            cancel.set()

    first = ik.run_study(three_study, executor="serial", cache=tmp_path, progress=stop_after_four, cancel=cancel)
    assert first.attrs["calculations_computed"] == 15  # asked for; only 4 finished
    n_cancelled = sum(int((n["status"] == "failed").sum()) for n in first.children.values())
    assert n_cancelled >= 2   # at least two systems lack results
    second = ik.run_study(three_study, executor="serial", cache=tmp_path, progress=False)
    assert second.attrs["calculations_from_store"] == 4
    assert second.attrs["calculations_computed"] == 11
    assert all((n["status"] == "ok").all() for n in second.children.values())


def test_a_failing_point_never_stops_the_other_systems(three_study, monkeypatch):
    import interkit.engine.energy as energy

    original = energy.run_energy_job

    def failing(job, guess=None):   # the water dimer's dimer-basis calculation crashes its worker
        if job.symbols == ("O", "H", "H", "O", "H", "H") and not any(job.ghost):
            raise RuntimeError("simulated crash")
        return original(job, guess)

    monkeypatch.setattr(energy, "run_energy_job", failing)   # forked workers inherit the patch
    tree = ik.run_study(three_study, executor="processes", workers=2, progress=False)
    water = tree["Water_dimer"]
    assert (water["status"] == "failed").all() and np.isnan(water["e_int"].values).all()
    assert "simulated crash" in str(water["status_detail"].values)
    for name in ("Ammonia_dimer", "Methane_dimer"):
        assert (tree[name]["status"] == "ok").all() and np.isfinite(tree[name]["e_int"].values).all()


def test_datatree_round_trips_through_netcdf_exactly(three_tree, tmp_path):
    path = tmp_path / "study.nc"
    save_study(three_tree, path)
    back = open_study(path)
    xr.testing.assert_identical(back.to_dataset(inherit=False), three_tree.to_dataset(inherit=False))
    assert back.attrs == three_tree.attrs
    for name, ds in system_datasets(three_tree).items():
        xr.testing.assert_identical(back[name].to_dataset(inherit=False), ds)
        assert back[name].attrs == ds.attrs
    # each node is today's scan Dataset: it validates and its spec rebuilds
    for ds in system_datasets(back).values():
        ik.validate(ds)
        assert ik.spec_of(ds).name == ds.attrs["title"].split(": ")[-1]


def test_s22_references_are_stored_with_the_study(three_tree):
    # S22B (Marshall et al. 2011), kcal/mol, as listed in the project's reference table
    refs = dict(zip(three_tree["reference_system"].values, three_tree["reference_e_int"].values))
    assert refs == {"Water_dimer": -4.989, "Ammonia_dimer": -3.133, "Methane_dimer": -0.527}
    assert list(three_tree["category"].values) == ["hydrogen bond", "hydrogen bond", "dispersion"]


# ---------------------------------------------------------------------- inputs
def _write_xyz(folder, name, frames):
    from interkit.model.s22 import s22_dimer

    d = s22_dimer(name)
    text = "".join(d.translated_b(np.array([0.0, 0.0, dz])).to_xyz_string(f"frame {k}")
                   for k, dz in enumerate(frames))
    (folder / f"{name}.xyz").write_text(text)
    return d


def test_folder_with_xyz_files_and_a_csv_of_references(tmp_path):
    _write_xyz(tmp_path, "Water_dimer", [0.0])
    _write_xyz(tmp_path, "Methane_dimer", [0.0, 0.5, 1.0])   # a curve of three frames
    (tmp_path / "references.csv").write_text(
        "system,factor,reference_energy,unit,category\n"
        "Water_dimer,1.0,-4.989,kcal/mol,hydrogen bond\n"
        "Water_dimer,1.2,-16.0,kJ/mol,hydrogen bond\n"
        "Methane_dimer,1.0,-0.527,kcal/mol,dispersion\n")
    study = ik.read_study_folder(tmp_path, levels=["hf/sto-3g"])
    assert study.names == ("Methane_dimer", "Water_dimer")
    assert len(study.spec("Methane_dimer").points) == 3 and len(study.spec("Water_dimer").points) == 2
    table = {(s, p): e for s, p, e, _ in study.reference_table()}
    # 16 kJ/mol / 4.184 kJ/kcal (thermochemical calorie)
    assert table[("Water_dimer", 1)] == pytest.approx(-16.0 / 4.184, abs=1e-9)
    assert study.categories == {"Methane_dimer": "dispersion", "Water_dimer": "hydrogen bond"}


@pytest.mark.parametrize("row, column", [
    ("Water_dimer,1.0,abc,kcal/mol,hb", "reference_energy"),
    ("Water_dimer,1.0,-5.0,kcal,hb", "unit"),
    ("Benzene,1.0,-5.0,kcal/mol,hb", "system"),
    ("Water_dimer,-1.0,-5.0,kcal/mol,hb", "factor"),
])
def test_a_bad_csv_row_gets_one_line_naming_file_row_and_column(tmp_path, row, column):
    _write_xyz(tmp_path, "Water_dimer", [0.0])
    csv = tmp_path / "refs.csv"
    csv.write_text("system,factor,reference_energy,unit,category\nWater_dimer,1.2,-4.0,kcal/mol,hb\n" + row + "\n")
    with pytest.raises(InputError) as info:
        ik.read_study_folder(tmp_path, levels=["hf/sto-3g"])
    text = str(info.value)
    assert "\n" not in text and str(csv) in text and "row 3" in text and f"column {column!r}" in text


def test_study_toml_with_relative_paths(tmp_path):
    _write_xyz(tmp_path, "Water_dimer", [0.0])
    (tmp_path / "sub").mkdir()
    (tmp_path / "sub" / "study.toml").write_text(
        'name = "toml-study"\n[calculation]\nlevels = ["hf/sto-3g"]\n'
        '[[systems]]\nname = "w"\ncategory = "hb"\ngeometry = "../Water_dimer.xyz"\nfragment_a = [0, 1, 2]\n'
        'coordinate = "atom-pair"\natoms = [0, 3]\nfactors = [1.0, 1.1]\nreference_kcal_per_mol = [-5.0, -4.5]\n')
    study = ik.load_study_toml(tmp_path / "sub" / "study.toml")
    assert study.names == ("w",) and len(study.specs[0].points) == 2
    assert [e for _, _, e, _ in study.reference_table()] == [-5.0, -4.5]
    (tmp_path / "bad.toml").write_text('name = "x"\n[calculation]\nlevels = ["hf/sto-3g"]\n'
                                       '[[systems]]\nname = "w"\ngeometry = "Water_dimer.xyz"\nfactors = [1.0]\n'
                                       'colour = "red"\n')
    with pytest.raises(InputError, match=r"systems\[0\]\.'colour'"):
        ik.load_study_toml(tmp_path / "bad.toml")


def test_study_refuses_systems_that_do_not_share_levels():
    a = ik.ScanSpec(dimer=ik.load_demo("water_methanol"), factors=[1.0], levels=["hf/sto-3g"], name="a")
    b = ik.ScanSpec(dimer=ik.load_demo("water_methanol"), factors=[1.0], levels=["hf/def2-svp"], name="b")
    with pytest.raises(InputError, match=r"specs\[1\] 'b': levels"):
        ik.Study.from_specs("mixed", [a, b])


# ---------------------------------------------------------------------- views
def test_report_widget_and_cli_on_a_saved_study(three_tree, tmp_path, capsys):
    from interkit.cli.main import main
    from interkit.widgets.explorer import ScanExplorer
    from interkit.widgets.study import StudyExplorer

    path = tmp_path / "study.nc"
    save_study(three_tree, path)
    html = (tmp_path / "r.html")
    ik.write_study_report(path, html)
    text = html.read_text()
    assert "Methods compared over the study" in text and "<script" not in text and text.count("<img") == 3
    explorer = StudyExplorer(path)
    explorer.system_buttons["Methane_dimer"].click()
    assert explorer.opened == "Methane_dimer" and isinstance(explorer.detail.children[1], ScanExplorer)
    assert main(["study", "rank", str(path), "--points", "equilibrium"]) == 0
    out = capsys.readouterr().out
    assert "ranking against the stored reference values" in out and "hf/sto-3g" in out
    assert main(["study", "rank", str(path), "--reference", "mp2/sto-3g"]) == 2
    assert "reference: 'mp2/sto-3g'" in capsys.readouterr().err


def test_rerun_and_verify_work_on_a_study_file(three_tree, tmp_path):
    path = tmp_path / "study.nc"
    save_study(three_tree, path)
    fresh, check = ik.rerun_study(path, executor="serial", progress=False)
    assert check.passed and sorted(check.tables) == sorted(THREE)
    assert fresh.attrs["calculations_computed"] == 15
    verified = ik.verify_study(path, sample=1, executor="serial")
    assert verified.passed and "every system within its tolerances" in str(verified)


def test_cli_study_run_writes_one_file_and_refuses_bad_input_in_one_line(tmp_path, capsys):
    from interkit.cli.main import main

    _write_xyz(tmp_path, "Water_dimer", [0.0])
    toml = tmp_path / "study.toml"
    toml.write_text('name = "cli"\n[calculation]\nlevels = ["hf/sto-3g"]\n[[systems]]\nname = "w"\n'
                    'category = "hb"\ngeometry = "Water_dimer.xyz"\nfragment_a = [0, 1, 2]\nfactors = [1.0]\n'
                    'reference_kcal_per_mol = [-4.989]\n')
    out = tmp_path / "s.nc"
    assert main(["study", "run", str(toml), "-o", str(out), "--serial", "--quiet", "--cache", str(tmp_path / "c")]) == 0
    text = capsys.readouterr().out
    assert "1 systems, 5 calculations: 5 computed, 0 from the store" in text and "ranking against" in text
    assert open_study(out)["w"].sizes["distance"] == 1
    toml.write_text(toml.read_text().replace('factors = [1.0]', 'factors = [1.0, 1.0]'))
    bad = tmp_path / "bad.nc"
    assert main(["study", "run", str(toml), "-o", str(bad), "--serial", "--quiet"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "systems[0] 'w'" in err and not bad.exists()


# ---------------------------------------------------------------------- Dask (batch-system code path)
def test_dask_jobqueue_local_cluster_equals_serial(tmp_path):
    require("dask_jobqueue", "the batch-system path needs dask-jobqueue (pip install -e .[dask])")
    from dask_jobqueue.local import LocalCluster
    from distributed import Client

    study = ik.s22_study(levels=["hf/sto-3g"], systems=["Water_dimer", "Methane_dimer"])
    serial = ik.run_study(study, executor="serial", progress=False)
    # job scripts started as local processes: the code path of SLURMCluster, PBSCluster...
    with LocalCluster(cores=1, processes=1, memory="2GB", scheduler_options={"host": "127.0.0.1"},
                      local_directory=str(tmp_path)) as cluster:
        cluster.scale(jobs=2)
        with Client(cluster, set_as_default=False) as client:
            client.wait_for_workers(2, timeout=60)
            tree = ik.run_study(study, executor=client, cache=tmp_path / "store", progress=False)
    assert tree.attrs["executor"] == "dask"
    for name in study.names:
        a, b = serial[name].to_dataset(inherit=False), tree[name].to_dataset(inherit=False)
        # other initial guesses on the workers: the SCF threshold (1e-8 hartree) bounds the difference
        assert np.nanmax(np.abs(a["e_total_hartree"].values - b["e_total_hartree"].values)) < 1e-7
        np.testing.assert_array_equal(a["job_key"].values, b["job_key"].values)


# ---------------------------------------------------------------------- slow reference check
# B3LYP-D3(BJ) with a large basis reproduces the S22 set within about 0.3 kcal/mol MAE (recalled
# from memory, as in the project's reference notes; the D3(BJ) parametrisation paper, Grimme,
# Ehrlich, Goerigk, J. Comput. Chem. 32, 1456 (2011), reports errors of that size). def2-TZVP with
# counterpoise adds some basis incompleteness (a tenth or two, memory): 0.5 kcal/mol for the MAE.
S22_B3LYP_D3BJ_TZVP_MAE_TOLERANCE = 0.5


@pytest.mark.slow
@pytest.mark.timeout(6 * 3600)  # the whole S22 set in def2-TZVP: hours on 2 cores
def test_s22_set_at_b3lyp_d3bj_tzvp_against_s22b(tmp_path):
    import os

    # INTERKIT_S22_SYSTEMS="Water_dimer,Methane_dimer" runs a subset (a quick check of the code path)
    subset = os.environ.get("INTERKIT_S22_SYSTEMS")
    study = ik.s22_study(levels=["b3lyp-d3bj/def2-tzvp"], systems=subset.split(",") if subset else None)
    tree = ik.run_study(study, cache=tmp_path / "store", progress=False)
    assert all((node["status"] != "failed").all() for node in tree.children.values())
    ranking = ik.rank_methods(tree, points="equilibrium")
    print(ranking.to_string())  # the measured MAE (shown with pytest -s or -rP)
    row = ranking.iloc[0]
    assert row["n_systems"] == len(study.names)
    assert row["mae_kcal_per_mol"] <= S22_B3LYP_D3BJ_TZVP_MAE_TOLERANCE, ranking.to_string()
