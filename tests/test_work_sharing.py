"""Work shared between the calculations of a point, and work split between workers:
kept orbital values (also when only part of them fits), the SCF's fitted tensor, and
chunks cut by estimated cost. None of it may change a number."""

from __future__ import annotations

import numpy as np
import pytest
from pyscf import dft, gto
from pyscf.dft import numint

import interkit as ik
from interkit.engine import fitted_integrals
from interkit.engine.energy import run_energy_job
from interkit.engine.numint_cache import CachingNumInt, release_pool
from interkit.model.job import calculation_weight
from interkit.run.plan import _job_for, plan_scan

WATER_GHOST = "O 0 0 0; H 0 0 0.96; H 0.93 0 -0.24; ghost-O 0 0 2.9; ghost-H 0.8 0 3.3"


@pytest.mark.parametrize("budget_mb", [0.0, 4000.0])
def test_kept_orbital_values_leave_energies_unchanged(budget_mb):
    mol = gto.M(atom=WATER_GHOST, basis="def2-svp", verbose=0)
    energies = []
    for ni in (numint.NumInt(), CachingNumInt(max_cache_mb=budget_mb)):
        release_pool()
        mf = dft.RKS(mol).density_fit()
        mf.xc = "b3lyp"
        mf._numint = ni
        mf.conv_tol = 1e-11
        energies.append(mf.kernel())
    assert energies[1] == pytest.approx(energies[0], abs=1e-10)


def test_orbital_values_that_only_partly_fit_are_kept_in_part_and_replayed(monkeypatch):
    mol = gto.M(atom=WATER_GHOST, basis="def2-svp", verbose=0)
    grids = dft.gen_grid.Grids(mol)
    grids.level = 1
    grids.build(with_non0tab=True)
    blksize = 2 * 56
    plain = [(ao.copy(), w.copy()) for ao, _, w, _ in numint.NumInt().block_loop(mol, grids, deriv=1, blksize=blksize)]
    per_block_mb = plain[0][0].nbytes / 1e6
    ni = CachingNumInt(max_cache_mb=3.5 * per_block_mb)  # room for three batches
    calls = []
    real = ni.eval_ao

    def counted(*args, **kw):
        calls.append(1)
        return real(*args, **kw)

    monkeypatch.setattr(ni, "eval_ao", counted)
    release_pool()
    for _sweep in range(2):
        got = [(ao.copy(), w.copy()) for ao, _, w, _ in ni.block_loop(mol, grids, deriv=1, blksize=blksize)]
        assert len(got) == len(plain) > 5
        for (a, wa), (b, wb) in zip(got, plain):
            np.testing.assert_array_equal(a, b)
            np.testing.assert_array_equal(wa, wb)
    # first sweep: every batch; second: all but the three kept ones
    assert len(calls) == 2 * len(plain) - 3


def test_the_dimer_and_its_ghosted_monomers_share_one_fitted_tensor(small_dimer, monkeypatch):
    level = ik.parse_level("b3lyp/def2-svp")
    a, b = small_dimer.fragment_a, small_dimer.fragment_b
    jobs = [_job_for(small_dimer, a, b, 0, 0, level, 1e-10), _job_for(small_dimer, a + b, (), 0, 0, level, 1e-10)]
    fitted_integrals.release_scf_tensor()
    built = []
    real_build = __import__("pyscf.df.incore", fromlist=["cholesky_eri"]).cholesky_eri

    def counting(*args, **kw):
        built.append(1)
        return real_build(*args, **kw)

    monkeypatch.setattr("pyscf.df.incore.cholesky_eri", counting)
    shared = [run_energy_job(j)[0]["energy_hartree"] for j in jobs]
    assert len(built) == 1  # the second calculation used the first one's tensor
    alone = []
    for j in jobs:
        fitted_integrals.release_scf_tensor()
        alone.append(run_energy_job(j)[0]["energy_hartree"])
    assert len(built) == 3
    np.testing.assert_allclose(shared, alone, rtol=0, atol=1e-10)


def test_chunks_are_cut_by_estimated_cost_and_keep_every_calculation_once(small_dimer):
    spec = ik.ScanSpec(dimer=small_dimer, coordinate=ik.AtomPair(0, 2), factors=[0.9, 1.0, 1.2],
                       levels=["b3lyp/def2-svp"])
    plan = plan_scan(spec, check=False)
    chunks = plan.chunks(2)
    flat = [t for c in chunks for t in c]
    assert sorted(k for _, k in flat) == sorted(plan.jobs)
    largest = max(len(j.symbols) for j in plan.jobs.values())
    cost = [sum(calculation_weight(plan.jobs[k], largest) for _, k in c) for c in chunks]
    # 11 calculations (9 in the dimer basis of weight 1, 2 own-basis monomers): whole
    # points would give 6.x against 3.x; cut by cost the two differ by at most one calculation
    assert abs(cost[0] - cost[1]) <= 1.0 + 1e-12
    assert chunks[0][0][0] == "a_own_basis" and chunks[-1][0][0] == "b_own_basis"
    # one worker: both own-basis monomers first, so points complete (and show) one by one
    assert [role for role, _ in plan.chunks(1)[0][:2]] == ["a_own_basis", "b_own_basis"]
    for c in chunks:  # within a point, the monomers come before the dimer
        keys = [k for _, k in c]
        for pi in range(plan.n_points):
            entry = plan.table[(0, pi)]
            if entry["dimer"] in keys:
                for role in ("a_dimer_basis", "b_dimer_basis"):
                    if entry[role] in keys:
                        assert keys.index(entry[role]) < keys.index(entry["dimer"])


def test_a_serial_scan_frees_what_its_calculations_kept(small_dimer, tmp_path):
    from interkit.engine import numint_cache

    spec = ik.ScanSpec(dimer=small_dimer, coordinate=ik.AtomPair(0, 2), factors=[1.0, 1.2],
                       levels=["b3lyp/def2-svp"])
    ds = ik.run_scan(spec, executor="serial", cache=tmp_path / "store", progress=False)
    assert (ds["status"] == "ok").all()
    assert numint_cache._POOL["cache"] is None and numint_cache._POOL["buffers"] == []
    assert fitted_integrals._SCF_TENSOR["key"] is None
