"""Initial densities from what a chunk already knows, and SCF cycles in the Dataset."""

from __future__ import annotations

import numpy as np
from pyscf import dft

import interkit as ik
from interkit.engine.energy import run_energy_job
from interkit.engine.molecule import build_molecule
from interkit.model.job import OWN_BASIS_ROLES
from interkit.run.executors import run_chunk
from interkit.run.plan import plan_scan


def _spec(level="b3lyp/def2-svp", factors=(1.0, 1.1, 1.2)):
    dimer = ik.load_demo("water_methanol")
    return ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(*ik.demo_catalog()["water_methanol"]["contact"]),
                       factors=list(factors), levels=[level])


def test_own_basis_density_starts_the_ghosted_monomer():
    """The own-basis monomer's density (centred elsewhere) carried into the dimer-basis
    layout is a better start than pyscf's default guess and converges to the same energy
    (a direct pyscf calculation from the default guess; tolerance: 100 x the SCF threshold)."""
    from interkit.engine.guess import embed_density

    plan = plan_scan(_spec("b3lyp/sto-3g", factors=(1.0,)))
    entry = plan.table[(0, 0)]
    own, ghosted = plan.jobs[entry["a_own_basis"]], plan.jobs[entry["a_dimer_basis"]]
    _, own_dm = run_energy_job(own)
    guess = embed_density(own, own_dm, ghosted)
    assert guess is not None and guess.shape == (build_molecule(ghosted).nao,) * 2
    rec, _ = run_energy_job(ghosted, guess)
    mf = dft.RKS(build_molecule(ghosted), xc="b3lyp").density_fit()  # as interkit: DF, NWChem pruning
    mf.small_rho_cutoff, mf.conv_tol, mf.verbose = 0.0, ghosted.conv_tol, 0
    mf.grids.prune = dft.gen_grid.nwchem_prune
    mf.grids.level = ghosted.level.grid_level
    mf.kernel()
    assert abs(rec["energy_hartree"] - mf.e_tot) < 100 * ghosted.conv_tol
    assert rec["scf_cycles"] < mf.cycles
    # a rotated monomer is not a translated one: refused
    rotated = own.__class__(**{**own.__dict__, "coordinates": tuple((-x, -y, z) for x, y, z in own.coordinates)})
    assert embed_density(rotated, own_dm, ghosted) is None


def test_chunk_starts_each_role_from_the_best_known_density():
    """First point: ghosted monomers from the own-basis monomers, the dimer from the sum
    of the ghosted monomers; later points from the previous point. Energies agree with
    calculations from pyscf's default guess to 100 x the SCF threshold."""
    spec = _spec("hf/sto-3g", factors=(1.0, 1.2))
    plan = plan_scan(spec)
    tasks = [("a_own_basis", plan.table[(0, 0)]["a_own_basis"]), ("b_own_basis", plan.table[(0, 0)]["b_own_basis"])]
    for pi in range(2):
        tasks += [(r, k) for r, k in plan.table[(0, pi)].items() if r not in OWN_BASIS_ROLES]
    out = dict(run_chunk(tasks, plan.jobs))
    guesses = {(rec["role"], k): rec["guess"] for k, rec in out.items()}
    first = plan.table[(0, 0)]
    assert guesses[("a_dimer_basis", first["a_dimer_basis"])] == "own-basis monomer"
    assert guesses[("b_dimer_basis", first["b_dimer_basis"])] == "own-basis monomer"
    assert guesses[("dimer", first["dimer"])] == "sum of ghosted monomers"
    assert all(guesses[(r, k)] == "previous point" for r, k in plan.table[(0, 1)].items() if r not in OWN_BASIS_ROLES)
    for key, rec in out.items():
        fresh, _ = run_energy_job(plan.jobs[key])
        assert abs(rec["energy_hartree"] - fresh["energy_hartree"]) < 100 * plan.jobs[key].conv_tol


def test_scf_cycles_in_the_dataset(tmp_path):
    """Every calculation's SCF iteration count is a Dataset variable (level, distance,
    role), units "1", equal to the count in the job records (read from the store)."""
    from interkit.run.store import ResultStore

    spec = _spec("hf/sto-3g", factors=(1.0, 1.2))
    ds = ik.run_scan(spec, executor="serial", progress=False, cache=tmp_path / "store")
    cycles = ds["scf_cycles"]
    assert cycles.dims == ("level", "distance", "role") and cycles.attrs["units"] == "1"
    store = ResultStore(tmp_path / "store")
    for pi in range(2):
        for ri, role in enumerate(ds["role"].values):
            key = plan_scan(spec).table[(0, pi)].get(str(role))
            if key is None:
                assert np.isnan(cycles.values[0, pi, ri])
            else:
                assert cycles.values[0, pi, ri] == store.get(key)["scf_cycles"] >= 1
