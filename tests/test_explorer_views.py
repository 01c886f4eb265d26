"""Readable, consistent views of a scan: trade-spelled labels, one palette, force units
from one table, the explorer's headline numbers and y range, CSV force columns, the
comparison widget's missing pairs and the launcher's job count (no electronic structure:
the scans are assembled from made-up job energies)."""

from __future__ import annotations

import csv

import numpy as np
import pytest

import interkit as ik
import interkit.widgets as W
from interkit.analysis.minima import force_zero_crossing, minimum_table
from interkit.data.schema import assemble
from interkit.run.plan import plan_scan


def display_label(label):
    from interkit.model.levels import display_label as shown

    return shown(label)


def convert_force(*args):
    from interkit.units import convert_force as convert

    return convert(*args)

HF_DIMER_XYZ = "4\nHF dimer\nF 0 0 0\nH 0 0 0.92\nF 0 0 2.75\nH 0.85 0 3.05\n"
FACTORS = (0.85, 0.9, 0.95, 1.0, 1.05, 1.15, 1.3, 1.5, 1.8)
LEVELS = ("hf/sto-3g", "b3lyp-d3bj/3-21g")


def _morse(r, depth, r0, a=1.6):
    """Morse curve (kcal/mol) and its force -dE/dR (kcal/mol/angstrom): a made-up curve
    with a minimum inside the grid."""
    x = np.exp(-a * (r - r0))
    return depth * (x * x - 2 * x), 2 * a * depth * (x * x - x)


def _scan(levels=LEVELS, factors=FACTORS):
    """A scan Dataset assembled from made-up job energies, a Morse well per level, with
    a BSSE of 0.002 hartree per ghost and force variables added by hand."""
    dimer = ik.Dimer.from_xyz_string(HF_DIMER_XYZ, name="hf-dimer")
    spec = ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(1, 2), factors=list(factors), levels=list(levels))
    plan = plan_scan(spec, check=False)
    r = np.array([p.distance for p in spec.points])
    records = {}
    for (li, pi), roles in plan.table.items():
        e, _ = _morse(r[pi], depth=3.0 + li, r0=1.9 + 0.05 * li)
        for role, key in roles.items():
            base = {"dimer": -200.0 + e / 627.5094740631, "a_dimer_basis": -100.002, "b_dimer_basis": -100.002,
                    "a_own_basis": -100.0, "b_own_basis": -100.0}[role]
            records[key] = {"status": "ok", "energy_hartree": base, "wall_time_s": 0.1}
    ds = assemble(plan, records)
    forces = np.array([_morse(r, 3.0 + li, 1.9 + 0.05 * li)[1] for li in range(len(levels))])
    ds["force_along"] = (("level", "distance"), forces, {"units": "kcal/mol/angstrom"})
    ds["forces"] = (("level", "distance", "atom", "xyz"), np.zeros((len(levels), r.size, 4, 3)),
                    {"units": "kcal/mol/angstrom"})
    ds["force_method"] = (("level",), np.array(["analytic"] * len(levels)))
    return ds


@pytest.fixture(scope="module")
def scan():
    return _scan()


# ---------------------------------------------------------------------- labels
@pytest.mark.parametrize("label, expected", [
    # spellings as the trade prints them (common practice: papers, basis-set exchange names)
    ("b3lyp-d3bj/def2-svp", "B3LYP-D3(BJ)/def2-SVP"),
    ("mp2/aug-cc-pvdz", "MP2/aug-cc-pVDZ"),
    ("ccsd(t)/cc-pvtz", "CCSD(T)/cc-pVTZ"),
    ("scs-mp2/jun-cc-pvdz", "SCS-MP2/jun-cc-pVDZ"),
    ("hf/def2-tzvp", "HF/def2-TZVP"),
    ("pbe0-d3zero/6-31g*", "PBE0-D3(0)/6-31G*"),
    ("pbe0-d4/6-311++g(d,p)", "PBE0-D4/6-311++G(d,p)"),
    ("wb97x-d/def2-tzvpp", "ωB97X-D/def2-TZVPP"),
    ("wb97m-v/ma-def2-svp", "ωB97M-V/ma-def2-SVP"),
    ("b3lyp-d3bj-atm/sto-3g", "B3LYP-D3(BJ)+ATM/STO-3G"),
    ("tpssh/cc-pwcvtz", "TPSSh/cc-pwCVTZ"),
    ("mp2/def2-svp (exact scf, all-electron)", "MP2/def2-SVP (exact scf, all-electron)"),
    ("b3lyp/def2-svp (grid 5, pruning sg1)", "B3LYP/def2-SVP (grid 5, pruning sg1)"),
    ("reference: external curve", "reference: external curve"),   # not a level label: unchanged
])
def test_display_label_spells_levels_as_the_trade_does(label, expected):
    assert display_label(label) == expected


