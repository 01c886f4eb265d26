"""Cost and accuracy of composite references against a direct CCSD(T) calculation.

Three counterpoise-corrected scans of the same S22 water dimer points (ase geometry,
centre-of-mass separation scaled by 0.9, 1.0, 1.2), in the same process, one thread, each
with a fresh store so that nothing is reused between them (each cost is complete):

* direct ``ccsd(t)/aug-cc-pvtz``;
* the same-basis composite ``mp2/aug-cc-pvtz + ccsd(t)/aug-cc-pvdz`` (MP2/aug-cc-pVTZ plus
  CCSD(T) - MP2 in aug-cc-pVDZ, the additive estimate of CCSD(T)/aug-cc-pVTZ; Jurečka,
  Šponer, Černý, Hobza, Phys. Chem. Chem. Phys. 8, 1985 (2006)) -- the targets: at least
  5x cheaper than the direct scan (CPU time) and within 0.1 kcal/mol of it;
* the basis-set-limit composite ``mp2/aug-cc-pvtz~aug-cc-pvqz + ccsd(t)/aug-cc-pvdz``
  (MP2 correlation energy extrapolated X^-3 from aug-cc-pVTZ/aug-cc-pVQZ, Hartree–Fock at
  aug-cc-pVQZ, same correction): its cost ratio, its difference from the direct aTZ curve
  and, at the S22 geometry (factor 1.0), from the S22B value -4.989 kcal/mol (Marshall,
  Burns, Sherrill, J. Chem. Phys. 135, 194102 (2011)). It estimates the basis-set limit,
  not CCSD(T)/aug-cc-pVTZ, so no agreement target is set against the direct curve.

Prints the wall and CPU time of each scan (serial executor: every calculation runs in
this process, so its CPU time is the cost even on a loaded machine; ratios use CPU
time), and E_int per point. ``--quick`` runs the equilibrium point only. ``--direct``,
``--same-basis``, ``--cbs`` change the levels (e.g. cc-pVDZ bases for a fast try of the
script itself; the targets then do not apply).
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

SAME_BASIS = "mp2/aug-cc-pvtz + ccsd(t)/aug-cc-pvdz"
CBS = "mp2/aug-cc-pvtz~aug-cc-pvqz + ccsd(t)/aug-cc-pvdz"
DIRECT = "ccsd(t)/aug-cc-pvtz"
FACTORS = (0.9, 1.0, 1.2)
COST_TARGET = 5.0               # same-basis composite at least this many times cheaper (CPU)
AGREEMENT_KCAL_PER_MOL = 0.1    # largest |same-basis composite - direct| allowed
#: S22B water dimer, kcal/mol (Marshall, Burns, Sherrill, J. Chem. Phys. 135, 194102 (2011))
S22B_WATER_KCAL_PER_MOL = -4.989


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


def _energies(ds, level: str) -> tuple[np.ndarray, np.ndarray]:
    row = row_of(ds, level)
    e = ds["e_int"].sel(level=row).values
    u = (ds["e_int_basis_uncertainty"].sel(level=row).values if "e_int_basis_uncertainty" in ds
         else np.full(e.shape, np.nan))
    return e, u


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="one point (factor 1.0) instead of three")
    parser.add_argument("--direct", default=DIRECT, help=f"direct level (default {DIRECT!r})")
    parser.add_argument("--same-basis", default=SAME_BASIS, help=f"same-basis composite (default {SAME_BASIS!r})")
    parser.add_argument("--cbs", default=CBS, help=f"basis-set-limit composite (default {CBS!r})")
    args = parser.parse_args()
    from pyscf import lib

    lib.num_threads(int(os.environ["OMP_NUM_THREADS"]))
    factors = (1.0,) if args.quick else FACTORS
    print(f"S22 water dimer, centre-of-mass factors {', '.join(f'{f:g}' for f in factors)}; "
          f"{lib.num_threads()} thread(s); a fresh store per scan; load average "
          f"{', '.join(f'{x:.1f}' for x in os.getloadavg())}", flush=True)
    runs = {}
    for name, level in (("same-basis", args.same_basis), ("direct", args.direct), ("CBS", args.cbs)):
        ds, wall, cpu = timed_scan(level, factors)
        runs[name] = (level, ds, wall, cpu)
        print(f"{name:10s} {level}: {wall:9.1f} s wall, {cpu:9.1f} s CPU", flush=True)
        e, _ = _energies(ds, level)
        print(f"{'':10s} E_int / kcal/mol: {', '.join(f'{x:.4f}' for x in e)}", flush=True)
    _, ds_d, wall_d, cpu_d = runs["direct"]
    e_d, _ = _energies(ds_d, args.direct)
    print(f"{'R / Å':>8s} {'direct':>10s} {'same-basis':>11s} {'Δ':>8s} {'CBS':>10s} {'Δ':>8s} "
          f"{'CBS unc.':>9s}  (E_int, kcal/mol; Δ against direct)")
    e_s, _ = _energies(runs["same-basis"][1], args.same_basis)
    e_c, u_c = _energies(runs["CBS"][1], args.cbs)
    for r, d, s, c, u in zip(ds_d["distance"].values, e_d, e_s, e_c, u_c):
        print(f"{r:8.3f} {d:10.4f} {s:11.4f} {s - d:8.4f} {c:10.4f} {c - d:8.4f} {u:9.4f}")
    for name in ("same-basis", "CBS"):
        level, _, wall, cpu = runs[name]
        print(f"{name}: cost ratio direct/composite {cpu_d / cpu:.2f} (CPU time), {wall_d / wall:.2f} (wall time)")
    ratio = cpu_d / runs["same-basis"][3]
    delta = float(np.nanmax(np.abs(e_s - e_d)))
    print(f"same-basis target: cost ratio {ratio:.2f} >= {COST_TARGET:g}: {'met' if ratio >= COST_TARGET else 'NOT met'}; "
          f"max |ΔE_int| {delta:.4f} <= {AGREEMENT_KCAL_PER_MOL:g} kcal/mol: "
          f"{'met' if delta <= AGREEMENT_KCAL_PER_MOL else 'NOT met'}")
    if 1.0 in factors:
        i = list(factors).index(1.0)
        print(f"at the S22 geometry: S22B {S22B_WATER_KCAL_PER_MOL:.3f} kcal/mol; CBS composite "
              f"{e_c[i] - S22B_WATER_KCAL_PER_MOL:+.4f}, same-basis {e_s[i] - S22B_WATER_KCAL_PER_MOL:+.4f}, "
              f"direct {e_d[i] - S22B_WATER_KCAL_PER_MOL:+.4f} from it")
    if (args.direct, args.same_basis, args.cbs) != (DIRECT, SAME_BASIS, CBS):
        print("note: levels other than the defaults; the targets refer to the default levels")


if __name__ == "__main__":
    main()
