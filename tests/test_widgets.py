"""Notebook widgets without a browser: traits, observers, exports, launcher logic and runs."""

from __future__ import annotations

import csv
import threading

import numpy as np
import pytest
import traitlets
from conftest import require

import interkit as ik
import interkit.widgets as W
from interkit.data.schema import assemble
from interkit.run.plan import plan_scan
from interkit.units import convert_energy, unit_text
from interkit.widgets import viewer3d
from interkit.widgets.runner import count_calculations

HF_DIMER_XYZ = """4
HF dimer, test geometry
F   0.000000  0.000000  0.000000
H   0.000000  0.000000  0.920000
F   0.000000  0.000000  2.750000
H   0.850000  0.000000  3.050000
"""


def _fake_scan(levels=("hf/sto-3g", "hf/3-21g"), factors=(0.95, 1.0, 1.2, 1.5)):
    """A scan Dataset assembled from made-up job energies (no electronic structure)."""
    dimer = ik.Dimer.from_xyz_string(HF_DIMER_XYZ, name="hf-dimer")
    spec = ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(1, 2), factors=list(factors), levels=list(levels))
    plan = plan_scan(spec)
    records = {}
    for (li, pi), roles in plan.table.items():
        for role, key in roles.items():
            base = {"dimer": -200.0, "a_dimer_basis": -100.001, "b_dimer_basis": -100.001,
                    "a_own_basis": -100.0, "b_own_basis": -100.0}[role]
            shift = -0.01 / (1 + pi) ** 2 - 0.001 * li if role == "dimer" else 0.0
            records[key] = {"status": "ok", "energy_hartree": base + shift, "wall_time_s": 0.1}
    return assemble(plan, records)


@pytest.fixture(scope="module")
def scan():
    return _fake_scan()


@pytest.fixture
def explorer(scan, tmp_path):
    return W.ScanExplorer(scan, export_dir=tmp_path)


# ---------------------------------------------------------------------- explorer
def test_explorer_shows_dataset_with_units_and_caution(explorer, scan):
    assert explorer.slider.max == scan.sizes["distance"] - 1
    # values are the Dataset's labels; the choices read in the trade's spelling
    assert explorer.level_select.options == (("all levels", "all levels"), ("HF/STO-3G", "hf/sto-3g"),
                                             ("HF/3-21G", "hf/3-21g"))
    assert "kcal/mol" in explorer.readout.value
    assert "Å" in explorer.point_label.value
    texts = " ".join(c.value for c in explorer.children if hasattr(c, "value") and isinstance(c.value, str))
    assert scan.attrs["caution"][:40] in texts
    assert explorer.curves.png()[:4] == b"\x89PNG"


def test_slider_moves_marker_and_3d_view(explorer, scan):
    explorer.slider.value = 2
    assert explorer.index == 2
    assert explorer.selected_distance == pytest.approx(float(scan.distance[2]))
    for level, (x, y) in explorer.marker_positions.items():
        assert x == pytest.approx(float(scan.distance[2]))
        assert y == pytest.approx(float(scan.e_int.sel(level=level)[2]))
    assert explorer.view3d.frame == 2
    if explorer.view3d.canvas is not None:   # the page's view follows the synced trait
        assert explorer.view3d.canvas.frame == 2
    anchors = scan.anchors.values[2]
    np.testing.assert_allclose(explorer.scene(2)["line"], anchors, atol=1e-5)
    assert f"{float(scan.distance[2]):.3f} Å" in explorer.point_label.value
    # numbered from 0 as in the Python API and `interkit cube --point` (one numbering everywhere)
    assert "point 2 (numbered from 0" in explorer.point_label.value


def test_level_selector_limits_curves_and_readout(explorer):
    explorer.level_select.value = "hf/3-21g"
    assert explorer.shown_levels == ["hf/3-21g"]
    assert list(explorer.marker_positions) == ["hf/3-21g"]
    assert "HF/STO-3G" not in explorer.readout.value
    explorer.level = "all levels"
    assert set(explorer.marker_positions) == {"hf/sto-3g", "hf/3-21g"}


@pytest.mark.parametrize("unit", ["kJ/mol", "eV", "cm-1"])
def test_unit_selector_converts_every_number(explorer, scan, unit):
    explorer.slider.value = 1
    explorer.unit_select.value = unit
    y = explorer.marker_positions["hf/sto-3g"][1]
    assert y == pytest.approx(convert_energy(float(scan.e_int.sel(level="hf/sto-3g")[1]), "kcal/mol", unit))
    assert unit in explorer.readout.value
    assert f"/ {unit_text(unit)}" in explorer.curves.ax.get_ylabel()
    with pytest.raises(traitlets.TraitError):
        explorer.unit = "furlongs"


