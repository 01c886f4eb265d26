"""Cost of forces: a counterpoise scan with forces=True against the same scan without,
in the same run (only the ratio is meaningful on a shared machine).

Forces need one analytic gradient per counterpoise calculation (dimer and both ghosted
monomers); the own-basis monomers need none. Target: ratio <= 1.6.
"""

from __future__ import annotations

import argparse
import tempfile
import time

import interkit as ik

FACTORS = (0.9, 0.95, 1.0, 1.1, 1.25, 1.5)


def timed_scan(spec: ik.ScanSpec) -> float:
    with tempfile.TemporaryDirectory() as store:
        t0 = time.perf_counter()
        ds = ik.run_scan(spec, executor="processes", cache=store, progress=False)
        elapsed = time.perf_counter() - t0
    assert (ds["status"] != "failed").all()
    return elapsed


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--system", default="water_methanol")
    parser.add_argument("--levels", nargs="+", default=["hf/def2-svp", "b3lyp-d3bj/def2-svp", "mp2/def2-svp"])
    args = parser.parse_args()
    dimer = ik.load_demo(args.system)
    contact = ik.demo.demo_catalog()[args.system]["contact"]
    print(f"system: {args.system}, {len(FACTORS)} points, counterpoise, processes executor")
    print(f"{'level':<24s} {'energy only / s':>16s} {'with forces / s':>16s} {'ratio':>7s}")
    for level in args.levels:
        times = []
        for forces in (False, True):
            spec = ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(*contact), factors=FACTORS,
                               levels=[level], forces=forces)
            times.append(timed_scan(spec))
        print(f"{level:<24s} {times[0]:16.1f} {times[1]:16.1f} {times[1] / times[0]:7.2f}")
    print("target: ratio <= 1.6 (MP2 forces use conventional MP2, energy-only scans DF-MP2)")


if __name__ == "__main__":
    main()
