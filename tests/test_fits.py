"""Tests of interkit.analysis.fits and .potentials: model fits of E(R) and the long-range C6 estimate.

Synthetic curves are generated from known parameters with a fixed random seed; each
check names where its numbers come from.
"""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

from interkit.analysis import fits, potentials
from interkit.errors import ConvergenceError, InputError

# Water-dimer scale: De = 5.0 kcal/mol, R(O...O) = 2.90 A (Halkier et al., Theor. Chem.
# Acc. 97, 150 (1997)); a = 1.8 1/A is a chosen, realistic range parameter.
MORSE_TRUE = {"de": 5.0, "a": 1.8, "re": 2.9}
# Ar2 well depth 0.285 kcal/mol (Tang & Toennies potential, 2003, via REFERENCES.md);
# sigma = 3.35 A is chosen (Ar2 scale). Its 2^(1/6) sigma = 3.760 A lies next to the Ar2
# Re = 3.757 A by that choice, so agreement with Re would prove nothing and is not tested.
LJ_TRUE = {"eps": 0.285, "sigma": 3.35}


def _morse_data(noise=0.02, seed=11):
    rng = np.random.default_rng(seed)
    r = np.linspace(2.4, 6.0, 25)
    e = potentials.morse_energy(r, MORSE_TRUE["de"], MORSE_TRUE["a"], MORSE_TRUE["re"])
    return r, e + rng.normal(0.0, noise, r.size)


def _lj_data(noise=0.002, seed=12):
    rng = np.random.default_rng(seed)
    r = np.linspace(3.2, 8.0, 25)
    e = potentials.lj_energy(r, LJ_TRUE["eps"], LJ_TRUE["sigma"])
    return r, e + rng.normal(0.0, noise, r.size)


def _check(value, err, true, rel):
    assert abs(value - true) <= 3.0 * err, (value, err, true)
    assert abs(value - true) <= rel * abs(true), (value, true)


def test_morse_recovers_known_parameters():
    # source: synthetic Morse curve from MORSE_TRUE, Gaussian noise 0.02 kcal/mol, seed 11
    r, e = _morse_data()
    fit = fits.fit_curve(r, e, "morse")
    assert fit.model == "morse" and fit.n_points == 25
    _check(fit.de_kcal_per_mol, fit.de_err_kcal_per_mol, MORSE_TRUE["de"], 0.02)
    _check(fit.a_per_angstrom, fit.a_err_per_angstrom, MORSE_TRUE["a"], 0.02)
    _check(fit.re_angstrom, fit.re_err_angstrom, MORSE_TRUE["re"], 0.01)
    # the residual RMSE should be close to the noise level put in (0.02 kcal/mol)
    assert 0.01 < fit.rmse_kcal_per_mol < 0.03
    assert np.allclose(fit.residuals_kcal_per_mol, e - fit.energy(r))


def test_lennard_jones_recovers_ar2_scale_parameters():
    # source: synthetic LJ curve from LJ_TRUE (Ar2 scale, Tang & Toennies 2003), noise 0.002 kcal/mol
    r, e = _lj_data()
    fit = fits.fit_lennard_jones(r, e)
    _check(fit.epsilon_kcal_per_mol, fit.epsilon_err_kcal_per_mol, LJ_TRUE["eps"], 0.03)
    _check(fit.sigma_angstrom, fit.sigma_err_angstrom, LJ_TRUE["sigma"], 0.01)
    assert fit.r_min_angstrom == pytest.approx(2.0 ** (1.0 / 6.0) * fit.sigma_angstrom)
    # the generating curve's minimum is 2^(1/6) sigma_true (LJ algebra): recovered to 0.5 %
    assert fit.r_min_angstrom == pytest.approx(2.0 ** (1.0 / 6.0) * LJ_TRUE["sigma"], rel=0.005)
    assert fit.to_dict()["r_min_angstrom"] == pytest.approx(fit.r_min_angstrom)


def test_buckingham_tt_recovers_generated_parameters():
    # source: synthetic Buckingham-TT curve; A, b chosen; C6 = 64.3 hartree bohr^6 is the
    # Ar-Ar DOSD value (Kumar & Meath 1985, from memory) used only as a realistic scale.
    c6_true = 64.3 * potentials.HARTREE_BOHR6_TO_KCAL_PER_MOL_ANGSTROM6
    a_true, b_true = 1.0e5, 3.6
    rng = np.random.default_rng(13)
    r = np.linspace(3.2, 8.0, 25)
    e = potentials.buckingham_tt_energy(r, a_true, b_true, c6_true) + rng.normal(0.0, 2e-4, r.size)
    fit = fits.fit_curve(r, e, "buckingham-tt")
    _check(fit.a_kcal_per_mol, fit.a_err_kcal_per_mol, a_true, 0.05)
    _check(fit.b_per_angstrom, fit.b_err_per_angstrom, b_true, 0.01)
    _check(fit.c6_kcal_per_mol_angstrom6, fit.c6_err_kcal_per_mol_angstrom6, c6_true, 0.01)
    assert fit.c6_hartree_bohr6 == pytest.approx(64.3, rel=0.01)
    # model minimum matches a dense evaluation of the true curve
    grid = np.linspace(3.2, 5.0, 20001)
    true_vals = potentials.buckingham_tt_energy(grid, a_true, b_true, c6_true)
    assert fit.r_min_angstrom == pytest.approx(grid[np.argmin(true_vals)], abs=0.01)
    assert fit.well_depth_kcal_per_mol == pytest.approx(-true_vals.min(), rel=0.01)


