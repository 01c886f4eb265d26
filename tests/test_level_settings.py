"""Trust items of the engine: ECPs from the basis definition, one integral treatment per
interaction energy, complete store keys, explicit level settings, size estimates."""

from __future__ import annotations

import json

import numpy as np
import pytest
from pyscf import gto, mp, scf

import interkit as ik
from interkit.errors import InputError, NotAvailableError, ResourceError
from interkit.model import job as plan_module
from interkit.model.job import Job
from interkit.run.plan import plan_scan
from interkit.units import ANGSTROM_TO_BOHR

# (HX)2 test geometries built here (roughly hydrogen-bonded, not reference structures)
HCL_DIMER = """4
HCl dimer, test geometry
Cl  0.000000  0.000000  0.000000
H   0.000000  0.000000  1.280000
Cl  0.000000  0.000000  3.800000
H   1.280000  0.000000  3.900000
"""
HI_DIMER = """4
HI dimer, test geometry
I   0.000000  0.000000  0.000000
H   0.000000  0.000000  1.610000
I   0.000000  0.000000  4.500000
H   1.610000  0.000000  4.600000
"""
# valence electrons with the LANL2DZ cores (Cl: 10 core electrons, I: 46 -- Hay and Wadt,
# J. Chem. Phys. 82, 270 and 299 (1985)): HCl 7 + 1, HI 7 + 1
VALENCE_ELECTRONS_PER_HX = 8

H_HF = """3
hydrogen atom and hydrogen fluoride, test geometry
H   0.000000  0.000000  0.000000
F   0.000000  0.000000  2.300000
H   0.000000  0.000000  3.220000
"""


def _direct_energy(job: Job, basis: str, ecp) -> float:
    """A pyscf HF calculation of the job written out here (not through interkit)."""
    atoms = [(("ghost-" + s) if g else s, tuple(np.array(x) * ANGSTROM_TO_BOHR))
             for s, x, g in zip(job.symbols, job.coordinates, job.ghost)]
    mol = gto.M(atom=atoms, unit="Bohr", basis=basis, ecp=ecp, charge=job.charge, spin=job.spin, verbose=0)
    mf = scf.RHF(mol).density_fit()
    mf.conv_tol = 1e-11
    return float(mf.kernel()), mol.nelectron


@pytest.mark.parametrize("xyz", [HCL_DIMER, HI_DIMER], ids=["HCl", "HI"])
def test_lanl2dz_ecp_on_real_atoms_matches_direct_pyscf(xyz):
    from interkit.engine.energy import run_energy_job
    from interkit.engine.molecule import build_molecule

    d = ik.Dimer.from_xyz_string(xyz)
    spec = ik.ScanSpec(dimer=d, factors=[1.0], levels=["hf/lanl2dz"], scf_threshold_hartree=1e-10)
    plan = plan_scan(spec)
    entry = plan.table[(0, 0)]
    for role in ("dimer", "a_dimer_basis", "b_dimer_basis"):
        job = plan.jobs[entry[role]]
        mol = build_molecule(job)
        n_real_hx = sum(1 for s, g in zip(job.symbols, job.ghost) if not g and s != "H")
        assert mol.nelectron == VALENCE_ELECTRONS_PER_HX * n_real_hx
        # the ECP sits on real halogens only; ghosts keep their basis functions
        ecp_atoms = set(mol._ecpbas[:, gto.ATOM_OF].tolist())
        assert ecp_atoms == {i for i, (s, g) in enumerate(zip(job.symbols, job.ghost)) if s != "H" and not g}
        assert mol.nao == build_molecule(plan.jobs[entry["dimer"]]).nao
        record, _ = run_energy_job(job)
        # source: the same calculation in pyscf directly, ECP named by the basis
        expected, nelec = _direct_energy(job, "lanl2dz", "lanl2dz")
        assert nelec == mol.nelectron
        assert record["energy_hartree"] == pytest.approx(expected, abs=1e-8)


def test_basis_without_loadable_ecp_is_refused(monkeypatch):
    """A valence basis whose ECP pyscf cannot load must not run all-electron."""
    from interkit.model import levels

    levels.basis_ecp.cache_clear()
    monkeypatch.setattr(levels, "basis_ecp", lambda basis, symbol: None)
    d = ik.Dimer.from_xyz_string(HI_DIMER)
    with pytest.raises(InputError, match="lanl2dz.*I"):
        ik.ScanSpec(dimer=d, factors=[1.0], levels=["hf/lanl2dz"])


