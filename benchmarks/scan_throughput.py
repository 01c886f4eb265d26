"""Throughput of counterpoise scans: run_scan against two pyscf loops, in the same run.

Per case (demo dimer, basis, number of points; B3LYP-D3(BJ)) three ways compute the
same counterpoise-corrected curve (machines are noisy: only ratios within one run mean
something):

* straightforward loop: five fresh SCF calculations per point (dimer, A and B in the
  dimer basis, A and B in their own basis), exact integrals, pyscf defaults, one after
  another in one process with pyscf's threads on all cores;
* competent loop: density fitting, pyscf defaults otherwise, the points spread over all
  cores with multiprocessing (one thread per process), the own-basis monomers once per
  rigid scan, coordinates converted with CODATA 2018 as interkit does;
* interkit: ``run_scan(executor="processes")`` with a fresh store.

Both loops add the same D3(BJ) term (interkit's dispersion function on the real atoms).
Printed per case: wall times and ratios, the largest |ΔE_int| against the competent
loop (kcal/mol), the peak resident memory of a worker (VmHWM of the worker processes,
sampled from /proc), the mean SCF cycles per calculation, and at the end the growth
exponent of time per calculation with the number of basis functions (least squares of
log t against log nbasis). Targets (2 cores): >= 5x and >= 3x against the two loops on
the 9-atom dimer, >= 3x against the competent loop on the 23-atom dimer, |ΔE_int| <= 0.005.

``--quick``: one small case (water-methanol, def2-SVP, 3 points).
"""

from __future__ import annotations

import argparse
import multiprocessing
import os
import tempfile
import threading
import time

import numpy as np

import interkit as ik
from interkit.engine.dispersion import dispersion_energy_and_gradient
from interkit.run.plan import plan_scan
from interkit.units import ANGSTROM_TO_BOHR, HARTREE_TO_KCAL_PER_MOL

FACTORS = (0.85, 0.9, 0.95, 1.0, 1.05, 1.1, 1.2, 1.35, 1.5, 1.75)
FULL_CASES = (("water_methanol", "def2-svp", 10), ("nma_water", "def2-svp", 6),
              ("benzene_pyridine", "def2-svp", 3), ("water_methanol", "def2-tzvp", 10))
QUICK_CASES = (("water_methanol", "def2-svp", 3),)
XC = "b3lyp"


def _spec(system: str, basis: str, n_points: int) -> ik.ScanSpec:
    contact = ik.demo_catalog()[system]["contact"]
    factors = FACTORS if n_points >= len(FACTORS) else tuple(np.linspace(0.9, 1.5, n_points).round(4))
    return ik.ScanSpec(dimer=ik.load_demo(system), coordinate=ik.AtomPair(*contact), factors=list(factors),
                       levels=[f"{XC}-d3bj/{basis}"])


def _vmhwm_mb(pid="self") -> float:
    try:
        with open(f"/proc/{pid}/status") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return float(line.split()[1]) * 1024 / 1e6
    except OSError:
        pass
    return 0.0


class ChildPeak:
    """Largest VmHWM (MB) of any descendant process, sampled every 0.2 s."""

    def __init__(self):
        self.peak = 0.0
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def _children(self, pid: int) -> list[int]:
        out = []
        try:
            for task in os.listdir(f"/proc/{pid}/task"):
                with open(f"/proc/{pid}/task/{task}/children") as fh:
                    out += [int(x) for x in fh.read().split()]
        except OSError:
            pass
        return out

    def _run(self):
        while not self._stop.wait(0.2):
            todo, seen = [os.getpid()], set()
            while todo:
                for child in self._children(todo.pop()):
                    if child not in seen:
                        seen.add(child)
                        todo.append(child)
                        self.peak = max(self.peak, _vmhwm_mb(child))

    def __enter__(self):
        self._thread.start()
        return self

    def __exit__(self, *exc):
        self._stop.set()
        self._thread.join()


