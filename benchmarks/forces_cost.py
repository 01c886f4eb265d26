"""Cost of forces: a counterpoise scan with forces=True against the same scan without,
in the same run (only the ratio is meaningful on a shared machine).

Forces need one analytic gradient per counterpoise calculation (dimer and both ghosted
monomers); the own-basis monomers need none. Target: ratio <= 1.6.

Every variant runs ``--repeat`` times, alternating, and the shortest time counts (other
processes on a shared machine only ever add time). Ratios of wall times and of CPU times
(this process and its worker processes) are printed; on a busy machine the CPU-time
ratio is the steadier one, since waiting for a core does not count. The target applies
to the wall-time ratio on a quiet machine. HF and DFT gradients share the
fitting-integral derivatives and DFT atom-grid data across the three counterpoise
calculations of a point; MP2 forces are DF-MP2 gradients of the same DF-MP2 energy the
energy-only scan computes (open-shell fragments: conventional MP2 gradients).
"""

from __future__ import annotations

import argparse
import os
import resource
import tempfile
import time

import interkit as ik

FACTORS = (0.9, 0.95, 1.0, 1.1, 1.25, 1.5)


def _cpu_seconds() -> float:
    own = resource.getrusage(resource.RUSAGE_SELF)
    children = resource.getrusage(resource.RUSAGE_CHILDREN)  # finished worker processes
    return own.ru_utime + own.ru_stime + children.ru_utime + children.ru_stime


def timed_scan(spec: ik.ScanSpec) -> tuple[float, float]:
    """Wall time and CPU time (s) of a fresh scan."""
    with tempfile.TemporaryDirectory() as store:
        c0, t0 = _cpu_seconds(), time.perf_counter()
        ds = ik.run_scan(spec, executor="processes", cache=store, progress=False)
        elapsed, cpu = time.perf_counter() - t0, _cpu_seconds() - c0
    assert (ds["status"] != "failed").all()
    return elapsed, cpu


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--system", default="water_methanol")
    parser.add_argument("--levels", nargs="+", default=["hf/def2-svp", "b3lyp-d3bj/def2-svp", "mp2/def2-svp"])
    parser.add_argument("--repeat", type=int, default=2, help="runs per variant; the shortest counts")
    args = parser.parse_args()
    dimer = ik.load_demo(args.system)
    contact = ik.demo_catalog()[args.system]["contact"]
    print(f"system: {args.system}, {len(FACTORS)} points, counterpoise, processes executor, "
          f"{os.cpu_count()} cores, load average {os.getloadavg()[0]:.1f} at the start")
    print(f"{'level':<24s} {'energy only / s':>16s} {'with forces / s':>16s} {'ratio':>7s} "
          f"{'CPU ratio':>10s}")
    for level in args.levels:
        specs = [ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(*contact), factors=FACTORS,
                             levels=[level], forces=forces) for forces in (False, True)]
        times = [float("inf")] * len(specs)
        cpu = [float("inf")] * len(specs)
        for _ in range(max(1, args.repeat)):
            for i, spec in enumerate(specs):
                elapsed, seconds = timed_scan(spec)
                times[i], cpu[i] = min(times[i], elapsed), min(cpu[i], seconds)
        print(f"{level:<24s} {times[0]:16.1f} {times[1]:16.1f} {times[1] / times[0]:7.2f} "
              f"{cpu[1] / cpu[0]:10.2f}")
    print(f"target: ratio <= 1.6 (shortest of {max(1, args.repeat)} runs per variant); "
          f"load average {os.getloadavg()[0]:.1f} at the end")


if __name__ == "__main__":
    main()