def test_sapt0_decomposition_still_refuses_ecp_basis():
    d = ik.Dimer.from_xyz_string(HI_DIMER)
    with pytest.raises(NotAvailableError, match="effective core potentials"):
        ik.ScanSpec(dimer=d, factors=[1.0], levels=["hf/lanl2dz"], decomposition="sapt0",
                    decomposition_basis="lanl2dz")


# ----------------------------------------------------------------- open-shell MP2 forces
def test_open_shell_mp2_forces_use_one_integral_treatment():
    from interkit.engine.molecule import build_molecule

    d = ik.Dimer.from_xyz_string(H_HF, fragment_a=[0], multiplicities=(2, 1))
    spec = ik.ScanSpec(dimer=d, factors=[1.0], levels=["mp2/6-31g"], forces=True, scf_threshold_hartree=1e-10)
    plan = plan_scan(spec)
    ds = ik.run_scan(spec, executor="serial", progress=False)
    # source: conventional UMP2/MP2 counterpoise calculation written out here with pyscf
    entry = plan.table[(0, 0)]
    total = {}
    for role in ("dimer", "a_dimer_basis", "b_dimer_basis"):
        job = plan.jobs[entry[role]]
        mol = build_molecule(job)
        mf = (scf.UHF(mol) if mol.spin else scf.RHF(mol))
        mf.conv_tol = 1e-11
        mf.kernel()
        solver = mp.ump2.UMP2(mf) if mol.spin else mp.mp2.RMP2(mf)
        from pyscf.data import elements

        solver.frozen = int(elements.chemcore(mol)) or None
        solver.kernel()
        total[role] = mf.e_tot + solver.e_corr
    e_int = (total["dimer"] - total["a_dimer_basis"] - total["b_dimer_basis"]) * 627.5094740631
    assert float(ds["e_int"].values[0, 0]) == pytest.approx(e_int, abs=1e-5)
    level = spec.levels[0]
    assert not level.scf_fitted and level.correlation_fitting is False
    assert "exact correlation" in level.label
    treatments = {(j.level.scf_fitted, j.level.correlation_fitting) for j in plan.jobs.values()}
    assert treatments == {(False, False)}
    settings = json.loads(ds.attrs["level_settings_json"])[level.label]
    assert settings["scf_fitting"] is False and settings["correlation_fitting"] is False


def test_mp2_forces_with_mixed_treatment_refused(small_dimer):
    d = small_dimer
    lv = ik.parse_level("mp2/sto-3g", correlation_fitting=False)
    with pytest.raises(NotAvailableError, match="correlation_fitting"):
        ik.ScanSpec(dimer=d, factors=[1.0], levels=[lv], forces=True)


# ----------------------------------------------------------------- store keys
def _job(level="hf/sto-3g", **changes) -> Job:
    base = dict(symbols=("H", "H"), coordinates=((0.0, 0.0, 0.0), (0.0, 0.0, 0.74)), ghost=(False, False),
                charge=0, spin=0, level=ik.parse_level(level), conv_tol=1e-8)
    base.update(changes)
    return Job(**base)


@pytest.mark.parametrize("getter,level", [
    ("_pyscf_version", "hf/sto-3g"),
    ("_libxc_version", "b3lyp/sto-3g"),
])
def test_key_changes_with_library_versions(monkeypatch, getter, level):
    before = _job(level).key
    monkeypatch.setattr(plan_module, getter, lambda: "0.0.test")
    assert _job(level).key != before


def test_key_changes_with_dispersion_library_versions(monkeypatch):
    level = "b3lyp-d3bj/sto-3g"
    before = _job(level).key
    d4_before = _job("b3lyp-d4/sto-3g").key
    real = plan_module._distribution_version
    # pyscf-dispersion bundles the D3 and D4 libraries interkit calls
    monkeypatch.setattr(plan_module, "_distribution_version",
                        lambda name: "0.0.test" if name == "pyscf-dispersion" else real(name))
    assert _job(level).key != before
    assert _job("b3lyp-d4/sto-3g").key != d4_before
    # separately installed dftd3/dftd4 packages are not used: their versions stay out of the key
    monkeypatch.setattr(plan_module, "_distribution_version",
                        lambda name: "0.0.test" if name in ("dftd3", "dftd4") else real(name))
    assert _job(level).key == before
    assert _job("b3lyp-d4/sto-3g").key == d4_before


