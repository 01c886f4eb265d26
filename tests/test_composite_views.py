"""Basis-set uncertainty bands, the half-counterpoise curve and the reference's uncertainty
in the comparison tables (issue 15, item 4: plots, explorer, comparison table, compare,
report).

No electronic structure: the scans are assembled from made-up job energies (a Morse well
per level), then given ``e_int_halfcp`` (its definition: the mean of ``e_int`` and
``e_int_nocp``) and an assigned ``e_int_basis_uncertainty`` for the first level only.
Every expected number is computed here from the Dataset's own variables by hand
arithmetic, never copied from the code's output.
"""

from __future__ import annotations

import csv

import numpy as np
import pytest
from conftest import require

import interkit as ik
from interkit.data.schema import assemble
from interkit.run.plan import plan_scan

HF_DIMER_XYZ = "4\nHF dimer\nF 0 0 0\nH 0 0 0.92\nF 0 0 2.75\nH 0.85 0 3.05\n"
FACTORS = (0.85, 0.9, 0.95, 1.0, 1.1, 1.3, 1.6)
REFERENCE = "mp2/cc-pvdz"
LEVELS = (REFERENCE, "b3lyp/sto-3g", "hf/sto-3g")
#: assigned basis-set uncertainty of the reference, kcal/mol (made-up test values; the
#: last point is unknown)
UNCERTAINTY = np.array([0.30, 0.20, 0.15, 0.12, 0.10, 0.05, np.nan])


def _morse(r, depth, r0, a=1.6):
    """A made-up Morse curve (kcal/mol) with a minimum inside the grid."""
    x = np.exp(-a * (r - r0))
    return depth * (x * x - 2 * x)


def _scan(with_uncertainty: bool = True):
    dimer = ik.Dimer.from_xyz_string(HF_DIMER_XYZ, name="hf-dimer")
    spec = ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(1, 2), factors=list(FACTORS), levels=list(LEVELS))
    plan = plan_scan(spec, check=False)
    r = np.array([p.distance for p in spec.points])
    records = {}
    for (li, pi), roles in plan.table.items():
        e = _morse(r[pi], depth=3.0 + 0.4 * li, r0=1.9 + 0.04 * li)
        for role, key in roles.items():
            # a BSSE of 0.002 hartree per ghosted monomer, more for the larger level index
            base = {"dimer": -200.0 + e / 627.5094740631, "a_dimer_basis": -100.002 - 0.001 * li,
                    "b_dimer_basis": -100.002 - 0.001 * li, "a_own_basis": -100.0, "b_own_basis": -100.0}[role]
            records[key] = {"status": "ok", "energy_hartree": base, "wall_time_s": 0.1}
    ds = assemble(plan, records)
    ds["e_int_halfcp"] = (0.5 * (ds["e_int"] + ds["e_int_nocp"])).assign_attrs(units="kcal/mol")
    if with_uncertainty:
        u = np.full((len(LEVELS), r.size), np.nan)
        u[0] = UNCERTAINTY
        ds["e_int_basis_uncertainty"] = (("level", "distance"), u, {"units": "kcal/mol"})
    return ds


@pytest.fixture(scope="module")
def scan():
    return _scan()


def _bands(ax):
    return [c for c in ax.collections if c.get_gid() == "interkit-basis-band"]


def _band_edges(band) -> set[tuple[float, float]]:
    return {(round(float(x), 9), round(float(y), 9)) for path in band.get_paths() for x, y in path.vertices}


# ---------------------------------------------------------------------- item 1: the band
def test_curve_plot_shades_the_basis_set_uncertainty_of_the_reference_only(scan):
    import matplotlib.pyplot as plt

    from interkit.plot.curves import plot_curves

    ax = plot_curves(scan)
    bands = _bands(ax)
    assert len(bands) == 1   # only the level with a finite uncertainty gets a band
    r = scan["distance"].values
    e = scan["e_int"].sel(level=REFERENCE).values
    edges = _band_edges(bands[0])
    # the band joins e ± u at the six points with a known uncertainty (hand arithmetic)
    for i in range(6):
        assert (round(r[i], 9), round(e[i] + UNCERTAINTY[i], 9)) in edges
        assert (round(r[i], 9), round(e[i] - UNCERTAINTY[i], 9)) in edges
    assert not any(abs(x - r[6]) < 1e-9 for x, _ in edges)   # the unknown point is left out
    assert any("basis-set uncertainty" in t.get_text() for t in ax.get_legend().get_texts())
    plt.close(ax.figure)