def test_tang_toennies_f6_limits():
    # source: definition f6(x) = 1 - exp(-x) sum_{k<=6} x^k/k! (Tang & Toennies, JCP 80, 3726 (1984))
    assert potentials.tang_toennies_f6(0.0) == pytest.approx(0.0, abs=1e-15)
    assert potentials.tang_toennies_f6(60.0) == pytest.approx(1.0, abs=1e-12)
    # small x: f6 ~ x^7/7!
    assert potentials.tang_toennies_f6(0.01) == pytest.approx(0.01**7 / 5040.0, rel=1e-3)


def test_fit_parameters_follow_the_model_function_arguments():
    # reason: fitting, building the result and its energy() all take the parameter order from
    # the dataclass fields (value, then its uncertainty); they must be the model function's
    # arguments, in order, or a fit would silently swap parameters
    import inspect

    for cls in (potentials.MorseFit, potentials.LennardJonesFit, potentials.BuckinghamTTFit):
        pairs = cls.parameter_fields()
        assert [v for v, _ in pairs] == list(inspect.signature(cls.energy_function).parameters)[1:]
        assert [e for _, e in pairs] == [v.replace("_", "_err_", 1) for v, _ in pairs]
    r = np.linspace(3.0, 8.0, 12)
    e = potentials.morse_energy(r, MORSE_TRUE["de"], MORSE_TRUE["a"], MORSE_TRUE["re"])
    fit = fits.fit_curve(r, e, "morse")
    assert np.allclose(fit.energy(r), e, atol=1e-8)    # exact model curve: the fit reproduces it


def test_morse_fit_of_lj_curve_is_worse_than_lj_fit():
    # source: model discrimination on the synthetic LJ curve of LJ_TRUE
    r, e = _lj_data()
    lj = fits.fit_curve(r, e, "lj")
    morse = fits.fit_curve(r, e, "morse")
    assert morse.rmse_kcal_per_mol > 2.0 * lj.rmse_kcal_per_mol


def test_nan_points_are_skipped():
    # source: synthetic Morse curve; NaN points must not move the parameters
    r, e = _morse_data(noise=0.0)
    e[[3, 10, 20]] = np.nan
    fit = fits.fit_morse(r, e)
    assert fit.n_points == 22
    assert fit.re_angstrom == pytest.approx(MORSE_TRUE["re"], abs=1e-6)
    assert fit.de_kcal_per_mol == pytest.approx(MORSE_TRUE["de"], rel=1e-6)


@pytest.mark.parametrize(
    "distance, energy, model, field",
    [
        (np.linspace(3, 6, 6), np.full(6, np.nan), "morse", "energy"),
        (np.array([3.0, 3.5, 4.0]), np.array([-1.0, -2.0, -1.0]), "morse", "energy"),
        (np.array([3.0, 3.5]), np.array([-1.0, -2.0]), "lj", "energy"),
        (np.array([-3.0, 3.5, 4.0, 5.0, 6.0]), np.array([1.0, -2.0, -1.0, -0.5, -0.2]), "morse", "distance"),
        (np.linspace(3, 6, 6), np.zeros(5), "lj", "energy"),
        (np.linspace(3, 6, 6), np.zeros(6), "harmonic", "model"),
    ],
)
def test_bad_input_names_the_field(distance, energy, model, field):
    with pytest.raises(InputError, match=rf"^{field}:"):
        fits.fit_curve(distance, energy, model)


def test_failed_fit_raises_convergence_error_naming_model(monkeypatch):
    # source: a least-squares failure must surface as ConvergenceError naming the model
    def failing(*args, **kwargs):
        raise RuntimeError("Optimal parameters not found: maximum number of evaluations exceeded")

    monkeypatch.setattr(fits, "curve_fit", failing)
    r, e = _morse_data()
    with pytest.raises(ConvergenceError, match=r"^morse fit did not converge"):
        fits.fit_curve(r, e, "morse")