def test_dataset_keeps_lowercase_labels_while_views_show_trade_spelling(scan, tmp_path):
    ex = W.ScanExplorer(scan, export_dir=tmp_path)
    assert list(scan["level"].values) == list(LEVELS)
    assert "B3LYP-D3(BJ)/3-21G" in ex.headline.value and "b3lyp-d3bj/3-21g" not in ex.readout.value
    legend = [t.get_text() for t in ex.curves.ax.get_legend().get_texts()]
    assert legend == ["HF/STO-3G", "B3LYP-D3(BJ)/3-21G"]
    assert ex.curves.ax.get_ylabel().endswith("/ kcal mol⁻¹")


# ---------------------------------------------------------------------- units
def test_convert_force_matches_codata_2018_by_hand():
    # CODATA 2018: E_h = 4.3597447222071e-18 J, a_0 = 0.529177210903e-10 m,
    # N_A = 6.02214076e23 /mol (exact), e = 1.602176634e-19 C (exact); 1 kcal = 4.184 kJ.
    eh_j, a0_m, na, e_c = 4.3597447222071e-18, 0.529177210903e-10, 6.02214076e23, 1.602176634e-19
    kj_per_mol_per_angstrom = eh_j * na / 1000 / (a0_m * 1e10)          # ≈ 4961.48
    assert convert_force(1.0, "hartree/bohr", "kJ/mol/angstrom") == pytest.approx(kj_per_mol_per_angstrom, rel=1e-11)
    assert convert_force(1.0, "hartree/bohr", "kJ/mol/nm") == pytest.approx(10 * kj_per_mol_per_angstrom, rel=1e-11)
    assert convert_force(1.0, "hartree/bohr", "kcal/mol/angstrom") == pytest.approx(
        kj_per_mol_per_angstrom / 4.184, rel=1e-11)
    assert convert_force(1.0, "hartree/bohr", "eV/angstrom") == pytest.approx(eh_j / e_c / (a0_m * 1e10), rel=1e-11)
    np.testing.assert_allclose(convert_force([2.0, -1.0], "kcal/mol/angstrom", "kJ/mol/angstrom"),
                               [8.368, -4.184], rtol=1e-12)   # the table's two hartree factors agree to 1e-13
    with pytest.raises(ik.InputError, match="to_unit: unknown force unit 'N'"):
        convert_force(1.0, "hartree/bohr", "N")


def test_switching_to_kj_per_mol_changes_the_force_readout(scan, tmp_path):
    ex = W.ScanExplorer(scan, export_dir=tmp_path)
    ex.index = 1
    f_kcal = float(scan["force_along"].values[0, 1])
    assert f"{f_kcal:.3f} kcal mol⁻¹ Å⁻¹" in ex.readout.value
    ex.unit = "kJ/mol"
    assert ex.force_unit == "kJ/mol/angstrom"
    assert f"{f_kcal * 4.184:.3f} kJ mol⁻¹ Å⁻¹" in ex.readout.value     # 1 kcal = 4.184 kJ
    _, y = ex.force_panel.marker_xy["hf/sto-3g"]
    assert y == pytest.approx(f_kcal * 4.184)
    ex.force_unit = "kJ/mol/nm"
    assert f"{f_kcal * 41.84:.3f} kJ mol⁻¹ nm⁻¹" in ex.readout.value and "kJ mol⁻¹ nm⁻¹" in ex.force_panel.ax.get_ylabel()