def test_key_changes_with_numerics_version(monkeypatch):
    before = _job().key
    monkeypatch.setattr(plan_module, "NUMERICS_VERSION", plan_module.NUMERICS_VERSION + 1)
    assert _job().key != before


@pytest.mark.parametrize("level,field,value", [
    ("mp2/sto-3g", "frozen_core", False),
    ("mp2/sto-3g", "correlation_fitting", False),
    ("mp2/sto-3g", "ri_auxbasis", "cc-pvdz-ri"),
    ("hf/sto-3g", "jk_auxbasis", "def2-universal-jkfit"),
    ("hf/sto-3g", "density_fitting", False),
    ("b3lyp/sto-3g", "grid_level", 4),
    ("b3lyp/sto-3g", "grid_pruning", "treutler"),
])
def test_key_and_label_change_with_each_setting(level, field, value):
    base = ik.parse_level(level)
    changed = ik.parse_level(level, **{field: value})
    assert _job(level).key != _job(changed).key
    assert base.label != changed.label  # labels of non-default settings stay unique


def test_key_changes_with_scf_threshold_and_ecp():
    assert _job().key != _job(conv_tol=1e-9).key
    assert _job().key != _job(ecp=(("H", "made-up"),)).key


# ----------------------------------------------------------------- explicit settings
def test_settings_are_applied_by_the_engine():
    from interkit.engine.energy import _frozen_core, _make_scf, mp2_solver
    from interkit.engine.molecule import build_molecule

    lv = ik.parse_level("b3lyp/sto-3g", grid_level=1, grid_pruning="none", jk_auxbasis="def2-universal-jkfit")
    mol = build_molecule(_job(level=lv))
    mf = _make_scf(mol, lv, 1e-8)
    assert mf.grids.level == 1 and mf.grids.prune is None
    assert mf.with_df.auxbasis == "def2-universal-jkfit"
    water = (("O", (0.0, 0.0, 0.0)), ("H", (0.0, 0.76, 0.59)), ("H", (0.0, -0.76, 0.59)))
    job = Job(symbols=tuple(s for s, _ in water), coordinates=tuple(x for _, x in water),
              ghost=(False,) * 3, charge=0, spin=0, level=ik.parse_level("mp2/sto-3g", frozen_core=False),
              conv_tol=1e-8)
    mol = build_molecule(job)
    assert _frozen_core(mol, job.level) == 0 and _frozen_core(mol, ik.parse_level("mp2/sto-3g")) == 1
    exact = ik.parse_level("mp2/sto-3g", correlation_fitting=False)
    mf = _make_scf(mol, exact, 1e-10)  # a fitted SCF (density_fitting stays on)
    mf.kernel()
    assert mf.with_df is not None
    # source: closed-shell MP2 written out here, exact (ia|jb) from pyscf's four-index
    # integrals over the fitted SCF's canonical orbitals and orbital energies, core frozen
    from pyscf import ao2mo

    c, e = mf.mo_coeff, mf.mo_energy
    nocc = int((mf.mo_occ > 0).sum())
    o, v = slice(1, nocc), slice(nocc, None)
    no, nv = nocc - 1, c.shape[1] - nocc
    ovov = ao2mo.general(mol, (c[:, o], c[:, v], c[:, o], c[:, v])).reshape(no, nv, no, nv)
    denom = e[o, None, None, None] - e[None, v, None, None] + e[None, None, o, None] - e[None, None, None, v]
    e_exact = float(np.einsum("iajb,iajb", ovov / denom, 2 * ovov - ovov.transpose(0, 3, 2, 1)))
    solver = mp2_solver(mf, exact)
    solver.frozen = 1
    assert solver.kernel()[0] == pytest.approx(e_exact, abs=1e-10)
    fitted = mp2_solver(mf, ik.parse_level("mp2/sto-3g"))
    fitted.frozen = 1
    assert abs(fitted.kernel()[0] - e_exact) > 1e-6  # the fitted one differs, on the SCF's basis
    assert fitted.with_df is mf.with_df
    ri = mp2_solver(mf, ik.parse_level("mp2/sto-3g", ri_auxbasis="cc-pvdz-ri"))
    assert ri.with_df.auxbasis == "cc-pvdz-ri"