def test_c6_from_tail_recovers_c6_and_c8():
    # source: synthetic tail -C6/R^6 - C8/R^8 with C6 = 64.3 hartree bohr^6 (Ar-Ar scale,
    # Kumar & Meath 1985, memory) and a chosen C8 = 1500 hartree bohr^8
    c6 = 64.3 * potentials.HARTREE_BOHR6_TO_KCAL_PER_MOL_ANGSTROM6
    c8 = 1500.0 * potentials.HARTREE_BOHR8_TO_KCAL_PER_MOL_ANGSTROM8
    rng = np.random.default_rng(21)
    r = np.linspace(3.0, 12.0, 19)
    e = -c6 / r**6 - c8 / r**8 + rng.normal(0.0, 1e-6, r.size)
    tail = fits.c6_from_tail(r, e, r_min_angstrom=6.0)
    assert tail.with_c8 and tail.n_points == int((r > 6.0).sum())
    assert tail.c6_hartree_bohr6 == pytest.approx(64.3, rel=0.02)
    assert abs(tail.c6_kcal_per_mol_angstrom6 - c6) <= 3.0 * tail.c6_err_kcal_per_mol_angstrom6
    assert tail.c6_err_hartree_bohr6 == pytest.approx(
        tail.c6_err_kcal_per_mol_angstrom6 / potentials.HARTREE_BOHR6_TO_KCAL_PER_MOL_ANGSTROM6)
    # C8 makes the tail steeper than -6
    assert tail.log_log_slope < -6.0


def test_c6_from_tail_pure_r6_slope_and_units():
    # source: pure -C6/R^6 tail; log-log slope must be -6 +- 0.2 (the R^-6 law)
    c6 = 800.0  # kcal/mol A^6, chosen
    rng = np.random.default_rng(22)
    r = np.linspace(5.0, 10.0, 11)
    e = -c6 / r**6 * (1.0 + rng.normal(0.0, 0.005, r.size))
    tail = fits.c6_from_tail(r, e, n_tail=3)
    assert not tail.with_c8 and tail.n_points == 3 and tail.r_from_angstrom == pytest.approx(9.0)
    assert tail.log_log_slope == pytest.approx(-6.0, abs=0.2)
    assert tail.c6_kcal_per_mol_angstrom6 == pytest.approx(c6, rel=0.02)
    # unit conversion by hand: 1 hartree bohr^6 = 627.5094740631 kcal/mol x
    # (0.529177210903 A)^6 = 627.5094740631 x 0.02195871 = 13.77930 kcal/mol A^6 (CODATA 2018)
    assert potentials.HARTREE_BOHR6_TO_KCAL_PER_MOL_ANGSTROM6 == pytest.approx(13.77930, rel=1e-5)
    assert tail.c6_hartree_bohr6 == pytest.approx(tail.c6_kcal_per_mol_angstrom6 / 13.77930, rel=1e-5)


def test_c6_from_tail_bad_input():
    r = np.linspace(5.0, 10.0, 6)
    e = -800.0 / r**6
    with pytest.raises(InputError, match=r"^energy:"):
        fits.c6_from_tail(r, e, r_min_angstrom=9.5)
    with pytest.raises(InputError, match=r"^with_c8:"):
        fits.c6_from_tail(r, e, n_tail=3, with_c8=True)
    with pytest.raises(InputError, match=r"^n_tail:"):
        fits.c6_from_tail(r, e, n_tail=1)
    with pytest.raises(InputError, match=r"^energy:"):
        fits.c6_from_tail(r, np.full(6, np.nan))


def test_fit_table_over_levels():
    # source: two synthetic levels (LJ_TRUE and MORSE_TRUE scaled onto the same grid) and one
    # failed level (all NaN)
    r = np.linspace(3.2, 8.0, 25)
    lj = potentials.lj_energy(r, LJ_TRUE["eps"], LJ_TRUE["sigma"])
    morse = potentials.morse_energy(r, 0.3, 1.5, 3.8)
    data = np.vstack([lj, morse, np.full(r.size, np.nan)])
    ds = xr.Dataset(
        {"e_int": (("level", "distance"), data, {"units": "kcal/mol"})},
        coords={"level": ["lj-like", "morse-like", "broken"], "distance": ("distance", r, {"units": "angstrom"})},
    )
    rows = fits.fit_table(ds, models=("morse", "lj"))
    assert len(rows) == 6
    by = {(row["level"], row["model"]): row for row in rows}
    assert by[("lj-like", "lj")]["status"] == "ok"
    assert by[("lj-like", "lj")]["rmse_kcal_per_mol"] < by[("lj-like", "morse")]["rmse_kcal_per_mol"]
    assert by[("morse-like", "morse")]["rmse_kcal_per_mol"] < by[("morse-like", "lj")]["rmse_kcal_per_mol"]
    assert by[("morse-like", "morse")]["re_angstrom"] == pytest.approx(3.8, abs=1e-4)
    assert by[("lj-like", "lj")]["sigma_angstrom"] == pytest.approx(LJ_TRUE["sigma"], abs=1e-4)
    assert "finite point" in by[("broken", "lj")]["status"]
    assert np.isnan(by[("broken", "lj")]["rmse_kcal_per_mol"])
    with pytest.raises(InputError, match=r"^models:"):
        fits.fit_table(ds, models=("quartic",))
    ds["e_int"].attrs["units"] = "eV"
    with pytest.raises(InputError, match="units"):
        fits.fit_table(ds)