def test_csv_force_columns_in_the_chosen_unit_read_back(scan, tmp_path):
    from interkit.data.columns import force_columns, read_curve_table
    from interkit.widgets.exports import write_csv

    path = write_csv(scan, tmp_path / "c.csv", unit="kJ/mol", force_unit="kJ/mol/nm")
    with open(path, newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert force_columns(list(rows[0])) == {"force_along_kj_per_mol_per_nm": "kJ/mol/nm"}
    got = np.array([float(r["force_along_kj_per_mol_per_nm"]) for r in rows if r["curve"] == "hf/sto-3g"])
    # kcal/mol/angstrom -> kJ/mol/nm: x 4.184 (kJ per kcal) x 10 (angstrom per nm)
    np.testing.assert_allclose(got, scan["force_along"].values[0] * 41.84, rtol=1e-7)
    r, e, _ = read_curve_table(path, curve="hf/sto-3g")
    np.testing.assert_allclose(e, scan["e_int"].values[0], rtol=1e-7)
    default = write_csv(scan, tmp_path / "d.csv", unit="kJ/mol")   # forces follow the energy unit
    with open(default, newline="") as fh:
        assert "force_along_kj_per_mol_per_angstrom" in next(csv.reader(fh))


def test_plots_take_energy_and_force_units(scan):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from interkit.plot import plot_forces

    ax = plot_forces(scan, force_unit="hartree/bohr", show_fit=False)
    line = next(ln for ln in ax.get_lines() if ln.get_label() == "HF/STO-3G")
    np.testing.assert_allclose(line.get_ydata(), scan["force_along"].values[0] / (627.5094740631 / 0.529177210903),
                               rtol=1e-12)
    assert "Eₕ a₀⁻¹" in ax.get_ylabel()
    plt.close(ax.figure)


# ---------------------------------------------------------------------- headline numbers
def test_headline_numbers_are_those_of_the_analysis(scan, tmp_path):
    ex = W.ScanExplorer(scan, export_dir=tmp_path)
    rows = {row["level"]: row for row in minimum_table(scan)}
    r = scan["distance"].values
    for level in LEVELS:
        head = next(h for h in ex._headline_rows if h["level"] == level)
        assert head["r_min_angstrom"] == rows[level]["r_min_angstrom"]
        assert head["well_depth_kcal_per_mol"] == rows[level]["well_depth_kcal_per_mol"]
        assert head["force_zero_angstrom"] == force_zero_crossing(r, scan["force_along"].sel(level=level).values)
        # the made-up BSSE is 2 x 0.002 hartree at every point
        assert head["bsse_at_minimum_kcal_per_mol"] == pytest.approx(0.004 * 627.5094740631, rel=1e-9)
        assert f"{rows[level]['r_min_angstrom']:.3f}" in ex.headline.value
    ex.unit = "kJ/mol"
    depth = rows["hf/sto-3g"]["well_depth_kcal_per_mol"] * 4.184
    assert f"{depth:.3f}" in ex.headline.value and "kJ mol⁻¹" in ex.headline.value
    # the minimum is marked on the curve; the spline is drawn through the points
    stars = [ln for ln in ex.curves.ax.get_lines() if ln.get_gid() == "interkit-minimum"]
    assert len(stars) == 2
    assert stars[0].get_xdata()[0] == pytest.approx(rows["hf/sto-3g"]["r_min_angstrom"])
    smooth = next(ln for ln in ex.curves.ax.get_lines() if ln.get_label() == "HF/STO-3G")
    assert len(smooth.get_xdata()) > 100 > r.size


def test_y_range_control_changes_the_axis_limits(scan, tmp_path):
    ex = W.ScanExplorer(scan, export_dir=tmp_path)
    top = float(np.nanmax(scan["e_int"].values))      # the repulsive wall at the shortest distance
    assert ex.curves.ax.get_ylim()[1] < top            # the default range shows the well
    ex.wall_box.value = True
    assert ex.curves.ax.get_ylim()[1] >= top
    lo, hi = ex.y_range.min, ex.y_range.max
    chosen = (round(lo + 0.25 * (hi - lo), 2), round(lo + 0.5 * (hi - lo), 2))
    ex.y_range.value = chosen
    assert ex.curves.ax.get_ylim() == pytest.approx(chosen, abs=1e-9)
    assert f'data-ylim="{chosen[0]:.6g},{chosen[1]:.6g}"' in ex.curves.limits.value
    ex.index = 3                                       # moving the marker keeps the range
    assert ex.curves.ax.get_ylim() == pytest.approx(chosen, abs=1e-9)


# ---------------------------------------------------------------------- palette
def test_palette_keeps_twelve_curves_apart():
    import matplotlib

    matplotlib.use("Agg")
    from interkit.plot import plot_curves
    from interkit.plot.style import LEVEL_COLOURS, OKABE_ITO, level_style

    pairs = {(level_style(k)["color"], str(level_style(k)["ls"])) for k in range(12)}
    assert len(pairs) == 12
    assert set(LEVEL_COLOURS) <= set(OKABE_ITO.values())
    levels = [f"hf/basis-{k}" for k in range(12)]
    ds = _scan(levels=("hf/sto-3g",)).drop_vars(["forces", "force_along", "force_method"])
    import xarray as xr

    ds = xr.concat([ds.assign_coords(level=[lv]) for lv in levels], dim="level")
    ax = plot_curves(ds, show_minimum=False)
    drawn = {(ln.get_color(), str(ln.get_linestyle())) for ln in ax.get_lines() if ln.get_label() in
             {display_label(lv) for lv in levels}}
    assert len(drawn) == 12


# ---------------------------------------------------------------------- consistency
def test_force_arrows_say_whose_forces_they_show(scan, tmp_path):
    ex = W.ScanExplorer(scan, export_dir=tmp_path)
    assert "forces of HF/STO-3G" in ex.arrow_legend.value and "pick a level" in ex.arrow_legend.value
    ex.level = "b3lyp-d3bj/3-21g"
    assert "forces of B3LYP-D3(BJ)/3-21G" in ex.arrow_legend.value


def test_comparison_widget_lists_the_unavailable_pairs():
    dimer = ik.Dimer.from_xyz_string(HF_DIMER_XYZ, name="hf-dimer")
    spec = ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(1, 2), factors=[0.95, 1.0, 1.2, 1.5],
                       levels=["m06-2x/sto-3g", "hf/sto-3g"], dispersion=["none", "d3zero", "d3bj"])
    plan = plan_scan(spec, check=False)
    records, terms = {}, {}
    for (li, pi), roles in plan.table.items():
        for role, key in roles.items():
            records[key] = {"status": "ok", "energy_hartree": -100.0 - (0.01 / (1 + pi) if role == "dimer" else 0),
                            "wall_time_s": 0.1}
            if li == 0:
                terms[(key, "d3zero")] = {"energy_hartree": -0.001 if role == "dimer" else 0.0}
    ds = assemble(plan, records, dispersion_terms=terms)
    widget = W.CorrectionComparison(ds)
    # pyscf-dispersion has no D3(BJ) parameters for M06-2X (its D3 fit is zero-damping only)
    assert "M06-2X/STO-3G with D3(BJ)" in widget.unavailable.value
    assert widget.unavailable in widget.children