def test_no_band_without_an_uncertainty():
    import matplotlib.pyplot as plt

    from interkit.plot.curves import plot_curves

    ax = plot_curves(_scan(with_uncertainty=False))
    assert _bands(ax) == []
    assert not any("uncertainty" in t.get_text() for t in ax.get_legend().get_texts())
    plt.close(ax.figure)


def test_band_follows_the_display_unit(scan):
    import matplotlib.pyplot as plt

    from interkit.plot.curves import plot_curves

    ax = plot_curves(scan, unit="kJ/mol")
    e = scan["e_int"].sel(level=REFERENCE).values
    # 1 kcal/mol = 4.184 kJ/mol (thermochemical calorie, by definition)
    edges = _band_edges(_bands(ax)[0])
    assert (round(scan["distance"].values[0], 9), round(4.184 * (e[0] + UNCERTAINTY[0]), 9)) in edges
    plt.close(ax.figure)


def test_comparison_plot_shades_the_reference_and_the_zero_error_band(scan):
    import matplotlib.pyplot as plt

    from interkit.plot.comparison import plot_comparison

    ax_curve, ax_err = plot_comparison(scan, reference_level=REFERENCE)
    r = scan["distance"].values
    e = scan["e_int"].sel(level=REFERENCE).values
    (ref_band,) = _bands(ax_curve)
    (err_band,) = _bands(ax_err)
    assert (round(r[1], 9), round(e[1] - UNCERTAINTY[1], 9)) in _band_edges(ref_band)
    # around zero on the error panel: an error inside it is within the reference's uncertainty
    assert (round(r[1], 9), round(UNCERTAINTY[1], 9)) in _band_edges(err_band)
    assert (round(r[1], 9), round(-UNCERTAINTY[1], 9)) in _band_edges(err_band)
    assert "basis-set uncertainty" in " ".join(t.get_text() for t in ax_err.get_legend().get_texts())
    plt.close(ax_curve.figure)


def test_explorer_curve_panel_draws_the_band(scan, tmp_path):
    require("ipywidgets", "the notebook layer needs ipywidgets (pip install -e .[test])")
    from interkit.widgets.explorer import ScanExplorer

    ex = ScanExplorer(scan, export_dir=tmp_path)
    bands = _bands(ex.curves.ax)
    assert len(bands) == 1
    e = scan["e_int"].sel(level=REFERENCE).values
    assert (round(scan["distance"].values[2], 9), round(e[2] + UNCERTAINTY[2], 9)) in _band_edges(bands[0])


# ---------------------------------------------------------------------- item 2: half-counterpoise
def test_curve_plot_draws_the_half_counterpoise_curve_when_asked(scan):
    import matplotlib.pyplot as plt

    from interkit.plot.curves import plot_curves

    ax = plot_curves(scan, variable="e_int_halfcp", levels=["b3lyp/sto-3g"], show_minimum=False)
    half = 0.5 * (scan["e_int"] + scan["e_int_nocp"]).sel(level="b3lyp/sto-3g").values   # definition
    points = [ln for ln in ax.lines if ln.get_linestyle() == "None" and len(ln.get_xdata()) == half.size]
    np.testing.assert_allclose(points[0].get_ydata(), half, rtol=0, atol=1e-12)
    assert not np.allclose(half, scan["e_int"].sel(level="b3lyp/sto-3g").values)   # a different curve
    plt.close(ax.figure)
    with pytest.raises(ik.InputError, match="variable: 'e_int_cp'"):
        plot_curves(scan, variable="e_int_cp")


def test_explorer_curve_control_switches_to_half_counterpoise(scan, tmp_path):
    require("ipywidgets", "the notebook layer needs ipywidgets (pip install -e .[test])")
    from interkit.widgets.explorer import ScanExplorer

    ex = ScanExplorer(scan, export_dir=tmp_path)
    assert "e_int_halfcp" in [v for _, v in ex.variable_select.options]
    ex.level = "b3lyp/sto-3g"
    ex.index = 3
    ex.variable_select.value = "e_int_halfcp"
    half = 0.5 * (scan["e_int"] + scan["e_int_nocp"]).sel(level="b3lyp/sto-3g").values[3]   # definition
    assert ex.marker_positions["b3lyp/sto-3g"][1] == pytest.approx(half, abs=1e-12)
    ex.variable_select.value = ""
    assert ex.marker_positions["b3lyp/sto-3g"][1] == pytest.approx(
        float(scan["e_int"].sel(level="b3lyp/sto-3g").values[3]), abs=1e-12)


