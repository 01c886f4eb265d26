"""One reference rule and one statistics table for the report, ``interkit compare`` and the
comparison widget (issue 13, item 4).

Sources: hand arithmetic on synthetic curves (stated beside each check); for the scan, the
report and ``compare`` are parsed and must agree with each other and with the table.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
import xarray as xr
from conftest import hf_dimer, require

import interkit as ik

R = np.array([2.5, 3.0, 3.5, 4.0, 5.0, 6.0])
REF = np.array([4.0, -2.0, -3.0, -2.0, -0.5, -0.05])
ERR = np.array([1.0, -0.5, 0.2, 0.1, -0.1, 0.02])


def _stats(**kw):
    from interkit.analysis.error_statistics import curve_statistics

    return curve_statistics(R, REF + ERR, REF, **kw)


def test_all_points_hand_computed():
    s = _stats()
    # |err| = 1, .5, .2, .1, .1, .02 -> sum 1.92; err sum 0.72; err^2 sum 1.3104 (hand arithmetic)
    assert s["mae_kcal_per_mol"] == pytest.approx(1.92 / 6)
    assert s["mean_signed_error_kcal_per_mol"] == pytest.approx(0.72 / 6)
    assert s["rmse_kcal_per_mol"] == pytest.approx(math.sqrt(1.3104 / 6))
    assert s["max_abs_error_kcal_per_mol"] == pytest.approx(1.0) and s["max_abs_error_at_angstrom"] == 2.5
    assert s["n_compared"] == 6


def test_bound_region_leaves_out_the_wall():
    s = _stats(region="bound")
    # reference < 0 at 3.0 ... 6.0: errors -.5, .2, .1, -.1, .02 (hand arithmetic)
    assert s["n_compared"] == 5
    assert s["mae_kcal_per_mol"] == pytest.approx(0.92 / 5)
    assert s["mean_signed_error_kcal_per_mol"] == pytest.approx(-0.28 / 5)
    assert s["rmse_kcal_per_mol"] == pytest.approx(math.sqrt(0.3104 / 5))
    assert s["max_abs_error_kcal_per_mol"] == pytest.approx(0.5) and s["max_abs_error_at_angstrom"] == 3.0


def test_window_around_the_reference_minimum():
    # the reference minimum lies between 3.0 and 3.5 Å (-2, -3, -2 at 3.0, 3.5, 4.0; the steep
    # wall pulls the spline's minimum inward, to about 3.35 Å), so ±0.7 Å holds 3.0, 3.5 and
    # 4.0 Å and neither 2.5 nor 5.0 Å: errors -.5, .2, .1 (hand arithmetic)
    s = _stats(region="window", window_angstrom=0.7)
    assert s["n_compared"] == 3
    assert s["mae_kcal_per_mol"] == pytest.approx(0.8 / 3)
    assert s["mean_signed_error_kcal_per_mol"] == pytest.approx(-0.2 / 3)
    assert s["rmse_kcal_per_mol"] == pytest.approx(math.sqrt(0.1))
    with pytest.raises(ik.InputError, match="window_angstrom"):
        _stats(region="window", window_angstrom=-1.0)
    with pytest.raises(ik.InputError, match="region: 'wall'"):
        _stats(region="wall")


def test_relative_errors_leave_out_near_zero_references():
    s = _stats(relative=True)
    # per cent of |ref|: 25, -25, 6.667, 5, -20; the point at 6 Å (|ref| = 0.05 < 0.1) is left out
    per_cent = np.array([25.0, -25.0, 20 / 3, 5.0, -20.0])
    assert s["n_near_zero"] == 1 and s["n_compared"] == 5
    assert s["mae_percent"] == pytest.approx(np.abs(per_cent).mean())
    assert s["mean_signed_error_percent"] == pytest.approx(per_cent.mean())
    assert s["rmse_percent"] == pytest.approx(np.sqrt((per_cent ** 2).mean()))
    assert s["max_abs_error_percent"] == pytest.approx(25.0)
    assert "mae_kcal_per_mol" not in s


def test_minimum_columns_of_a_shifted_curve():
    from interkit.analysis.error_statistics import curve_statistics
    from interkit.analysis.minima import find_minimum

    # a curve shifted by +0.3 kcal/mol: same minimum position, well 0.3 shallower, error 0.3
    # at the reference minimum (a spline of shifted data is the shifted spline)
    s = curve_statistics(R, REF + 0.3, REF)
    assert s["minimum_shift_angstrom"] == pytest.approx(0.0, abs=1e-9)
    assert s["well_depth_error_kcal_per_mol"] == pytest.approx(-0.3)
    assert s["error_at_reference_minimum_kcal_per_mol"] == pytest.approx(0.3)
    depth = find_minimum(R, REF).well_depth_kcal_per_mol
    rel = curve_statistics(R, REF + 0.3, REF, relative=True)
    assert rel["well_depth_error_percent"] == pytest.approx(-30.0 / depth)
    assert rel["error_at_reference_minimum_percent"] == pytest.approx(30.0 / depth)


def test_columns_follow_the_column_convention():
    from interkit.analysis.error_statistics import statistics_columns
    from interkit.data.columns import is_conventional

    for relative in (False, True):
        names = [k for k, _, _ in statistics_columns(relative)]
        assert all(is_conventional(n) for n in names)
        suffix = "_percent" if relative else "_kcal_per_mol"
        assert all(n.endswith(suffix) for n in names if n != "minimum_shift_angstrom")
    headers = [h for _, h, _ in statistics_columns()]
    assert headers == ["MAE", "mean signed error", "RMSE", "largest error", "error at ref. minimum",
                       "ΔR_min", "ΔDe"]


def test_default_reference_is_the_one_rule():
    from interkit.analysis.comparison import comparison_table

    data = np.vstack([REF + ERR, REF, REF - 0.1])
    ds = xr.Dataset({"e_int": (("level", "distance"), data, {"units": "kcal/mol"})},
                    coords={"level": ["b3lyp/def2-svp", "mp2/def2-svp", "hf/def2-svp"],
                            "distance": ("distance", R, {"units": "angstrom"})})
    table = comparison_table(ds)
    assert table.reference == "mp2/def2-svp" and table.chosen_by == "default rule"
    assert [row["curve"] for row in table.rows] == ["hf/def2-svp", "b3lyp/def2-svp"]   # by RMSE: 0.1 first
    assert table.rows[1]["rmse_kcal_per_mol"] == pytest.approx(math.sqrt(1.3104 / 6))


# ---------------------------------------------------------------------- report = compare
@pytest.fixture(scope="module")
def two_level_scan(tmp_path_factory):
    spec = ik.ScanSpec(dimer=hf_dimer(), coordinate=ik.AtomPair(0, 2), factors=[0.9, 1.0, 1.1, 1.3, 1.6],
                       levels=["hf/sto-3g", "b3lyp/sto-3g"])
    path = tmp_path_factory.mktemp("stats") / "scan.nc"
    ik.save_scan(ik.run_scan(spec, executor="serial", progress=False, cache=None), path)
    return path


def _compare_rows(text: str) -> tuple[str, dict[str, list[str]]]:
    lines = text.splitlines()
    reference = re.match(r"reference: (\S+) \(", lines[0]).group(1)
    rows = {}
    for line in lines:
        parts = line.split()
        if parts and parts[0].isdigit() and len(parts) >= 9:
            rows[parts[1]] = parts[2:9]
    return reference, rows


def _report_rows(text: str) -> tuple[str, dict[str, list[str]]]:
    reference = re.search(r"Reference: <b>([^<]+)</b>", text).group(1)
    table = re.search(r'<table class="statistics">(.*?)</table>', text, re.S).group(1)
    rows = {}
    for tr in re.findall(r"<tr>(.*?)</tr>", table, re.S)[1:]:
        cells = re.findall(r"<td[^>]*>(.*?)</td>", tr)
        rows[cells[1]] = cells[2:9]
    return reference, rows


@pytest.mark.parametrize("options", [[], ["--region", "bound"], ["--region", "window", "--window", "0.4"],
                                     ["--relative"]])
def test_report_and_compare_agree(two_level_scan, tmp_path, capsys, options):
    from interkit.analysis.comparison import comparison_table
    from interkit.cli.main import main

    assert main(["compare", str(two_level_scan), *options]) == 0
    ref_cli, rows_cli = _compare_rows(capsys.readouterr().out)
    html = tmp_path / "r.html"
    assert main(["report", str(two_level_scan), "-o", str(html), *options]) == 0
    capsys.readouterr()
    ref_html, rows_html = _report_rows(html.read_text(encoding="utf-8"))
    # the one rule: no wavefunction level in the scan, so the first curve is the reference
    # (both print levels in the trade's spelling; the Dataset keeps its lowercase labels)
    assert ref_cli == ref_html == "HF/STO-3G"
    assert rows_cli == rows_html and list(rows_cli) == ["B3LYP/STO-3G"]
    # and the numbers are those of the table computed directly from the file, by hand for the MAE
    kw = {"region": options[1]} if options[:1] == ["--region"] else {}
    if "--window" in options:
        kw["window_angstrom"] = 0.4
    ds = ik.open_scan(two_level_scan)
    table = comparison_table(ds, relative="--relative" in options, **kw)
    assert table.reference == "hf/sto-3g"
    assert rows_cli["B3LYP/STO-3G"] == [f"{table.rows[0][k]:.3f}" if np.isfinite(table.rows[0][k]) else "–"
                                        for k, _, _ in table.columns]
    if not options:
        err = ds["e_int"].sel(level="b3lyp/sto-3g").values - ds["e_int"].sel(level="hf/sto-3g").values
        assert float(rows_cli["B3LYP/STO-3G"][0]) == pytest.approx(np.abs(err).mean(), abs=5e-4)
        assert float(rows_cli["B3LYP/STO-3G"][1]) == pytest.approx(err.mean(), abs=5e-4)


def test_widget_uses_the_same_table(two_level_scan, tmp_path):
    require("ipywidgets", "the notebook layer needs ipywidgets (pip install -e .[test])")
    from interkit.analysis.comparison import comparison_table
    from interkit.widgets.comparison import CorrectionComparison

    ds = ik.open_scan(two_level_scan)
    widget = CorrectionComparison(ds, export_dir=tmp_path)
    assert widget.reference_select.value == comparison_table(ds).reference == "hf/sto-3g"
    widget.region_select.value = "bound"
    expected = comparison_table(ds, region="bound")
    assert widget.rows[0]["rmse_kcal_per_mol"] == expected.rows[0]["rmse_kcal_per_mol"]
    assert "bound region" in widget.table.value
    text = (tmp_path / "ranking.csv").read_text() if widget.export() else ""
    assert "mean_signed_error_kcal_per_mol" in text.splitlines()[1]
