"""A study against separate scans: the S22 set at a cheap level, single points.

The same systems are computed twice in one process, with the same executor (local
processes, all cores, no store), alternating the order over ``--repeat`` rounds
(machines are noisy, so only ratios measured in the same run mean anything):

* separate: one ``ik.run_scan`` call per system, one after the other;
* study: one ``ik.run_study`` call for all systems (one plan, one executor call).

A one-system warm-up comes first, so imports and first-call costs are not counted.
Prints the wall times, the ratio t_separate / t_study (target >= 1.0: the study is not
slower), the core usage of each (CPU seconds of this process and its worker processes
over wall time x cores; 1.0 = every core busy throughout) and the largest difference of
a total energy between the two (hartree).

    OMP_NUM_THREADS=1 python benchmarks/study_throughput.py [--level hf/sto-3g] [--systems 22] [--repeat 1]
"""

from __future__ import annotations

import argparse
import os
import resource
import time

import numpy as np

import interkit as ik
from interkit.data.study_tree import system_datasets
from interkit.run.plan import plan_scan


def _cpu_seconds() -> float:
    own, children = resource.getrusage(resource.RUSAGE_SELF), resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + children.ru_utime + children.ru_stime


def _timed(run):
    cpu, t0 = _cpu_seconds(), time.perf_counter()
    out = run()
    wall = time.perf_counter() - t0
    return out, wall, (_cpu_seconds() - cpu) / (wall * (os.cpu_count() or 1))


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--level", default="hf/sto-3g")
    parser.add_argument("--systems", type=int, default=22, help="first N systems of S22 (default 22)")
    parser.add_argument("--repeat", type=int, default=1)
    args = parser.parse_args(argv)
    study = ik.s22_study(levels=[args.level], systems=list(range(1, args.systems + 1)))
    ik.run_study(study.with_systems([study.names[1]]), progress=False)   # warm-up
    ik.run_scan(study.specs[7], progress=False)
    times = {"separate": [], "study": []}
    usage = {"separate": [], "study": []}
    worst = 0.0
    for k in range(args.repeat):
        order = ("separate", "study") if k % 2 == 0 else ("study", "separate")
        results = {}
        for what in order:
            if what == "separate":
                run = lambda: {s.name: ik.run_scan(s, progress=False) for s in study.specs}  # noqa: E731
            else:
                run = lambda: system_datasets(ik.run_study(study, progress=False))  # noqa: E731
            results[what], wall, used = _timed(run)
            times[what].append(wall)
            usage[what].append(used)
        for name, ds in results["separate"].items():
            diff = np.abs(ds["e_total_hartree"].values - results["study"][name]["e_total_hartree"].values)
            worst = max(worst, float(np.nanmax(diff)))
    n_calc = sum(len(plan_scan(s, check=False).jobs) for s in study.specs)
    t_sep, t_study = float(np.median(times["separate"])), float(np.median(times["study"]))
    print(f"S22 ({len(study.specs)} systems, {n_calc} calculations) at {args.level}, single points, "
          f"{os.cpu_count()} cores, {args.repeat} round(s)")
    print(f"separate run_scan calls: {t_sep:7.2f} s   core usage {np.median(usage['separate']):.2f}")
    print(f"one run_study call:      {t_study:7.2f} s   core usage {np.median(usage['study']):.2f}")
    print(f"ratio t_separate / t_study = {t_sep / t_study:.2f} (target >= 1.0)")
    print(f"largest |E_total(study) - E_total(separate)| = {worst:.1e} hartree")


if __name__ == "__main__":
    main()