@pytest.mark.parametrize("settings,match", [
    ({"grid_level": 12}, "grid_level"),
    ({"frozen_core": "yes"}, "frozen_core"),
    ({"grid_pruning": "fine"}, "grid_pruning"),
    ({"jk_auxbasis": ""}, "jk_auxbasis"),
    ({"fitting": True}, "fitting"),
])
def test_bad_setting_values_name_the_field(settings, match):
    with pytest.raises(InputError, match=match):
        ik.parse_level("hf/sto-3g", **settings)


def test_toml_settings_table_and_inline_levels(tmp_path, small_dimer):
    xyz = tmp_path / "d.xyz"
    xyz.write_text(small_dimer.to_xyz_string())
    text = f"""
[system]
geometry = "{xyz.name}"
[scan]
factors = [1.0, 1.2]
[calculation]
levels = ["mp2/sto-3g", {{ level = "b3lyp/sto-3g", grid_level = 2 }}]
memory_limit_mb = 1234
[calculation.settings]
frozen_core = false
grid_level = 4
"""
    path = tmp_path / "s.toml"
    path.write_text(text)
    spec = ik.load_spec_toml(path)
    assert spec.levels[0].frozen_core is False and spec.levels[1].grid_level == 2
    assert spec.memory_limit_mb == 1234
    again = ik.ScanSpec.from_json(spec.to_json())
    assert [lv.label for lv in again.levels] == [lv.label for lv in spec.levels]
    path.write_text(text.replace("grid_level = 4", "grid_level = 40"))
    with pytest.raises(InputError, match="grid_level"):
        ik.load_spec_toml(path)
    path.write_text(text.replace("grid_level = 4", "grid = 4"))
    with pytest.raises(InputError, match="grid"):
        ik.load_spec_toml(path)


def test_dataset_records_the_settings_used(small_dimer):
    spec = ik.ScanSpec(dimer=small_dimer, factors=[1.0], levels=[ik.parse_level("hf/sto-3g", jk_auxbasis="def2-universal-jkfit")])
    ds = ik.run_scan(spec, executor="serial", progress=False)
    rec = json.loads(ds.attrs["level_settings_json"])[spec.levels[0].label]
    assert rec["jk_auxbasis"] == "def2-universal-jkfit" and rec["scf_fitting"] is True
    assert rec["jk_auxbasis_used"] == "def2-universal-jkfit"
    assert rec["frozen_core"] is None and rec["ecp"] == {}


# ----------------------------------------------------------------- size estimates
def test_tiny_memory_limit_refuses_with_the_estimate(small_dimer):
    spec = ik.ScanSpec(dimer=small_dimer, factors=[1.0], levels=["mp2/def2-svp"], memory_limit_mb=0.01)
    with pytest.raises(ResourceError, match=r"memory_limit_mb: level mp2/def2-svp needs about .* MB.*raise memory_limit_mb"):
        ik.run_scan(spec, executor="serial", progress=False)


@pytest.mark.parametrize("method", ["hf", "b3lyp", "mp2", "ccsd(t)"])
@pytest.mark.parametrize("forces", [False, True])
def test_estimate_grows_with_basis(small_dimer, method, forces):
    from interkit.engine.cost import estimate_level_cost

    d = small_dimer
    small = estimate_level_cost(ik.parse_level(f"{method}/sto-3g"), d.symbols, d.coordinates, 0, 0, forces)
    big = estimate_level_cost(ik.parse_level(f"{method}/def2-tzvp"), d.symbols, d.coordinates, 0, 0, forces)
    assert big["nbasis"] > small["nbasis"] and big["peak_memory_mb"] > small["peak_memory_mb"]


def test_estimate_matches_the_fitted_tensor_built_by_pyscf(small_dimer):
    from pyscf import df

    from interkit.engine.cost import estimate_level_cost

    d = small_dimer
    est = estimate_level_cost(ik.parse_level("hf/def2-svp"), d.symbols, d.coordinates, 0, 0, False)
    # source: the fitted tensor pyscf builds for this molecule, measured here
    mol = gto.M(atom=[(s, tuple(x)) for s, x in zip(d.symbols, d.coordinates)], basis="def2-svp", verbose=0)
    dfobj = df.DF(mol, auxbasis=df.addons.make_auxbasis(mol))
    dfobj.build()
    assert est["naux_jk"] == dfobj.get_naoaux() and est["nbasis"] == mol.nao
    assert est["tensor_mb"]["SCF three-index (P|mu nu)"] == pytest.approx(dfobj._cderi.nbytes / 1e6, rel=1e-12)