def _calc(d, real, ghost, basis, fitted):
    """One SCF (hartree) with pyscf defaults; returns (energy, cycles, nao)."""
    from pyscf import dft, gto

    atoms = [(("ghost-" if i in ghost else "") + d.symbols[i], tuple(float(x) * ANGSTROM_TO_BOHR for x in d.coordinates[i]))
             for i in sorted(list(real) + list(ghost))]
    mol = gto.M(atom=atoms, basis=basis, unit="Bohr", verbose=0)
    mf = dft.RKS(mol, xc=XC)
    if fitted:
        mf = mf.density_fit()
    e = mf.kernel()
    return float(e), int(mf.cycles), int(mol.nao)


def _d3(d, atoms) -> float:
    idx = sorted(atoms)
    return dispersion_energy_and_gradient([d.symbols[i] for i in idx], np.asarray(d.coordinates)[idx], XC, "d3bj")[0]


def straightforward_loop(spec, basis):
    from pyscf import lib

    lib.num_threads(os.cpu_count() or 1)
    out, cycles = [], []
    try:
        for point in spec.points:
            d = point.dimer
            a, b = d.fragment_a, d.fragment_b
            e_ab, e_a, e_b = (_calc(d, r, g, basis, False) for r, g in ((a + b, ()), (a, b), (b, a)))
            own = [_calc(d, a, (), basis, False), _calc(d, b, (), basis, False)]  # recomputed per point
            cycles += [x[1] for x in (e_ab, e_a, e_b, *own)]
            disp = _d3(d, a + b) - _d3(d, a) - _d3(d, b)
            out.append((e_ab[0] - e_a[0] - e_b[0] + disp) * HARTREE_TO_KCAL_PER_MOL)
    finally:
        lib.num_threads(1)
    return np.array(out), cycles


def _competent_point(args):
    d, basis = args
    from pyscf import lib

    lib.num_threads(1)
    a, b = d.fragment_a, d.fragment_b
    res = [_calc(d, r, g, basis, True) for r, g in ((a + b, ()), (a, b), (b, a))]
    disp = _d3(d, a + b) - _d3(d, a) - _d3(d, b)
    return (res[0][0] - res[1][0] - res[2][0] + disp) * HARTREE_TO_KCAL_PER_MOL, [r[1] for r in res], _vmhwm_mb()


def _competent_own(args):
    d, atoms, basis = args
    from pyscf import lib

    lib.num_threads(1)
    e, cyc, _ = _calc(d, atoms, (), basis, True)
    return e, cyc, _vmhwm_mb()


def competent_loop(spec, basis):
    cores = os.cpu_count() or 1
    d0 = spec.dimer
    ctx = multiprocessing.get_context("fork")
    with ctx.Pool(cores, maxtasksperchild=None) as pool:
        own = pool.map_async(_competent_own, [(d0, d0.fragment_a, basis), (d0, d0.fragment_b, basis)])
        points = pool.map(_competent_point, [(p.dimer, basis) for p in spec.points], chunksize=1)
        own = own.get()
    e = np.array([p[0] for p in points])
    cycles = [c for p in points for c in p[1]] + [o[1] for o in own]
    peak = max([p[2] for p in points] + [o[2] for o in own])
    return e, cycles, peak


