"""Cost of a SAPT0 point relative to a counterpoise Hartree–Fock point, and its scaling.

For each system, times (one thread, same run, so only ratios matter):

* a CP HF point: three density-fitted RHF calculations in the dimer-centred basis
  (dimer, A with B ghosted, B with A ghosted), the same fitting basis as SAPT0;
* a SAPT0 point: ``interkit.engine.sapt0.sapt0_terms`` (which includes those three SCFs).

Prints the SAPT0/HF time ratio per system and the size-scaling exponent of the SAPT0
time with the number of basis functions (log-log fit over the systems run).
Use ``--quick`` to skip the 23-atom benzene-pyridine demo.
"""

from __future__ import annotations

import argparse
import os
import time

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402
from pyscf import df, lib  # noqa: E402

import interkit as ik  # noqa: E402
from interkit.engine import sapt0, sapt0_scf, sapt0_setup  # noqa: E402


def s22_water() -> ik.Dimer:
    from ase.data import s22

    atoms = s22.create_s22_system("Water_dimer")
    n_a, _ = s22.get_number_of_dimer_atoms("Water_dimer")
    return ik.Dimer.from_ase(atoms, fragment_a=range(n_a), name="water dimer (S22)")


def cp_hf_seconds(dimer: ik.Dimer, basis: str) -> float:
    start = time.perf_counter()
    mols = sapt0_setup._build_molecules(dimer, basis, None, None, 8000.0)
    dfobj = df.DF(mols.dimer, auxbasis=mols.jk_aux)
    dfobj.verbose = 0
    dfobj.build()
    for mol, label in ((mols.dimer, "dimer"), (mols.a, "A"), (mols.b, "B")):
        sapt0_scf._run_rhf(mol, dfobj, 1e-10, label)
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="skip benzene-pyridine")
    parser.add_argument("--basis", default="jun-cc-pvdz")
    args = parser.parse_args()
    lib.num_threads(1)
    systems = [("water dimer (S22)", s22_water()),
               ("water_methanol", ik.load_demo("water_methanol")),
               ("methane_ethene", ik.load_demo("methane_ethene"))]
    if not args.quick:
        systems.append(("benzene_pyridine", ik.load_demo("benzene_pyridine")))
    sizes, times = [], []
    print(f"SAPT0 cost relative to a counterpoise HF point, basis {args.basis}, 1 thread")
    print(f"{'system':22s} {'atoms':>5s} {'nbf':>5s} {'naux(JK/RI)':>12s} {'SAPT0/HF':>9s}")
    for label, dimer in systems:
        cost = sapt0_setup.estimate_sapt0_cost(dimer, args.basis)
        t_hf = cp_hf_seconds(dimer, args.basis)
        start = time.perf_counter()
        sapt0.sapt0_terms(dimer, args.basis, max_memory_mb=8000.0)
        t_sapt = time.perf_counter() - start
        sizes.append(cost["nbasis"])
        times.append(t_sapt)
        aux = f"{cost['naux_jk']}/{cost['naux_ri']}"
        print(f"{label:22s} {dimer.natoms:5d} {cost['nbasis']:5d} {aux:>12s} {t_sapt / t_hf:9.2f}")
    if len(sizes) >= 3:
        slope = np.polyfit(np.log(sizes), np.log(times), 1)[0]
        print(f"SAPT0 time ~ N_basis^{slope:.2f} over {len(sizes)} systems")


if __name__ == "__main__":
    main()
