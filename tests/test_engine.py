"""The pyscf engine: open shells, ECPs, correlated methods, the convergence ladder."""

from __future__ import annotations

import numpy as np
import pytest
from pyscf import dft, scf

import interkit as ik
from interkit.engine.energy import _make_scf, converge_scf, run_energy_job
from interkit.engine.molecule import build_molecule
from interkit.model.geometry import parse_xyz
from interkit.run.plan import _job_for

OH_WATER = """5
hydroxyl radical and water, test geometry
O   0.000000  0.000000  0.000000
H   0.000000  0.000000  0.970000
O   0.000000  0.000000 -2.900000
H   0.760000  0.000000 -3.480000
H  -0.760000  0.000000 -3.480000
"""


def test_open_shell_fragment_runs_unrestricted():
    d = ik.Dimer.from_xyz_string(OH_WATER, multiplicities=(2, 1))
    assert d.spins == (1, 0)
    level = ik.parse_level("b3lyp/def2-svp")
    job = _job_for(d, d.fragment_a + d.fragment_b, (), 0, 1, level, 1e-9)
    mf = _make_scf(build_molecule(job), level, 1e-9)
    assert isinstance(mf, dft.uks.UKS)  # never a silent ROHF/RKS
    hf = _make_scf(build_molecule(job), ik.parse_level("hf/def2-svp"), 1e-9)
    assert isinstance(hf, scf.uhf.UHF)
    spec = ik.ScanSpec(dimer=d, coordinate=ik.AtomPair(0, 2), factors=[1.0, 1.5], levels=["hf/def2-svp"])
    ds = ik.run_scan(spec, progress=False, executor="serial")
    assert (ds["status"] == "ok").all()
    assert np.all(np.isfinite(ds["e_int"].values))
    assert float(ds["bsse"].values[0, 0]) > 0


def test_def2_ecp_applied_to_real_heavy_atoms_only():
    level = ik.parse_level("hf/def2-svp")
    text = "2\nHI\nI 0 0 0\nH 0 0 1.61\n"
    geom = parse_xyz(text)[0]
    d = ik.Dimer(geom.symbols, geom.coordinates, (0,), (-1, 1), (1, 1), _check=False)
    real = build_molecule(_job_for(d, (0,), (), -1, 0, level, 1e-9))
    assert real.has_ecp() and real.nelectron == 26  # 54 - 28 core electrons + 1 (iodide)
    ghost = build_molecule(_job_for(d, (1,), (0,), 1, 0, level, 1e-9))
    assert not ghost.has_ecp() and ghost.nelectron == 0


def test_scs_mp2_and_ccsdt_are_distinct_and_bound(small_dimer):
    spec = ik.ScanSpec(dimer=small_dimer, coordinate=ik.AtomPair(1, 2), factors=[1.0],
                       levels=["mp2/6-31g*", "scs-mp2/6-31g*", "ccsd(t)/6-31g*"])
    ds = ik.run_scan(spec, progress=False, executor="serial")
    e = ds["e_int"].values[:, 0]
    assert np.all(np.isfinite(e)) and np.all(e < 0)
    assert len(set(np.round(e, 6))) == 3
    # CCSD(T) and MP2 agree within ~1 kcal/mol for a hydrogen-bonded dimer (practice)
    assert abs(e[2] - e[0]) < 1.0


def test_ladder_reports_retried_when_diis_is_starved(small_dimer):
    level = ik.parse_level("b3lyp/def2-svp")
    job = _job_for(small_dimer, (0, 1, 2, 3), (), 0, 0, level, 1e-10)
    mf = _make_scf(build_molecule(job), level, 1e-10)
    mf.max_cycle = 4
    status, detail = converge_scf(mf)
    assert status == "retried" and detail in ("level shift and damping", "second-order solver")
    reference, _ = run_energy_job(job)
    assert mf.e_tot == pytest.approx(reference["energy_hartree"], abs=1e-8)