def test_comparison_table_compares_half_counterpoise_curves(scan):
    from interkit.analysis.comparison import comparison_table

    table = comparison_table(scan, reference=REFERENCE, variable="e_int_halfcp")
    assert table.variable == "e_int_halfcp"
    half = 0.5 * (scan["e_int"] + scan["e_int_nocp"])
    err = (half.sel(level="hf/sto-3g") - half.sel(level=REFERENCE)).values
    row = next(r for r in table.rows if r["curve"] == "hf/sto-3g")
    assert row["mae_kcal_per_mol"] == pytest.approx(np.abs(err).mean(), abs=1e-12)   # hand arithmetic
    assert row["mean_signed_error_kcal_per_mol"] == pytest.approx(err.mean(), abs=1e-12)
    with pytest.raises(ik.InputError, match="variable: 'e_int_bad' is not one of"):
        comparison_table(scan, variable="e_int_bad")


# ---------------------------------------------------------------------- item 3: the tables
def test_comparison_table_reports_the_reference_uncertainty(scan):
    from interkit.analysis.comparison import comparison_table

    table = comparison_table(scan, reference=REFERENCE)
    keys = [k for k, _, _ in table.columns]
    assert keys[-1] == "reference_uncertainty_kcal_per_mol"
    # the reference's lowest computed point and the mean over the six known points (hand arithmetic)
    lowest = int(np.argmin(scan["e_int"].sel(level=REFERENCE).values))
    assert table.reference_uncertainty_at_minimum_kcal_per_mol == pytest.approx(UNCERTAINTY[lowest])
    assert table.reference_uncertainty_mean_kcal_per_mol == pytest.approx(np.nanmean(UNCERTAINTY))
    for row in table.rows:
        assert row["reference_uncertainty_kcal_per_mol"] == pytest.approx(0.92 / 6)   # 0.30+...+0.05
    bound = comparison_table(scan, reference=REFERENCE, region="bound")
    ref = scan["e_int"].sel(level=REFERENCE).values
    inside = (ref < 0) & np.isfinite(UNCERTAINTY)
    assert bound.rows[0]["reference_uncertainty_kcal_per_mol"] == pytest.approx(UNCERTAINTY[inside].mean())
    # a reference without an uncertainty: no column, nothing reported
    plain = comparison_table(scan, reference="hf/sto-3g")
    assert "reference_uncertainty_kcal_per_mol" not in [k for k, _, _ in plain.columns]
    assert not plain.has_reference_uncertainty


def test_compare_and_report_show_the_reference_uncertainty(scan, tmp_path, capsys):
    from interkit.analysis.comparison import comparison_table
    from interkit.cli.main import main

    path = tmp_path / "scan.nc"
    ik.save_scan(scan, path)
    out_csv = tmp_path / "rank.csv"
    assert main(["compare", str(path), "--reference", REFERENCE, "--table", str(out_csv)]) == 0
    text = capsys.readouterr().out
    assert "ref. basis-set uncertainty" in text
    expected = comparison_table(ik.open_scan(path), reference=REFERENCE)
    assert f"{expected.reference_uncertainty_at_minimum_kcal_per_mol:.3f} kcal/mol at its lowest point" in text
    rows = list(csv.reader(out_csv.open(encoding="utf-8")))
    header, first = rows[1], rows[2]
    value = float(first[header.index("reference_uncertainty_kcal_per_mol")])
    assert value == pytest.approx(0.92 / 6)   # the mean of the six assigned values
    # the printed row ends with that value (3 decimals) before the point count
    line = next(ln for ln in text.splitlines() if ln.strip().startswith("1 "))
    assert line.split()[-2] == f"{0.92 / 6:.3f}"
    # half-counterpoise from the command line
    assert main(["compare", str(path), "--reference", REFERENCE, "--variable", "e_int_halfcp"]) == 0
    assert "half-counterpoise" in capsys.readouterr().out
    html = tmp_path / "r.html"
    assert main(["report", str(path), "-o", str(html), "--reference", REFERENCE]) == 0
    capsys.readouterr()
    page = html.read_text(encoding="utf-8")
    assert "ref. basis-set uncertainty / kcal/mol" in page
    assert "basis-set uncertainty is" in page and "its basis-set uncertainty" in page


def test_compare_refuses_an_unknown_variable(scan, tmp_path, capsys):
    from interkit.cli.main import main

    path = tmp_path / "scan.nc"
    ik.save_scan(_scan(with_uncertainty=False).drop_vars("e_int_halfcp"), path)
    assert main(["compare", str(path), "--variable", "e_int_halfcp"]) == 2
    err = capsys.readouterr().err
    assert "--variable: 'e_int_halfcp' is not in the dataset" in err and "Traceback" not in err


# ---------------------------------------------------------------------- a composite row
COMPOSITE = "mp2/cc-pvdz~cc-pvtz + ccsd(t)/cc-pvdz"


