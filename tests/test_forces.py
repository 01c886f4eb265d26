"""Counterpoise-corrected forces: analytic gradients against central finite differences,
translational and rotational invariance, the zero of the force at the energy minimum, and
the Hellmann–Feynman (electrostatic) split against the basis-set limit.

Geometries: S22 dimers from ase.data.s22 (Jurečka et al., PCCP 8, 1985 (2006)).
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import s22_dimer

import interkit as ik
import interkit.analysis.minima
import interkit.run.plan
from interkit.model.job import NUMERICAL_FORCE_STEP_ANGSTROM
from interkit.units import BOHR_TO_ANGSTROM, HARTREE_TO_KCAL_PER_MOL

#: 1 hartree/bohr in kcal/mol/angstrom
EH_PER_BOHR = HARTREE_TO_KCAL_PER_MOL / BOHR_TO_ANGSTROM
#: required agreement of analytic and finite-difference derivatives (the issue's bound)
TOLERANCE = 1e-6 * EH_PER_BOHR
#: central-difference step, angstrom (truncation error ~ STEP^2, well below TOLERANCE)
STEP = 4e-4
CONV_TOL = 1e-11


def _scan(dimer, level, coordinate=None, forces=True, **grid):
    coordinate = coordinate or ik.CentreOfMass()
    if not grid:
        grid = {"distances": [coordinate.value(dimer)]}
    spec = ik.ScanSpec(dimer=dimer, coordinate=coordinate, levels=[level], forces=forces, scf_threshold_hartree=CONV_TOL,
                       **grid)
    ds = ik.run_scan(spec, executor="serial", progress=False)
    assert (ds["status"] != "failed").all(), ds["status_detail"].values
    return ds


def _e_int(dimer, level, forces) -> float:
    return float(_scan(dimer, level, forces=forces)["e_int"].values[0, 0])


# (S22 dimer, level, atoms checked per component, energies from gradient jobs?)
CASES = [
    ("Water_dimer", "hf/def2-svp", [(0, 0), (1, 1), (3, 0), (4, 2)], False),
    ("Ammonia_dimer", "hf/def2-svp", [(0, 0), (5, 1)], False),
    # about 20 s on a free core (DFT grids for every displaced geometry): make test-full
    pytest.param("Water_dimer", "b3lyp-d3bj/def2-svp", [(0, 0), (5, 2)], False, marks=pytest.mark.slow),
    # DF-MP2 gradients: the derivative of the DF-MP2 energies of energy-only scans
    ("Water_dimer", "mp2/def2-svp", [(0, 0), (4, 1)], False),
]


def _case_id(case) -> str:
    values = case.values if hasattr(case, "values") else case
    return f"{values[0]}-{values[1]}"


@pytest.mark.parametrize("name,level,components,energies_from_gradient_jobs", CASES,
                         ids=[_case_id(c) for c in CASES])
def test_analytic_forces_match_finite_differences(name, level, components, energies_from_gradient_jobs):
    dimer = s22_dimer(name)
    coord = ik.CentreOfMass()
    ds = _scan(dimer, level, coord)
    forces = ds["forces"].values[0, 0]
    assert np.abs(forces.sum(axis=0)).max() < 1e-6  # translation invariance
    # along the coordinate
    r0 = coord.value(dimer)
    e_plus = _e_int(coord.displaced(dimer, r0 + STEP), level, energies_from_gradient_jobs)
    e_minus = _e_int(coord.displaced(dimer, r0 - STEP), level, energies_from_gradient_jobs)
    numerical = -(e_plus - e_minus) / (2 * STEP)
    assert float(ds["force_along"].values[0, 0]) == pytest.approx(numerical, abs=TOLERANCE)
    # per atom, per Cartesian component
    for atom, axis in components:
        shifted = []
        for sign in (1, -1):
            c = np.array(dimer.coordinates)
            c[atom, axis] += sign * STEP
            shifted.append(_e_int(dimer.with_coordinates(c), level, energies_from_gradient_jobs))
        numerical = -(shifted[0] - shifted[1]) / (2 * STEP)
        assert forces[atom, axis] == pytest.approx(numerical, abs=TOLERANCE), (atom, axis)


def test_forces_sum_to_zero_and_exert_no_net_torque():
    # HF: the energy is exactly invariant under rigid rotation (DFT grids are not)
    dimer = s22_dimer("Ammonia_dimer")
    ds = _scan(dimer, "hf/def2-svp", ik.CentreOfMass(), factors=[0.9, 1.2])
    f = ds["forces"].values[0]
    r = ds["coordinates"].values
    assert np.abs(f.sum(axis=1)).max() < 1e-6  # translation invariance
    # rotation invariance, to the precision of converged gradients (~1e-7 hartree/bohr)
    assert np.abs(np.cross(r, f).sum(axis=1)).max() < 1e-3
    # the net force on A is minus the net force on B
    net = ds["fragment_force"].values[0]
    assert np.allclose(net[:, 0], -net[:, 1], atol=1e-6)


def test_force_vanishes_at_the_minimum_of_the_energy_curve():
    dimer = s22_dimer("Water_dimer")
    dist = dimer.intermolecular_distances()
    ia, jb = np.unravel_index(np.argmin(dist), dist.shape)
    pair = ik.AtomPair(dimer.fragment_a[ia], dimer.fragment_b[jb])
    factors = [0.85, 0.9, 0.95, 1.0, 1.05, 1.1, 1.2, 1.35]
    ds = _scan(dimer, "hf/def2-svp", pair, factors=factors)
    r = ds["distance"].values
    e = ds["e_int"].values[0]
    f = ds["force_along"].values[0]
    r_min = ik.analysis.find_minimum(r, e).r_min_angstrom
    r_zero = ik.analysis.force_zero_crossing(r, f)
    assert abs(r_zero - r_min) <= 0.05
    # force_along > 0 inside the minimum (repulsive), < 0 outside
    assert f[0] > 0 and f[-1] < 0
    # and it agrees with -dE/dR of a smooth fit at the interior points
    fit = ik.analysis.derivative_force(r, e)
    # (a spline through points 0.1 Å apart: its slope is good to a few per cent)
    assert np.allclose(fit[2:-2], f[2:-2], rtol=0.05, atol=0.15)


def test_numerical_forces_for_levels_without_analytic_gradients():
    dimer = s22_dimer("Water_dimer")
    coord = ik.CentreOfMass()
    ds = _scan(dimer, "scs-mp2/def2-svp", coord)
    assert str(ds["force_method"].values[0]).startswith("numerical")
    assert np.isnan(ds["forces"].values).all()  # per-atom forces are not claimed
    r0 = coord.value(dimer)
    h = NUMERICAL_FORCE_STEP_ANGSTROM
    e = [float(_scan(coord.displaced(dimer, r0 + s), "scs-mp2/def2-svp", coord, forces=False)["e_int"].values[0, 0])
         for s in (h, -h)]
    # the same central difference from separate energy scans: plumbing, sign and units
    assert float(ds["force_along"].values[0, 0]) == pytest.approx(-(e[0] - e[1]) / (2 * h), abs=1e-4)
    # and close to the analytic MP2 force (SCS only rescales the correlation energy)
    mp2 = _scan(dimer, "mp2/def2-svp", coord)
    assert float(ds["force_along"].values[0, 0]) == pytest.approx(float(mp2["force_along"].values[0, 0]), abs=1.0)


def test_hellmann_feynman_force_approaches_the_analytic_force_as_the_basis_grows():
    """H2, RHF: the Pulay term shrinks from STO-3G to def2-SVP to aug-cc-pVTZ and the
    electrostatic force approaches the analytic one (trend: Hellmann–Feynman theorem).
    The electrostatic force itself is checked against a central difference of the
    nuclear attraction Z Tr(P <1/|r - R|>) in the nucleus position R (basis and density
    fixed) plus the nuclear repulsion, written here."""
    from pyscf import gto, scf

    from interkit.engine.gradient import electrostatic_forces

    pulay = []
    for basis in ("sto-3g", "def2-svp", "aug-cc-pvtz"):
        mol = gto.M(atom="H 0 0 0; H 0 0 0.74", basis=basis, verbose=0)
        mf = scf.RHF(mol).run(conv_tol=1e-11)
        analytic = -mf.nuc_grad_method().kernel()
        es = electrostatic_forces(mol, mf.make_rdm1())
        assert np.allclose(es.sum(axis=0), 0.0, atol=1e-10)
        dm, (r0, r1) = mf.make_rdm1(), mol.atom_coords()

        def attraction(r, mol=mol, dm=dm):  # electrons' attraction to a unit charge at r (Eh)
            with mol.with_rinv_origin(r):
                return -float(np.einsum("ij,ij->", dm, mol.intor("int1e_rinv")))
        h = 1e-4
        f_el = -(attraction(r1 + [0, 0, h]) - attraction(r1 - [0, 0, h])) / (2 * h)
        f_nuc = (r1 - r0)[2] / np.linalg.norm(r1 - r0) ** 3  # Z = 1 on both nuclei
        assert es[1, 2] == pytest.approx(f_el + f_nuc, abs=1e-7)
        pulay.append(abs(analytic[1, 2] - es[1, 2]))
    assert pulay[0] > pulay[1] > pulay[2]


def test_electrostatic_force_is_charge_times_field_of_the_density():
    """An independent route: finite differences of the electrostatic potential of the
    electrons and the other nuclei at a nucleus, times its charge."""
    from pyscf import gto, scf

    from interkit.engine.gradient import electrostatic_forces

    mol = gto.M(atom="O 0 0 0; H 0 0.76 0.59; H 0 -0.76 0.59", basis="def2-svp", verbose=0)
    mf = scf.RHF(mol).run(conv_tol=1e-11)
    dm = mf.make_rdm1()
    es = electrostatic_forces(mol, dm)
    coords = mol.atom_coords()
    charges = mol.atom_charges()

    def potential(point, skip):
        with mol.with_rinv_origin(point):
            v = -np.einsum("ij,ij", mol.intor("int1e_rinv"), dm)
        for k in range(mol.natm):
            if k != skip:
                v += charges[k] / np.linalg.norm(point - coords[k])
        return v

    h = 1e-4
    for atom in range(mol.natm):
        field = np.array([-(potential(coords[atom] + h * e, atom) - potential(coords[atom] - h * e, atom)) / (2 * h)
                          for e in np.eye(3)])
        assert np.allclose(charges[atom] * field, es[atom], atol=1e-6)


def test_force_variables_roundtrip_and_units(tmp_path):
    ds = _scan(s22_dimer("Water_dimer"), "hf/def2-svp", ik.CentreOfMass(), factors=[1.0, 1.3])
    for name in ("forces", "force_hf", "force_pulay", "force_along", "fragment_force"):
        assert ds[name].attrs["units"] == "kcal/mol/angstrom"
    np.testing.assert_allclose(ds["force_hf"] + ds["force_pulay"], ds["forces"], atol=1e-10)
    # per-fragment sums of the split, projected on the coordinate, match the B values
    along_b = np.einsum("lpx,px->lp", ds["fragment_force_hf"].values[:, :, 1], ds["force_direction"].values)
    np.testing.assert_allclose(along_b, ds["force_hf_along"].values, atol=1e-10)
    np.testing.assert_allclose(ds["fragment_force_hf"] + ds["fragment_force_pulay"], ds["fragment_force"], atol=1e-10)
    ik.save_scan(ds, tmp_path / "f.nc")
    back = ik.open_scan(tmp_path / "f.nc")
    import xarray as xr

    xr.testing.assert_identical(back, ds)


def test_pulay_part_of_the_interaction_force_shrinks_with_the_basis():
    """The same trend for a dimer (S22 water dimer, HF, counterpoise-corrected): the
    Pulay part of the net force on B shrinks from def2-SVP to def2-TZVP to aug-cc-pVTZ
    while the analytic force itself changes much less (practice: Pulay forces vanish only
    in the basis-set limit, slowly for atoms with core electrons)."""
    dimer = s22_dimer("Water_dimer")
    pulay, full = [], []
    for basis in ("def2-svp", "def2-tzvp", "aug-cc-pvtz"):
        ds = _scan(dimer, f"hf/{basis}", ik.CentreOfMass())
        pulay.append(abs(float(ds["force_pulay_along"].values[0, 0])))
        full.append(float(ds["force_along"].values[0, 0]))
    assert pulay[0] > pulay[1] > pulay[2]
    assert max(full) - min(full) < 0.1 * pulay[0]


# --- the fitted gradient code against pyscf, its caches, DF-MP2 ------------------------

WATER_AND_GHOSTS = ("O 0 0 0; H 0 0.76 0.59; H 0 -0.76 0.59; "
                    "{g}O 0.1 0.2 3; {g}H 0.7 0 3.5; {g}H -0.5 0.3 3.6")


def _fitted_scf(level_text, ghost, grids=None):
    from pyscf import dft, gto, scf

    level = ik.parse_level(level_text)
    mol = gto.M(atom=WATER_AND_GHOSTS.format(g="ghost-" if ghost else ""), basis=level.basis, verbose=0)
    if level.method == "dft":
        mf = dft.RKS(mol).density_fit()
        mf.xc = level.functional
        mf.small_rho_cutoff = 0.0
        if grids is not None:  # the same grid object, as the calculations of a scan point share it
            mf.grids = grids.copy()
            mf.grids.mol = mol
    else:
        mf = scf.RHF(mol).density_fit()
    mf.conv_tol = 1e-11
    mf.kernel()
    return level, mf


@pytest.mark.parametrize("level_text", ["hf/def2-svp", "b3lyp/def2-svp", "pbe/def2-svp", "svwn/sto-3g"])
def test_fitted_scf_gradient_equals_pyscf_and_caches_change_nothing(level_text, monkeypatch):
    """The gradient assembled from shared integrals (and DFT atom-grid data) equals pyscf's
    density-fitting gradient with grid response, for the real and the ghosted molecule;
    the second calculation of a point reuses the kept data and gets the same numbers as
    a calculation with the caches switched off."""
    from interkit.engine import fitted_integrals, gradient, numint_cache
    from interkit.engine.gradient import _ghost_aware_grids, electrostatic_forces, fitted_scf_gradient

    fitted_integrals.clear_cache()
    gradient._ONE_ELECTRON.clear()
    numint_cache.release_response_cache()
    level, mf_real = _fitted_scf(level_text, ghost=False)
    grids = getattr(mf_real, "grids", None)
    results = {}
    for name, ghost in (("real", False), ("ghost", True)):
        level, mf = (level, mf_real) if not ghost else _fitted_scf(level_text, True, grids)
        g = mf.nuc_grad_method()
        if level.method == "dft":
            g.grid_response = True
            g.grids = _ghost_aware_grids(mf)
        reference = g.kernel()
        grad, es = fitted_scf_gradient(mf, level)
        np.testing.assert_allclose(grad, reference, atol=1e-9)
        np.testing.assert_allclose(es, electrostatic_forces(mf.mol, mf.make_rdm1()), atol=1e-12)
        results[name] = (mf, grad)
    assert fitted_integrals.cached_bytes() > 0
    assert len(gradient._ONE_ELECTRON) == 1  # real and ghosted molecule: one set of integrals
    # caches off: integrals and atom-grid values recomputed, numbers unchanged
    monkeypatch.setattr(gradient, "ONE_ELECTRON_CACHE_MB", 0)
    gradient._ONE_ELECTRON.clear()
    monkeypatch.setattr(fitted_integrals, "FITTED_CACHE_MB", 0)
    monkeypatch.setattr(numint_cache, "GRID_RESPONSE_CACHE_MB", 0)
    fitted_integrals.clear_cache()
    numint_cache.release_response_cache()
    mf, grad = results["ghost"]
    uncached, _ = fitted_scf_gradient(mf, level)
    np.testing.assert_allclose(uncached, grad, atol=1e-12)
    assert fitted_integrals.cached_bytes() == 0
    assert numint_cache.response_cache_bytes() == 0
    assert len(gradient._ONE_ELECTRON) == 0


def test_kept_integrals_stay_within_their_budget(monkeypatch):
    from interkit.engine import fitted_integrals, numint_cache
    from interkit.engine.gradient import fitted_scf_gradient

    fitted_integrals.clear_cache()
    numint_cache.release_response_cache()
    budget_mb = 5.0
    monkeypatch.setattr(fitted_integrals, "FITTED_CACHE_MB", budget_mb)
    monkeypatch.setattr(numint_cache, "GRID_RESPONSE_CACHE_MB", budget_mb)
    level, mf = _fitted_scf("b3lyp/def2-svp", ghost=True)
    fitted_scf_gradient(mf, level)
    assert 0 < fitted_integrals.cached_bytes() <= budget_mb * 1e6
    assert numint_cache.response_cache_bytes() <= budget_mb * 1e6
    # a new geometry replaces the kept data instead of adding to it
    for shift in (0.1, 0.2):
        mol = mf.mol.set_geom_(mf.mol.atom_coords() + shift * np.eye(3)[0], unit="Bohr", inplace=False)
        mf2 = mf.copy()
        mf2.reset(mol)
        mf2.grids.build(with_non0tab=True)
        mf2.kernel()
        fitted_scf_gradient(mf2, level)
        assert fitted_integrals.cached_bytes() <= budget_mb * 1e6
        assert numint_cache.response_cache_bytes() <= budget_mb * 1e6
    fitted_integrals.clear_cache()
    numint_cache.release_response_cache()


def test_fitted_zvector_response_equals_the_reference_fock_response():
    """The MO-basis response and Fock-like blocks of the DF-MP2 gradient against the
    fitted reference's own AO ``get_veff``."""
    from functools import reduce

    from interkit.engine.fitted_integrals import fitted_integrals
    from interkit.engine.mp2_gradient import _fitted_response, _mo_tensor, _mo_veff_block

    _, mf = _fitted_scf("hf/def2-svp", ghost=True)
    ints = fitted_integrals(mf.mol, mf.with_df.auxmol)
    nocc = int((mf.mo_occ > 0).sum())
    coeff = mf.mo_coeff
    occ, vir = coeff[:, :nocc], coeff[:, nocc:]
    mo3c = _mo_tensor(ints.whitened_tensor(mf.with_df), coeff, ints.naux, nocc)
    rng = np.random.default_rng(7)
    x = rng.normal(size=(vir.shape[1], nocc))
    d = vir @ x @ occ.T
    expected = 2 * reduce(np.dot, (vir.T, mf.get_veff(mf.mol, d + d.T), occ))
    response = _fitted_response(mo3c, nocc)
    np.testing.assert_allclose(response(x).reshape(expected.shape), expected, atol=1e-11)
    # a general symmetric MO-basis density: every block of J - K/2
    dm_mo = rng.normal(size=(coeff.shape[1],) * 2)
    dm_mo += dm_mo.T
    v_ao = mf.get_veff(mf.mol, reduce(np.dot, (coeff, dm_mo, coeff.T)))
    for rows, cols in [(slice(nocc, None), slice(0, nocc)), (slice(0, nocc), slice(0, nocc))]:
        expected = reduce(np.dot, (coeff[:, rows].T, v_ao, coeff[:, cols]))
        np.testing.assert_allclose(_mo_veff_block(mo3c, dm_mo, rows, cols), expected, atol=1e-10)


