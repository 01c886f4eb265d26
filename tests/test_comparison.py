"""Tests of interkit.analysis.comparison: method-vs-reference statistics of E(R) curves."""

from __future__ import annotations

import math

import numpy as np
import pytest
import xarray as xr

from interkit.analysis.comparison import ReferenceCurve, curve_errors, ranking_table, reference_from_csv
from interkit.analysis.potentials import morse_energy
from interkit.errors import InputError

# Water-dimer scale: De = 5.0 kcal/mol, R(O...O) = 2.90 A (Halkier et al., Theor. Chem.
# Acc. 97, 150 (1997)); a = 1.8 1/A chosen.
GRID = np.linspace(2.5, 6.0, 15)


def _ref(r):
    return morse_energy(r, 5.0, 1.8, 2.9)


def test_statistics_match_hand_computed_example():
    # source: hand arithmetic
    r = [3.0, 3.5, 4.0, 4.5, 5.0]
    method = [-1.0, -2.5, -1.5, -0.5, np.nan]
    reference = [-1.5, -2.0, -1.0, -0.5, -0.2]
    # errors (method - reference) on the 4 finite pairs: +0.5, -0.5, -0.5, 0.0
    c = curve_errors(r, method, reference)
    assert c.n_compared == 4 and c.n_skipped == 1
    assert c.mae_kcal_per_mol == pytest.approx(0.375)  # (0.5+0.5+0.5+0)/4
    assert c.rmse_kcal_per_mol == pytest.approx(0.4330127019)  # sqrt((0.25*3+0)/4) = sqrt(0.1875)
    assert c.max_abs_error_kcal_per_mol == pytest.approx(0.5)
    assert c.max_abs_error_at_angstrom == pytest.approx(3.0)  # first of the three 0.5's
    assert c.mean_signed_error_kcal_per_mol == pytest.approx(-0.125)  # (0.5-0.5-0.5+0)/4
    assert c.reference_lowest_point_angstrom == pytest.approx(3.5)  # reference -2.0 is lowest
    assert c.error_at_reference_lowest_point_kcal_per_mol == pytest.approx(-0.5)  # -2.5 - (-2.0)


def test_constant_offset_and_shifted_minimum():
    # source: analytic Morse curves. A constant +0.3 kcal/mol offset gives 0.3 everywhere,
    # including at the interpolated reference minimum, and a 0.3 kcal/mol shallower well.
    r = np.linspace(2.5, 6.0, 36)
    ref = _ref(r)
    c = curve_errors(r, ref + 0.3, ref)
    assert c.rmse_kcal_per_mol == pytest.approx(0.3) and c.mae_kcal_per_mol == pytest.approx(0.3)
    assert c.error_at_reference_minimum_kcal_per_mol == pytest.approx(0.3, abs=1e-9)
    assert c.reference_minimum_angstrom == pytest.approx(2.9, abs=0.01)
    assert c.well_depth_error_kcal_per_mol == pytest.approx(-0.3, abs=1e-9)
    assert c.minimum_shift_angstrom == pytest.approx(0.0, abs=1e-9)
    # same well moved out by 0.1 A: minimum shift +0.1 A, same depth (spline error ~ 0.01)
    shifted = morse_energy(r, 5.0, 1.8, 3.0)
    c2 = curve_errors(r, shifted, ref)
    assert c2.minimum_shift_angstrom == pytest.approx(0.1, abs=0.01)
    assert c2.well_depth_error_kcal_per_mol == pytest.approx(0.0, abs=0.05)


@pytest.mark.parametrize(
    "distance, energy, reference, field",
    [
        (GRID, np.full(GRID.size, np.nan), _ref(GRID), "energy"),
        (GRID, _ref(GRID), _ref(GRID)[:-1], "reference"),
        (GRID, _ref(GRID)[:-2], _ref(GRID), "energy"),
        (-GRID, _ref(GRID), _ref(GRID), "distance"),
    ],
)
def test_bad_input_names_the_field(distance, energy, reference, field):
    with pytest.raises(InputError, match=rf"^{field}:"):
        curve_errors(distance, energy, reference)


