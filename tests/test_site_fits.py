"""Site-site fits: recovery of known parameters from synthetic energies, uncertainties
on noisy data, the Dataset path, exports and the plot; C6 of the argon dimer.

Synthetic energies are generated here from the module's own pair potentials with
chosen parameters (LJ 12-6 and Buckingham with Tang–Toennies damping, J. Chem. Phys.
80, 3726 (1984)) at S22 water-dimer geometries (ase.data.s22, Jurečka et al., PCCP 8,
1985 (2006)) with B moved and turned: the fit must give those parameters back.
"""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest
from conftest import s22_dimer

import interkit as ik
from interkit.analysis import site_fits as sf
from interkit.model.rigid import moved_b

PAIRS = [("H", "H"), ("H", "O"), ("O", "O")]
LJ = {"epsilon": [0.02, 0.05, 0.15], "sigma": [2.2, 2.6, 3.15]}
TT = {"A": [2e3, 1e4, 5e4], "b": [4.0, 3.8, 3.6], "C6": [20.0, 100.0, 400.0], "C8": [50.0, 300.0, 2000.0]}


def _geometries():
    d = s22_dimer("Water_dimer")
    oo = d.coordinates[3] - d.coordinates[0]
    u = oo / np.linalg.norm(oo)
    dimers, idx = [], []
    for k, w in enumerate([(0, 0, 0), (0, 0, 0.5), (0.4, 0, 0), (0, 0.6, 0.2)]):
        base = moved_b(d, rotation=w)
        for s in np.linspace(-0.3, 2.0, 12):
            dimers.append(moved_b(base, shift=s * u))
            idx.append(k)
    return dimers, idx


def _energies(dimers, model, params, c8=False, charges=None):
    data = sf._collect([(d, 0.0) for d in dimers], [0] * len(dimers), sf._types_of(dimers, None),
                       sf._charges_of(dimers, charges))
    x = np.concatenate([[params[name][PAIRS.index(p)] for p in data.pairs] for name in sf._names(model, c8)])
    return sf._model(model, c8, data, x) + data.coulomb


def _check(fit, params, rel=1e-6):
    for name, vals in params.items():
        for pair, true in zip(PAIRS, vals):
            got, _ = fit.parameter(name, pair)
            assert got == pytest.approx(true, rel=rel), (name, pair)


def test_lj_recovers_synthetic_parameters():
    dimers, idx = _geometries()
    fit = sf.fit_site_site_points(dimers, _energies(dimers, "lj", LJ), "lj", scan_index=idx)
    _check(fit, LJ)
    assert fit.rmse_kcal_per_mol["all"] < 1e-9


def test_buckingham_tt_recovers_synthetic_parameters():
    dimers, idx = _geometries()
    tt = {k: TT[k] for k in ("A", "b", "C6")}
    fit = sf.fit_site_site_points(dimers, _energies(dimers, "buckingham-tt", tt), "buckingham-tt", scan_index=idx)
    _check(fit, tt)


def test_buckingham_tt_with_c8_and_fixed_charges_recovers_synthetic_parameters():
    # TIP3P-like charges (O -0.834 e, H +0.417 e; common practice) held fixed
    dimers, idx = _geometries()
    charges = {"O": -0.834, "H": 0.417}
    e = _energies(dimers, "buckingham-tt", TT, c8=True, charges=charges)
    fit = sf.fit_site_site_points(dimers, e, "buckingham-tt", c8=True, charges=charges, scan_index=idx)
    _check(fit, TT)
    assert fit.charges_e == {"O": -0.834, "H": 0.417}


def test_uncertainties_cover_the_truth_on_noisy_data():
    # Gaussian noise of 0.002 kcal/mol (fixed seed): each parameter within 4 standard
    # uncertainties of the truth, and the uncertainties are not vanishing (common practice)
    dimers, idx = _geometries()
    e = _energies(dimers, "lj", LJ) + np.random.default_rng(7).normal(0.0, 0.002, len(dimers))
    fit = sf.fit_site_site_points(dimers, e, "lj", scan_index=idx)
    for name, vals in LJ.items():
        for pair, true in zip(PAIRS, vals):
            got, err = fit.parameter(name, pair)
            assert err > 0 and abs(got - true) < 4 * err, (name, pair, got, err)
    # over the bound points (weight 1) the misfit is the noise
    assert 0.001 < fit.rmse_bound_kcal_per_mol["all"] < 0.003