def test_toggles_add_uncorrected_and_bsse_curves(explorer):
    n0 = len(explorer.curves.ax.lines)
    explorer.uncorrected_box.value = True
    n1 = len(explorer.curves.ax.lines)
    explorer.bsse_box.value = True
    n2 = len(explorer.curves.ax.lines)
    assert n1 == n0 + 2 and n2 == n1 + 2     # one extra curve per level each
    labels = [line.get_label() for line in explorer.curves.ax.lines]
    assert "HF/STO-3G, uncorrected" in labels and "HF/3-21G, BSSE" in labels


def test_exports_are_written_and_readable(explorer, scan, tmp_path):
    explorer.unit = "kJ/mol"
    nc = explorer.export_netcdf(tmp_path / "s.nc")
    back = ik.open_scan(nc)
    np.testing.assert_allclose(back.e_int.values, scan.e_int.values)
    path = explorer.export_csv(tmp_path / "s.csv")
    with open(path, newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == scan.sizes["level"] * scan.sizes["distance"]
    first = rows[0]
    assert float(first["e_int_kj_per_mol"]) == pytest.approx(float(scan.e_int[0, 0]) * 4.184, rel=1e-6)
    assert float(first["distance_angstrom"]) == pytest.approx(float(scan.distance[0]))
    assert explorer.export_figure(tmp_path / "s.png") and (tmp_path / "s.png").read_bytes()[:4] == b"\x89PNG"
    explorer.export_figure(tmp_path / "s.svg")
    assert "<svg" in (tmp_path / "s.svg").read_text()
    explorer.export_stem.value = "clicked"
    for kind, button in explorer.export_buttons.items():
        button.click()
        assert "wrote" in explorer.export_status.value, kind
    assert {p.name for p in tmp_path.iterdir()} >= {"clicked.nc", "clicked.csv", "clicked.png", "clicked.svg",
                                                    "clicked.html", "clicked.json", "clicked-tidy.csv"}
    explorer.export_dir.value = str(tmp_path / "no-such-folder")
    for kind in ("CSV", "report", "JSON", "tidy CSV"):
        explorer.export_status.value = ""
        explorer.export_buttons[kind].click()
        assert "interkit-error" in explorer.export_status.value and "does not exist" in explorer.export_status.value


def test_share_buttons_write_report_json_and_tidy_csv(explorer, scan, tmp_path):
    import json

    explorer.unit = "kJ/mol"
    explorer.export_stem.value = "shared"
    for kind in ("report", "JSON", "tidy CSV"):
        explorer.export_buttons[kind].click()
        assert "wrote" in explorer.export_status.value, kind
    text = (tmp_path / "shared.html").read_text(encoding="utf-8")
    assert "<script" not in text.lower() and scan.attrs["caution"] in text
    for v in scan["e_int"].sel(level="hf/3-21g").values:     # the report shows the Dataset's numbers,
        assert f"<td>{convert_energy(v, 'kcal/mol', 'kJ/mol'):.3f}</td>" in text   # in the display unit
    doc = json.loads((tmp_path / "shared.json").read_text(encoding="utf-8"))
    assert doc["schema_name"] == "interkit_scan_export" and len(doc["points"]) == scan.sizes["distance"]
    assert doc["variables"]["e_int"]["values"][1][2] == pytest.approx(float(scan["e_int"].values[1, 2]))
    with open(tmp_path / "shared-tidy.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    e_int = [r for r in rows if r["variable"] == "e_int"]
    assert len(e_int) == scan.sizes["level"] * scan.sizes["distance"]
    assert {r["unit"] for r in e_int} == {"kJ/mol"}              # the display unit
    first = next(r for r in e_int if r["level"] == "hf/sto-3g")
    assert float(first["value"]) == pytest.approx(float(scan["e_int"].sel(level="hf/sto-3g")[0]) * 4.184, rel=1e-6)


def test_export_errors_stay_in_the_widget(explorer, monkeypatch):
    def broken(*args, **kwargs):
        raise ValueError("figure could not be drawn")

    monkeypatch.setattr("interkit.widgets.explorer.write_report_file", broken)
    explorer.export_buttons["report"].click()                     # must not raise
    assert "interkit-error" in explorer.export_status.value
    assert "report not written: ValueError: figure could not be drawn" in explorer.export_status.value


def test_explorer_reopens_a_file_without_computing(scan, tmp_path, monkeypatch):
    ik.save_scan(scan, tmp_path / "saved.nc")

    def forbidden(*args, **kwargs):
        raise AssertionError("the explorer must not compute")

    monkeypatch.setattr(ik, "run_scan", forbidden)
    monkeypatch.setattr("interkit.widgets.runner.run_scan", forbidden)
    ex = W.ScanExplorer(tmp_path / "saved.nc")
    ex.index = 3
    assert ex.selected_distance == pytest.approx(float(scan.distance[3]))


def test_slots_show_forces_and_components_when_present(scan):
    rng = np.random.default_rng(0)
    extra = scan.assign(
        forces=(("level", "distance", "atom", "xyz"), rng.normal(size=(2, 4, 4, 3)) * 5, {"units": "kcal/mol/angstrom"}),
        force_along=(("level", "distance"), rng.normal(size=(2, 4)), {"units": "kcal/mol/angstrom"}),
        **{n: (("level", "distance"), rng.normal(size=(2, 4)), {"units": "kcal/mol"})
           for n in ("e_elst", "e_exch", "e_ind", "e_disp")})
    ex = W.ScanExplorer(extra)
    assert ex.scene(0)["arrows"]
    assert ex.components.children == (ex._component_image,)
    assert ex._component_image.value[:4] == b"\x89PNG"
    assert "force along" in ex.readout.value and "kcal mol⁻¹ Å⁻¹" in ex.readout.value
    plain = W.ScanExplorer(scan)
    assert plain.scene(0)["arrows"] == []
    assert "not part of this scan" in plain.components.children[0].value


def test_3d_view_is_offline(explorer):
    require(viewer3d.library_available(), f"{viewer3d.LIBRARY_PATH} is missing "
            "(python -m interkit.widgets.fetch_3dmol, or make install)")
    module = explorer.view3d.canvas._esm
    assert "window.$3Dmol" in module and "createViewer" in module
    assert explorer.view3d.canvas.uid == explorer.view3d.div_id


def test_3d_view_says_when_library_is_missing(explorer, monkeypatch, tmp_path):
    monkeypatch.setattr(viewer3d, "LIBRARY_PATH", tmp_path / "absent.js")
    view = viewer3d.Molecule3D(explorer.scenes())
    assert not view.available
    assert view.children == (view.message,)
    assert "3D view unavailable" in view.message.value and "fetch_3dmol" in view.message.value


# ---------------------------------------------------------------------- launcher
@pytest.fixture
def launcher():
    return W.ScanLauncher(executor="serial")


def test_launcher_cost_estimate_matches_the_plan(launcher):
    launcher.grid.value = "0.9, 1.0, 1.2, 1.5"
    launcher.levels.value = "hf/sto-3g, hf/3-21g"
    n = launcher.n_calculations()
    assert n == 2 * 4 * 3 + 2 * 2 == count_calculations(2, 4)
    assert n == len(plan_scan(launcher.build_spec()).jobs)
    assert f"<b>{n}</b> calculations" in launcher.estimate.value
    launcher.seconds_per_calc.value = 10.0
    launcher.workers.value = 1
    assert "about 5 min" in launcher.estimate.value
    launcher.counterpoise.value = False
    assert launcher.n_calculations() == 2 * 4 + 4
    launcher.grid.value = "0.9, x"
    assert "interkit-error" in launcher.estimate.value and "is not a number" in launcher.estimate.value


def test_launcher_builds_specs_from_the_form(launcher):
    assert launcher.dimer.name == "water_methanol"
    labels = [label for label, _ in launcher.atom_a.options + launcher.atom_b.options]
    assert labels[0] == "0 · O · fragment A" and any("fragment B" in x for x in labels)
    spec = launcher.build_spec()
    assert isinstance(spec.coordinate, ik.AtomPair) and spec.counterpoise
    launcher.coordinate.value = "centre of mass"
    launcher.grid_mode.value = "distances (Å)"
    launcher.grid.value = "2.8, 3.0, 3.5"
    spec = launcher.build_spec()
    assert isinstance(spec.coordinate, ik.CentreOfMass) and spec.distances == (2.8, 3.0, 3.5)
    launcher.levels.value = "b3lyp/sto-3g, hf/sto-3g"
    launcher.dispersion.value = "none, d3bj, d4"
    spec = launcher.build_spec()
    assert spec.dispersion == ("none", "d3bj", "d4")
    launcher.dispersion.value = "d5"
    assert "dispersion: &#x27;d5&#x27; is not one of" in launcher.estimate.value  # shown inline, escaped
    launcher.dispersion.value = ""
    launcher.levels.value = "hf/def2-svp"
    launcher.forces.value = True
    launcher.decomposition.value = True
    spec = launcher.build_spec()
    assert spec.forces and spec.decomposition == "sapt0"
    # the estimate counts the plan's jobs exactly: 3 per point, 2 own-basis monomers, 1 SAPT0 per point
    assert launcher.n_calculations() == 3 * 3 + 2 + 3
    assert "SAPT0" in launcher.estimate.value


def test_launcher_shows_input_errors_without_traceback(launcher):
    assert launcher.load_xyz_text("3\nbroken\nO 0 0 0\nH 0 0 0.1\n") is None
    assert "interkit-error" in launcher.message.value
    launcher.levels.value = "hf/no-such-basis"
    assert launcher.run() is None
    assert "interkit-error" in launcher.message.value and not launcher.run_button.disabled
    assert launcher.load_xyz_text(HF_DIMER_XYZ, "hf-dimer").natoms == 4
    assert launcher.message.value == ""
    assert launcher.atom_a.options and launcher.atom_b.options


def _tiny(launcher, factors="1.0, 1.3, 1.8"):
    launcher.load_xyz_text(HF_DIMER_XYZ, "hf-dimer")
    launcher.atom_a.value, launcher.atom_b.value = 1, 2
    launcher.grid.value = factors
    launcher.levels.value = "hf/sto-3g"
    launcher.workers.value = 1


def test_launcher_runs_in_the_background(launcher, tmp_path):
    _tiny(launcher)
    launcher.cache.value = str(tmp_path / "store")
    scan = launcher.run()
    assert scan is not None
    assert launcher.wait(timeout=240)
    assert launcher.progress.value == launcher.progress.max == 11
    ds = launcher.result
    ik.validate(ds)
    assert list(ds.status.values[0]) == ["ok"] * 3 and np.isfinite(ds.e_int.values).all()
    assert isinstance(launcher.explorer, W.ScanExplorer)
    assert launcher.explorer in launcher.result_box.children
    assert launcher.point_table.value.count('data-state="ok"') == 3
    assert "finished" in launcher.progress_label.value


def test_cancel_keeps_finished_points(launcher):
    _tiny(launcher, factors="1.0, 1.2, 1.4, 1.7, 2.0")
    cancelled = threading.Event()
    original = launcher._on_progress

    def progress_then_cancel(scan):
        original(scan)
        if not cancelled.is_set() and "ok" in scan.point_states():
            cancelled.set()
            launcher.cancel()

    launcher._on_progress = progress_then_cancel
    launcher.run()
    assert launcher.wait(timeout=240)
    ds = launcher.result
    status = list(ds.status.values[0])
    assert "ok" in status and "failed" in status
    failed = [d for s, d in zip(status, ds.status_detail.values[0]) if s == "failed"]
    assert all("cancelled" in d for d in failed)
    ok = ds.status.values[0] == "ok"
    assert np.isfinite(ds.e_int.values[0][ok]).all() and np.isnan(ds.e_int.values[0][~ok]).all()
    assert "cancelled" in launcher.progress_label.value
    assert launcher.progress.bar_style == "warning"


def test_explorer_shows_forces_when_the_scan_has_them(tmp_path):
    from interkit.widgets.forces_panel import FRAGMENT_ARROW_SCALE

    i, j = ik.demo_catalog()["water_methanol"]["contact"]
    spec = ik.ScanSpec(dimer=ik.load_demo("water_methanol"), coordinate=ik.AtomPair(i, j),
                       factors=[0.9, 1.1, 1.4], levels=["hf/sto-3g"], forces=True)
    ds = ik.run_scan(spec, executor="serial", progress=False)
    ex = W.ScanExplorer(ds)
    assert ex.force_panel is not None and ex.force_panel.widget in ex.children[2].children[1].children
    ex.index = 2
    x, y = ex.force_panel.marker_xy["hf/sto-3g"]
    assert x == pytest.approx(ds["distance"].values[2])
    assert y == pytest.approx(float(ds["force_along"].values[0, 2]))
    scene = ex.scene(2)
    assert len(scene["arrows"]) >= 1
    ex.arrow_mode.value = "fragments"
    arrows = ex.scene(2)["arrows"]
    assert len(arrows) == 2
    net_b = ds["fragment_force"].values[0, 2, 1]
    start, end = (np.asarray(p) for p in arrows[1])
    assert np.allclose(end - start, FRAGMENT_ARROW_SCALE * net_b, atol=2e-5)
    assert "kcal mol⁻¹ Å⁻¹" in ex.arrow_legend.value and "per fragment" in ex.arrow_legend.value
    ex.arrow_mode.value = "off"
    assert not ex.scene(2).get("arrows")
    assert "force along" in ex.readout.value