def _composite_scan():
    """A composite scan assembled from made-up component records: every job gets an SCF and a
    correlation energy (CCSD(T) jobs also their MP2 part), a Morse well in the dimer's."""
    dimer = ik.Dimer.from_xyz_string(HF_DIMER_XYZ, name="hf-dimer")
    spec = ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(1, 2), factors=list(FACTORS),
                       levels=[COMPOSITE, "b3lyp/sto-3g"])
    plan = plan_scan(spec, check=False)
    r = np.array([p.distance for p in spec.points])
    records = {}
    for (li, pi), roles in plan.table.items():
        for role, key in roles.items():
            well = _morse(r[pi], depth=2.0 + 0.3 * li, r0=1.9) / 627.5094740631 if role == "dimer" else 0.0
            scf = {"dimer": -200.0, "a_dimer_basis": -100.001, "b_dimer_basis": -100.001}.get(role, -100.0)
            corr = -0.4 - 0.01 * li + well if role == "dimer" else -0.2 - 0.005 * li
            rec = {"status": "ok", "scf_energy_hartree": scf, "correlation_energy_hartree": corr,
                   "energy_hartree": scf + corr, "wall_time_s": 0.1}
            if spec.levels[li].method == "ccsd(t)":
                rec["mp2_correlation_energy_hartree"] = corr + (0.0003 if role == "dimer" else 0.0001)
            records[key] = rec
    return assemble(plan, records)


def test_band_and_column_of_an_assembled_composite_row(tmp_path):
    import matplotlib.pyplot as plt

    from interkit.analysis.comparison import comparison_table
    from interkit.plot.curves import plot_curves

    ds = _composite_scan()
    kinds = dict(zip(ds["level"].values, ds["level_kind"].values))
    assert kinds[COMPOSITE] == "composite"
    u = ds["e_int_basis_uncertainty"].sel(level=COMPOSITE).values
    assert np.isfinite(u).all() and (u > 0).all()   # the made-up bases differ, so the spread is not zero
    ax = plot_curves(ds)
    (band,) = _bands(ax)   # the composite only: components and the functional have NaN uncertainty
    e = ds["e_int"].sel(level=COMPOSITE).values
    r = ds["distance"].values
    edges = _band_edges(band)
    assert all((round(r[i], 9), round(e[i] + u[i], 9)) in edges for i in range(r.size))
    plt.close(ax.figure)
    table = comparison_table(ds, reference=COMPOSITE)
    assert table.reference_uncertainty_mean_kcal_per_mol == pytest.approx(u.mean())
    assert table.reference_uncertainty_at_minimum_kcal_per_mol == pytest.approx(u[int(np.argmin(e))])
    row = next(x for x in table.rows if x["curve"] == "b3lyp/sto-3g")
    assert row["reference_uncertainty_kcal_per_mol"] == pytest.approx(u.mean())


def test_comparison_widget_shows_the_reference_uncertainty(scan, tmp_path):
    require("ipywidgets", "the notebook layer needs ipywidgets (pip install -e .[test])")
    from interkit.analysis.comparison import comparison_table
    from interkit.widgets.comparison import CorrectionComparison

    widget = CorrectionComparison(scan, reference=REFERENCE, export_dir=tmp_path)
    assert "ref. basis-set uncertainty / kcal/mol" in widget.table.value
    expected = comparison_table(scan, reference=REFERENCE)
    assert f"{expected.reference_uncertainty_at_minimum_kcal_per_mol:.3f} kcal/mol at its lowest point" \
        in widget.table.value
    assert f"<td>{0.92 / 6:.3f}</td>" in widget.table.value   # the mean of the six assigned values
    assert len(_bands(widget.figure.axes[1])) == 1   # the zero-error band of the reference


def test_comparison_ranks_the_components_only_when_asked():
    """The rows a composite is made of (not asked for) are parts of the reference, not
    candidates: the table leaves them out unless include_components=True."""
    from interkit.analysis.comparison import comparison_table

    ds = _composite_scan()
    kinds = dict(zip((str(x) for x in ds["level"].values), (str(k) for k in ds["level_kind"].values)))
    components = {lv for lv, k in kinds.items() if k == "component"}
    assert "mp2/cc-pvtz" in components
    curves = {r["level"] for r in comparison_table(ds, reference=COMPOSITE).rows}
    assert curves == {"b3lyp/sto-3g"}
    curves_all = {r["level"] for r in comparison_table(ds, reference=COMPOSITE, include_components=True).rows}
    assert components <= curves_all and "b3lyp/sto-3g" in curves_all