def test_launcher_counts_displaced_points_and_leaves_a_core_free():
    import os

    launcher = W.ScanLauncher()
    assert launcher.workers.value == max(1, (os.cpu_count() or 1) - 1)
    assert launcher.dimer is not None                # a bundled dimer is loaded at start
    launcher.levels.value = "ccsd(t)/sto-3g"        # no analytic gradients: numerical forces
    launcher.grid.value = "0.9, 1.0, 1.2"
    launcher.forces.value = True
    plan = plan_scan(launcher.build_spec(), check=False)
    assert launcher.n_calculations() == len(plan.jobs)
    displaced = {k for roles in plan.table.values() for role, k in roles.items() if role.endswith(("_plus", "_minus"))}
    assert len(displaced) == 2 * 3 * 3                 # ± step, 3 points, dimer and two ghosted monomers
    assert f"{len(displaced)} of them displaced points" in launcher.estimate.value


def test_show_compare_and_report_print_in_the_chosen_units(scan, tmp_path, capsys):
    from interkit.analysis.comparison import ranking_table
    from interkit.cli.main import main

    nc = tmp_path / "s.nc"
    ik.save_scan(scan, nc)
    assert main(["show", str(nc), "--unit", "kJ/mol", "--force-unit", "kJ/mol/nm"]) == 0
    out = capsys.readouterr().out
    row = next(ln for ln in out.splitlines() if ln.startswith("HF/STO-3G") and "analytic" not in ln)
    depth = {r["level"]: r for r in minimum_table(scan)}["hf/sto-3g"]["well_depth_kcal_per_mol"]
    assert float(row.split()[2]) == pytest.approx(depth * 4.184, abs=6e-4)     # 1 kcal = 4.184 kJ
    assert "well depth / kJ/mol" in out and "largest pull / kJ/mol/nm" in out
    pull = next(ln for ln in out.splitlines() if ln.startswith("HF/STO-3G") and "analytic" in ln)
    assert float(pull.split()[2]) == pytest.approx(scan["force_along"].values[0].min() * 41.84, abs=6e-4)
    assert main(["compare", str(nc), "--unit", "kJ/mol"]) == 0
    out = capsys.readouterr().out
    rmse = next(r for r in ranking_table(scan, reference_level="hf/sto-3g") if r["level"] != "hf/sto-3g")
    from interkit.analysis.comparison import comparison_table

    table = comparison_table(scan, reference="hf/sto-3g")
    i_rmse = [k for k, _, _ in table.columns].index("rmse_kcal_per_mol")
    row = next(ln for ln in out.splitlines() if "B3LYP-D3(BJ)/3-21G" in ln and ln.strip()[:1].isdigit())
    assert float(row.split()[2 + i_rmse]) == pytest.approx(rmse["rmse_kcal_per_mol"] * 4.184, abs=6e-4)
    assert "errors in kJ/mol" in out
    with pytest.raises(SystemExit) as stop:        # a usage error: one line, exit status 2
        main(["show", str(nc), "--unit", "furlongs"])
    assert stop.value.code == 2 and "--unit: invalid choice: 'furlongs'" in capsys.readouterr().err
    assert main(["report", str(nc), "-o", str(tmp_path / "r.html"), "--unit", "eV"]) == 0
    assert "well depth / eV" in (tmp_path / "r.html").read_text(encoding="utf-8")