def test_previous_density_guess_cuts_cycles_without_changing_the_energy(small_dimer):
    level = ik.parse_level("b3lyp/def2-svp")
    moved = small_dimer.translated_b([0.0, 0.0, 0.1])
    first, density = run_energy_job(_job_for(small_dimer, (0, 1, 2, 3), (), 0, 0, level, 1e-10))
    cold, _ = run_energy_job(_job_for(moved, (0, 1, 2, 3), (), 0, 0, level, 1e-10))
    warm, _ = run_energy_job(_job_for(moved, (0, 1, 2, 3), (), 0, 0, level, 1e-10), guess=density)
    assert warm["scf_cycles"] < cold["scf_cycles"]
    assert warm["energy_hartree"] == pytest.approx(cold["energy_hartree"], abs=1e-8)


def test_dispersion_suffix_adds_library_energy(small_dimer):
    from interkit.engine.dispersion import dispersion_energy_and_gradient

    plain = run_energy_job(_job_for(small_dimer, (0, 1, 2, 3), (), 0, 0, ik.parse_level("b3lyp/sto-3g"), 1e-9))[0]
    disp = run_energy_job(_job_for(small_dimer, (0, 1, 2, 3), (), 0, 0,
                                   ik.parse_level("b3lyp-d3bj/sto-3g"), 1e-9))[0]
    e_lib, _ = dispersion_energy_and_gradient(small_dimer.symbols, small_dimer.coordinates, "b3lyp", "d3bj")
    assert disp["dispersion_energy_hartree"] == pytest.approx(e_lib, abs=1e-12)
    assert disp["energy_hartree"] - plain["energy_hartree"] == pytest.approx(e_lib, abs=1e-8)


def test_ccsdt_warns_above_measured_size():
    from conftest import s22_dimer

    # the size estimate runs when the plan is made (building the spec is cheap)
    spec = ik.ScanSpec(dimer=s22_dimer("Benzene-water_complex"), coordinate=ik.CentreOfMass(), factors=[1.0],
                       levels=["ccsd(t)/aug-cc-pvdz"])
    with pytest.warns(ik.InterkitWarning, match="basis functions"):
        ik.check_feasibility(spec)


@pytest.mark.parametrize("spin,functional", [(0, "b3lyp"), (0, "pbe"), (1, "b3lyp")])
def test_cached_orbital_values_leave_dft_energies_unchanged(spin, functional):
    from pyscf import gto
    from pyscf.dft import numint

    from interkit.engine.numint_cache import CachingNumInt

    atoms = "O 0 0 0; H 0 0 0.97" if spin else "O 0 0 0; H 0 0 0.96; H 0.93 0 -0.24; ghost-O 0 0 2.9"
    mol = gto.M(atom=atoms, basis="def2-svp", spin=spin, verbose=0)
    energies = []
    for ni in (numint.NumInt(), CachingNumInt()):
        mf = (dft.UKS(mol) if spin else dft.RKS(mol)).density_fit()
        mf.xc = functional
        mf._numint = ni
        mf.conv_tol = 1e-11
        energies.append(mf.kernel())
    assert energies[1] == pytest.approx(energies[0], abs=1e-10)


def test_ghosted_jobs_reuse_the_dimer_grid_without_changing_energies(small_dimer):
    from interkit.engine import energy

    level = ik.parse_level("b3lyp/def2-svp")
    jobs = [_job_for(small_dimer, (0, 1), (2, 3), 0, 0, level, 1e-10),
            _job_for(small_dimer, (0, 1, 2, 3), (), 0, 0, level, 1e-10)]
    energy._GRID_CACHE.clear()
    cold = [run_energy_job(j)[0]["energy_hartree"] for j in jobs[::-1]]  # dimer first: builds the grid
    assert len(energy._GRID_CACHE) == 1
    for j, e in zip(jobs[::-1], cold):
        energy._GRID_CACHE.clear()
        assert run_energy_job(j)[0]["energy_hartree"] == pytest.approx(e, abs=1e-10)
    # and against plain pyscf (no shared grid, no cached orbital values, no pruning)
    from pyscf.dft import numint

    from interkit.engine.molecule import build_molecule

    mf = dft.RKS(build_molecule(jobs[0]), xc="b3lyp").density_fit()
    mf.grids.level = level.grid_level   # the level's grid (interkit's default, not pyscf's)
    mf._numint = numint.NumInt()
    mf.small_rho_cutoff = 0.0
    mf.conv_tol = 1e-10
    assert mf.kernel() == pytest.approx(cold[1], abs=1e-9)
