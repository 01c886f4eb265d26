"""Cost and accuracy of a composite reference against a direct CCSD(T) calculation.

The composite ``mp2/aug-cc-pvtz~aug-cc-pvqz + ccsd(t)/aug-cc-pvdz`` (MP2 correlation
energy extrapolated X^-3 from aug-cc-pVTZ/aug-cc-pVQZ, Hartree–Fock at aug-cc-pVQZ, plus
CCSD(T) - MP2 in aug-cc-pVDZ, counterpoise-corrected component by component) is run
against a direct counterpoise-corrected ``ccsd(t)/aug-cc-pvtz`` on the same S22 water
dimer points (ase geometry, centre-of-mass separation scaled by 0.9, 1.0, 1.2), in the
same process, one thread, each scan with a fresh store so nothing is reused between them.

Prints the wall and CPU time of each scan (serial executor: every calculation runs in
this process, so its CPU time is the cost even on a loaded machine), the cost ratio (target: the composite at least 5x
cheaper) and the largest |ΔE_int| between the two (target: within 0.1 kcal/mol), with
the composite's basis-set uncertainty beside it. ``--quick`` runs the equilibrium point
only. ``--composite`` / ``--direct`` change the two levels (e.g. cc-pVDZ/cc-pVTZ bases
for a fast try of the script itself; the targets are then not meaningful).
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402

import interkit as ik  # noqa: E402

COMPOSITE = "mp2/aug-cc-pvtz~aug-cc-pvqz + ccsd(t)/aug-cc-pvdz"
DIRECT = "ccsd(t)/aug-cc-pvtz"
FACTORS = (0.9, 1.0, 1.2)
COST_TARGET = 5.0               # composite at least this many times cheaper
AGREEMENT_KCAL_PER_MOL = 0.1    # largest |composite - direct| allowed


def s22_water() -> ik.Dimer:
    from ase.data import s22

    atoms = s22.create_s22_system("Water_dimer")
    n_a, _ = s22.get_number_of_dimer_atoms("Water_dimer")
    return ik.Dimer.from_ase(atoms, fragment_a=range(n_a), name="water dimer (S22)")


def timed_scan(level: str, factors) -> tuple[object, float, float]:
    """Run one scan of ``level`` with a fresh store; return (Dataset, wall s, CPU s)."""
    spec = ik.ScanSpec(dimer=s22_water(), coordinate=ik.CentreOfMass(), factors=list(factors), levels=[level])
    with tempfile.TemporaryDirectory(prefix="interkit-composite-cost-") as store:
        start, cpu = time.perf_counter(), time.process_time()
        ds = ik.run_scan(spec, executor="serial", cache=store, progress=False)
        return ds, time.perf_counter() - start, time.process_time() - cpu


def row_of(ds, level: str) -> str:
    """The Dataset row of ``level``: the composite row for a composite, else the level."""
    if "level_kind" in ds.coords:
        composites = [str(lv) for lv, kind in zip(ds["level"].values, ds["level_kind"].values)
                      if str(kind) == "composite"]
        if composites:
            return composites[0]
    return [str(lv) for lv in ds["level"].values][0] if level not in ds["level"].values else level


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="one point (factor 1.0) instead of three")
    parser.add_argument("--composite", default=COMPOSITE, help=f"composite level (default {COMPOSITE!r})")
    parser.add_argument("--direct", default=DIRECT, help=f"direct level (default {DIRECT!r})")
    args = parser.parse_args()
    from pyscf import lib

    lib.num_threads(1)
    factors = (1.0,) if args.quick else FACTORS
    print(f"S22 water dimer, centre-of-mass factors {', '.join(f'{f:g}' for f in factors)}; one thread; "
          "fresh stores")
    ds_c, t_c, cpu_c = timed_scan(args.composite, factors)
    print(f"composite {args.composite}: {t_c:9.1f} s wall, {cpu_c:9.1f} s CPU", flush=True)
    ds_d, t_d, cpu_d = timed_scan(args.direct, factors)
    print(f"direct    {args.direct}: {t_d:9.1f} s wall, {cpu_d:9.1f} s CPU", flush=True)
    comp, direct = row_of(ds_c, args.composite), row_of(ds_d, args.direct)
    e_c = ds_c["e_int"].sel(level=comp).values
    e_d = ds_d["e_int"].sel(level=direct).values
    u_c = (ds_c["e_int_basis_uncertainty"].sel(level=comp).values if "e_int_basis_uncertainty" in ds_c
           else np.full(e_c.shape, np.nan))
    print(f"{'R / Å':>8s} {'composite':>11s} {'direct':>11s} {'Δ':>8s} {'basis unc.':>11s}  (E_int, kcal/mol)")
    for r, a, b, u in zip(ds_c["distance"].values, e_c, e_d, u_c):
        print(f"{r:8.3f} {a:11.4f} {b:11.4f} {a - b:8.4f} {u:11.4f}")
    ratio = cpu_d / cpu_c
    print(f"wall-time ratio direct/composite: {t_d / t_c:.2f}")
    delta = float(np.nanmax(np.abs(e_c - e_d)))
    print(f"cost ratio direct/composite (CPU time): {ratio:.2f} (target >= {COST_TARGET:g}: "
          f"{'met' if ratio >= COST_TARGET else 'NOT met'})")
    print(f"max |ΔE_int|: {delta:.4f} kcal/mol (target <= {AGREEMENT_KCAL_PER_MOL:g}: "
          f"{'met' if delta <= AGREEMENT_KCAL_PER_MOL else 'NOT met'})")
    if (args.composite, args.direct) != (COMPOSITE, DIRECT):
        print("note: levels other than the defaults; the targets refer to the default pair")


if __name__ == "__main__":
    main()