def test_fit_from_a_scan_dataset_exports_and_plot(tmp_path):
    # a real (cheap) scan supplies the geometries; its energies are replaced by LJ energies
    # of a single site type, so the fit must give those two parameters back
    d = s22_dimer("Water_dimer")
    spec = ik.ScanSpec(dimer=d, coordinate=ik.AtomPair(0, 3), factors=[0.9, 1.0, 1.1, 1.2, 1.4, 1.7],
                       levels=["hf/sto-3g"])
    ds = ik.run_scan(spec, executor="serial", cache=None, progress=False)
    types = {"O": "X", "H": "X"}
    geoms = [d.with_coordinates(c) for c in ds["coordinates"].values]
    data = sf._collect([(g, 0.0) for g in geoms], [0] * len(geoms), sf._types_of(geoms, types), None)
    ds["e_int"].values[0] = sf._model("lj", False, data, np.array([0.1, 2.9]))
    fit = sf.fit_site_site({"water": ds}, "lj", types=types)
    assert fit.parameter("epsilon", ("X", "X"))[0] == pytest.approx(0.1, rel=1e-6)
    assert fit.parameter("sigma", ("X", "X"))[0] == pytest.approx(2.9, rel=1e-6)
    fit.to_csv(tmp_path / "p.csv")
    fit.to_json(tmp_path / "p.json")
    rows = list(csv.DictReader(open(tmp_path / "p.csv")))
    assert [(r["parameter"], r["unit"]) for r in rows] == [("epsilon", "kcal/mol"), ("sigma", "angstrom")]
    assert float(rows[1]["value"]) == pytest.approx(2.9, rel=1e-6)
    back = json.load(open(tmp_path / "p.json"))
    assert back["model"] == "lj" and back["weights"] == sf.WEIGHT_FORMULA and back["energy_unit"] == "kcal/mol"
    import matplotlib

    matplotlib.use("Agg")
    from interkit.plot.site_fits import plot_site_fit

    ax = plot_site_fit(fit, {"water": ds}, types=types)
    model_line = ax.get_lines()[1]
    assert len(ax.get_lines()) >= 2 and len(model_line.get_xdata()) == 200
    # the model line passes through the (synthetic) computed points
    r = ds["distance"].values
    np.testing.assert_allclose(np.interp(r, model_line.get_xdata(), model_line.get_ydata()),
                               ds["e_int"].values[0], atol=0.02)


def test_bad_input_is_refused_with_the_field_named():
    dimers, idx = _geometries()
    e = _energies(dimers, "lj", LJ)
    with pytest.raises(ik.InputError, match="model"):
        sf.fit_site_site_points(dimers, e, "morse")
    with pytest.raises(ik.InputError, match="charges"):
        sf.fit_site_site_points(dimers, e, "lj", charges={"O": -0.8, "H": 0.3})
    with pytest.raises(ik.InputError, match="energies"):
        sf.fit_site_site_points(dimers[:5], e[:5], "lj")


@pytest.mark.slow
def test_argon_dimer_c6_from_a_buckingham_tt_fit(tmp_path):
    """C6 of Ar2 at B3LYP-D3(BJ)/aug-cc-pVDZ with counterpoise.

    Reference: Ar–Ar C6 = 64.3 au (Kumar & Meath 1985, dipole oscillator strength
    distributions; recalled from memory, REFERENCES.md, ±15 %). At this level the
    long-range attraction is the D3 term, whose C6 coefficients Grimme et al. (J. Chem.
    Phys. 132, 154104 (2010)) built from TD-DFT polarisabilities, a few per cent from
    reference values (memory). A Buckingham-TT fit with a damped C8 term, so C8 is not
    folded into C6, over 3.3-8 Å; allowed: 25 % (15 % for the reference recalled from
    memory, 10 % for the level's C6 and the fit's separation of C6 from C8).
    """
    d = ik.Dimer.from_atoms(["Ar", "Ar"], [[0, 0, 0], [0, 0, 3.8]], fragment_a=[0], name="Ar2")
    spec = ik.ScanSpec(dimer=d, coordinate=ik.AtomPair(0, 1),
                       distances=[3.3, 3.5, 3.7, 3.9, 4.2, 4.6, 5.0, 5.5, 6.0, 7.0, 8.0],
                       levels=["b3lyp-d3bj/aug-cc-pvdz"])
    ds = ik.run_scan(spec, executor="serial", cache=tmp_path / "store", progress=False)
    fit = sf.fit_site_site(ds, "buckingham-tt", c8=True)
    assert fit.c6_hartree_bohr6(("Ar", "Ar")) == pytest.approx(64.3, rel=0.25)


def test_fit_takes_an_orientation_grid(tmp_path):
    """Every cell of an orientation grid is a fitting point (the grid's flat view): LJ
    energies of one site type put on a 2 x 2 angle x distance grid come back exactly."""
    d = s22_dimer("Water_dimer")
    grid = ik.OrientationGrid(d, [ik.Rotation((0.2, -0.4, 0.9), [0.0, 25.0]), ik.Separation([2.9, 3.3])])
    ds = ik.run_orientation_scan(grid, executor="serial", cache=None, progress=False, levels=["hf/sto-3g"])
    types = {"O": "X", "H": "X"}
    from interkit.data.grid import flat_view

    flat = flat_view(ds)
    geoms = [d.with_coordinates(c) for c in flat["coordinates"].values]
    data = sf._collect([(g, 0.0) for g in geoms], [0] * len(geoms), sf._types_of(geoms, types), None)
    e = sf._model("lj", False, data, np.array([0.1, 2.9]))
    ds["e_int"].values[0] = e.reshape(ds["e_int"].values[0].shape)
    fit = sf.fit_site_site({"map": ds}, "lj", types=types)
    assert fit.parameter("epsilon", ("X", "X"))[0] == pytest.approx(0.1, rel=1e-6)
    assert fit.parameter("sigma", ("X", "X"))[0] == pytest.approx(2.9, rel=1e-6)