def test_dfmp2_gradient_without_the_orbital_pair_integrals_is_the_same(monkeypatch):
    """Above the memory bound the gradient falls back to AO-basis Fock builds: same numbers."""
    from interkit.engine import mp2_gradient

    _, mf = _fitted_scf("hf/def2-svp", ghost=True)
    e_kept, grad_kept = mp2_gradient.fitted_mp2_gradient(mf, 1)
    monkeypatch.setattr(mp2_gradient, "RESPONSE_MEMORY_MB", 0)
    e_ao, grad_ao = mp2_gradient.fitted_mp2_gradient(mf, 1)
    assert e_ao == pytest.approx(e_kept, abs=1e-12)
    np.testing.assert_allclose(grad_ao, grad_kept, atol=1e-10)


def test_dfmp2_gradient_is_the_derivative_of_the_dfmp2_energy():
    """Frozen core, ghost atoms, the reference's fitting basis: the analytic gradient
    against central differences (step 1e-4 bohr) of pyscf's DF-MP2 energy."""
    from pyscf import mp, scf

    from interkit.engine.mp2_gradient import fitted_mp2_gradient

    _, mf = _fitted_scf("hf/def2-svp", ghost=True)
    mol = mf.mol
    reference = mp.MP2(mf).density_fit()
    reference.frozen = 1
    reference.kernel()
    e_corr, grad = fitted_mp2_gradient(mf, 1)
    assert e_corr == pytest.approx(reference.e_corr, abs=1e-10)
    assert np.abs(grad.sum(axis=0)).max() < 1e-9

    def energy(coords):
        m = mol.set_geom_(coords, unit="Bohr", inplace=False)
        f = scf.RHF(m).density_fit().run(conv_tol=1e-12)
        p = mp.MP2(f).density_fit()
        p.frozen = 1
        p.kernel()
        return p.e_tot

    h = 1e-4
    for atom, axis in [(0, 2), (2, 1), (3, 0), (5, 2)]:
        shifted = []
        for sign in (1, -1):
            c = mol.atom_coords().copy()
            c[atom, axis] += sign * h
            shifted.append(energy(c))
        assert grad[atom, axis] == pytest.approx((shifted[0] - shifted[1]) / (2 * h), abs=1e-7), (atom, axis)