def run_case(system, basis, n_points, straightforward=True):
    spec = _spec(system, basis, n_points)
    n_calcs_loop = 5 * len(spec.points)
    t0 = time.perf_counter()
    e_plain, cyc_plain = straightforward_loop(spec, basis) if straightforward else (np.nan, [np.nan])
    t_plain = time.perf_counter() - t0 if straightforward else np.nan
    t0 = time.perf_counter()
    e_comp, cyc_comp, peak_comp = competent_loop(spec, basis)
    t_comp = time.perf_counter() - t0
    with tempfile.TemporaryDirectory() as store, ChildPeak() as peak:
        t0 = time.perf_counter()
        ds = ik.run_scan(spec, executor="processes", cache=store, progress=False)
        t_ik = time.perf_counter() - t0
    e_ik = ds["e_int"].values[0]
    cyc_ik = ds["scf_cycles"].values[0]
    nao = int(plan_scan(spec).feasibility["levels"][spec.levels[0].label]["nbasis"])
    row = {
        "system": system, "basis": basis, "points": len(spec.points), "natoms": spec.dimer.natoms, "nbasis": nao,
        "t_plain": t_plain, "t_comp": t_comp, "t_ik": t_ik,
        "dE_comp": float(np.max(np.abs(e_ik - e_comp))), "dE_plain": float(np.max(np.abs(e_ik - e_plain))),
        "peak_comp": peak_comp, "peak_ik": peak.peak, "peak_est": ds.attrs.get("worker_peak_estimate_mb", np.nan),
        "workers": ds.attrs["workers"], "cyc_plain": float(np.mean(cyc_plain)), "cyc_comp": float(np.mean(cyc_comp)),
        "cyc_ik": float(np.nanmean(cyc_ik)), "n_ik": int(ds.attrs["calculations_computed"]),
        "n_plain": n_calcs_loop, "n_comp": 3 * len(spec.points) + 2, "grid": spec.levels[0].grid_level,
    }
    print(f"\n{system} ({row['natoms']} atoms, {nao} basis functions) {XC}-d3bj/{basis}, {row['points']} points, "
          f"interkit grid level {row['grid']}, {row['workers']} workers; load average {os.getloadavg()[0]:.1f}")
    print(f"  straightforward loop {t_plain:8.1f} s   {row['cyc_plain']:5.1f} SCF cycles/calc   ratio {t_plain / t_ik:5.2f}x "
          f"(target 5x)   max|dE_int| {row['dE_plain']:.4f} kcal/mol")
    print(f"  competent loop       {t_comp:8.1f} s   {row['cyc_comp']:5.1f} SCF cycles/calc   ratio {t_comp / t_ik:5.2f}x "
          f"(target 3x)   peak/worker {peak_comp:7.0f} MB")
    print(f"  interkit run_scan    {t_ik:8.1f} s   {row['cyc_ik']:5.1f} SCF cycles/calc   "
          f"max|dE_int| vs competent {row['dE_comp']:.4f} kcal/mol (target 0.005)   peak/worker {peak.peak:7.0f} MB "
          f"(estimate {row['peak_est']:.0f} MB)", flush=True)
    return row


def growth_exponents(rows):
    """Exponent p of t_per_calc ~ nbasis**p per method (None with fewer than two sizes)."""
    if len({r["nbasis"] for r in rows}) < 2:
        return None
    x = np.log([r["nbasis"] for r in rows])
    out = {}
    for name, t, n in (("straightforward", "t_plain", "n_plain"), ("competent", "t_comp", "n_comp"),
                       ("interkit", "t_ik", "n_ik")):
        y = np.log([r[t] / r[n] for r in rows])
        out[name] = float(np.polyfit(x, y, 1)[0])
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="one small case (smoke run)")
    parser.add_argument("--case", action="append", default=[], metavar="SYSTEM:BASIS:POINTS",
                        help="run only this case (repeatable), e.g. benzene_pyridine:def2-svp:3")
    parser.add_argument("--no-straightforward", action="store_true", help="skip the straightforward loop")
    args = parser.parse_args()
    print(f"cores: {os.cpu_count()}, load average at start: {os.getloadavg()}")
    cases = [(c.split(":")[0], c.split(":")[1], int(c.split(":")[2])) for c in args.case]
    cases = cases or (QUICK_CASES if args.quick else FULL_CASES)
    rows = [run_case(*case, straightforward=not args.no_straightforward) for case in cases]
    exps = growth_exponents(rows)
    if exps:
        print("\ngrowth exponent of time per calculation with basis functions: "
              + ", ".join(f"{k} {v:.2f}" for k, v in exps.items()))
    print(f"load average at end: {os.getloadavg()}")


if __name__ == "__main__":
    main()