def _write_csv(path, r, e, header="distance_angstrom,e_int_kcal_per_mol"):
    lines = [header] + [f"{x:.6f},{y:.10f}" for x, y in zip(r, e)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def test_reference_from_csv_interpolates_inside_range_only(tmp_path):
    # source: Morse curve written to CSV on a 0.1 A grid from 2.6 to 5.0 A
    r_ref = np.linspace(2.6, 5.0, 25)
    path = _write_csv(tmp_path / "ref.csv", r_ref, _ref(r_ref))
    curve = reference_from_csv(path)
    assert isinstance(curve, ReferenceCurve)
    on = curve.on(GRID)
    inside = (GRID >= 2.6 - 1e-9) & (GRID <= 5.0 + 1e-9)
    assert np.all(np.isnan(on[~inside]))  # never extrapolated
    assert np.all(np.isfinite(on[inside]))
    # cubic spline on a 0.1 A grid: interpolation error well under 0.02 kcal/mol
    assert np.max(np.abs(on[inside] - _ref(GRID[inside]))) < 0.02


@pytest.mark.parametrize(
    "text, match",
    [
        ("distance_angstrom,energy\n3.0,-1.0\n3.5,-2.0\n", "e_int_kcal_per_mol"),
        ("distance_angstrom,e_int_kcal_per_mol\n3.0,-1.0\n3.5,abc\n", r"line 3: column 'e_int_kcal_per_mol'"),
        ("distance_angstrom,e_int_kcal_per_mol\n3.0,-1.0\n,-2.0\n", r"line 3: column 'distance_angstrom'"),
        ("distance_angstrom,e_int_kcal_per_mol\n3.0,-1.0\n-3.5,-2.0\n", r"line 3: column 'distance_angstrom'"),
        ("distance_angstrom,e_int_kcal_per_mol\n3.0,-1.0\n", "e_int_kcal_per_mol"),
        ("", "no header"),
    ],
)
def test_malformed_csv(tmp_path, text, match):
    path = tmp_path / "bad.csv"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(InputError, match=match):
        reference_from_csv(path)


def test_missing_csv_file(tmp_path):
    with pytest.raises(InputError, match="cannot be read"):
        reference_from_csv(tmp_path / "absent.csv")


def _scan():
    ref = _ref(GRID)
    data = np.vstack([
        ref,                 # "reference": the reference level itself
        ref + 0.2,           # "offset": RMSE exactly 0.2
        ref - 0.05,          # "close": RMSE exactly 0.05
        1.5 * ref,           # "scaled": RMSE = 0.5 * rms(ref)
    ])
    data[1, 4] = np.nan      # one failed point in "offset"
    return xr.Dataset(
        {"e_int": (("level", "distance"), data, {"units": "kcal/mol"})},
        coords={"level": ["reference", "offset", "close", "scaled"],
                "distance": ("distance", GRID, {"units": "angstrom"})},
    )


def test_ranking_against_reference_level():
    # source: constructed levels with known RMSEs (0.05, 0.2, 0.5 * rms(ref))
    ds = _scan()
    rows = ranking_table(ds, reference_level="reference")
    assert [row["level"] for row in rows] == ["close", "offset", "scaled"]
    assert [row["rank"] for row in rows] == [1, 2, 3]
    assert rows[0]["rmse_kcal_per_mol"] == pytest.approx(0.05)
    assert rows[1]["rmse_kcal_per_mol"] == pytest.approx(0.2)
    assert rows[1]["n_skipped"] == 1
    rms_ref = math.sqrt(np.mean(_ref(GRID) ** 2))
    assert rows[2]["rmse_kcal_per_mol"] == pytest.approx(0.5 * rms_ref)
    with pytest.raises(InputError, match="^reference_level:"):
        ranking_table(ds, reference_level="ccsd(t)")
    with pytest.raises(InputError, match="^reference:"):
        ranking_table(ds)


def test_ranking_against_external_csv(tmp_path):
    # source: the reference curve written to CSV over 2.6-5.0 A only; scan points outside
    # that range are skipped, and the reference level now also ranks (RMSE ~ spline error)
    ds = _scan()
    r_ref = np.linspace(2.6, 5.0, 25)
    curve = reference_from_csv(_write_csv(tmp_path / "ref.csv", r_ref, _ref(r_ref)))
    rows = ranking_table(ds, reference=curve)
    assert [row["level"] for row in rows] == ["reference", "close", "offset", "scaled"]
    assert rows[0]["rmse_kcal_per_mol"] < 0.02
    assert rows[1]["rmse_kcal_per_mol"] == pytest.approx(0.05, abs=0.02)
    n_outside = int(np.sum((GRID < 2.6 - 1e-9) | (GRID > 5.0 + 1e-9)))
    assert rows[1]["n_skipped"] == n_outside
    # a plain array on the scan's distances works too
    rows2 = ranking_table(ds, reference=_ref(GRID))
    assert rows2[0]["level"] == "reference" and rows2[0]["rmse_kcal_per_mol"] == pytest.approx(0.0)


def test_ranking_with_dispersion_dimension():
    # source: constructed; each (level, dispersion) pair ranked, reference level excluded
    ref = _ref(GRID)
    data = np.stack([
        np.stack([ref, np.full(GRID.size, np.nan)]),   # reference: only "none" computed
        np.stack([ref + 0.4, ref + 0.1]),              # dft: none 0.4, d3bj 0.1
    ])
    ds = xr.Dataset(
        {"e_int": (("level", "dispersion", "distance"), data, {"units": "kcal/mol"})},
        coords={"level": ["reference", "dft"], "dispersion": ["none", "d3bj"],
                "distance": ("distance", GRID, {"units": "angstrom"})},
    )
    rows = ranking_table(ds, reference_level="reference")
    assert [(row["level"], row["dispersion"]) for row in rows] == [("dft", "d3bj"), ("dft", "none")]
    assert rows[0]["rmse_kcal_per_mol"] == pytest.approx(0.1)
    assert rows[1]["rmse_kcal_per_mol"] == pytest.approx(0.4)