def test_relaxed_mp2_density_gives_the_field_derivative_and_the_electrostatic_force():
    """The relaxed DF-MP2 density returned with the gradient is the density of the energy's
    response: <z> from it equals the finite-field derivative dE_MP2/dlambda of
    h -> h + lambda z (central differences); its electrostatic force on the nuclei is what
    a scan stores as the Hellmann–Feynman part of the MP2 force."""
    from pyscf import mp, scf

    from interkit.engine.gradient import electrostatic_forces
    from interkit.engine.mp2_gradient import fitted_mp2_gradient

    _, mf = _fitted_scf("hf/def2-svp", ghost=True)
    mol = mf.mol
    _, grad, relaxed, es_stored = fitted_mp2_gradient(mf, 1, relaxed_density=True)
    np.testing.assert_allclose(relaxed, relaxed.T, atol=1e-12)
    s = mol.intor("int1e_ovlp")
    assert np.einsum("ij,ji->", relaxed, s) == pytest.approx(mol.nelectron, abs=1e-8)
    z_ao = mol.intor("int1e_r")[2]
    h0 = mol.intor("int1e_kin") + mol.intor("int1e_nuc")

    def energy(lam):
        f = scf.RHF(mol).density_fit()
        f.get_hcore = lambda *args: h0 + lam * z_ao
        f.conv_tol = 1e-12
        f.kernel()
        p = mp.MP2(f).density_fit()
        p.frozen = 1
        p.kernel()
        return p.e_tot

    lam = 1e-4
    derivative = (energy(lam) - energy(-lam)) / (2 * lam)
    assert np.einsum("ij,ji->", relaxed, z_ao) == pytest.approx(derivative, abs=1e-6)
    es = electrostatic_forces(mol, relaxed)
    np.testing.assert_allclose(es_stored, es, atol=1e-10)  # from the gradient's own integrals
    assert np.all(es[mol.atom_charges() == 0] == 0.0)  # ghosts carry no nucleus
    # analytic = electrostatic + Pulay: the correlation changes the Pulay part of the
    # Hartree–Fock split only a little (it comes from the same basis functions)
    pulay = -grad - es
    hf_pulay = -mf.nuc_grad_method().kernel() - electrostatic_forces(mol, mf.make_rdm1())
    print(f"largest Pulay force: MP2 {np.abs(pulay).max():.4f}, HF {np.abs(hf_pulay).max():.4f} Eh/bohr")
    assert np.abs(pulay - hf_pulay).max() < 0.1 * np.abs(hf_pulay).max()
