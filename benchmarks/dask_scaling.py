"""Dask executor: speed-up of 2 workers over 1 and the cost of one task per calculation.

Runs the same counterpoise scan of the water-methanol demo dimer (HF/def2-SVP, 8
points, 26 calculations) three times in one process (machines are noisy, so only
ratios measured in the same run mean anything):

* serial: ``run_scan(executor="serial")`` in this process, one BLAS/OpenMP thread;
* Dask, 1 worker: a LocalCluster (127.0.0.1) with one single-threaded worker process;
* Dask, 2 workers: the same with two worker processes.

Every configuration first runs a one-point warm-up scan of another geometry, so module
imports and first-call costs on the workers are not counted; cluster start-up is not
counted either. Prints the wall times, the speed-up of 2 workers over 1, the per-task
overhead of the Dask executor against the serial one ((t_dask1 - t_serial) / tasks, and
t_dask1 / t_serial), the share of calculations that started from a previous point's
density, and the largest difference of a total energy from the serial run.
"""

from __future__ import annotations

import argparse
import json
import os
import tempfile
import time
from pathlib import Path

import numpy as np

import interkit as ik
from interkit.run.plan import plan_scan

FACTORS = (0.85, 0.9, 0.95, 1.0, 1.1, 1.25, 1.5, 1.8)


def _guess_share(store: str) -> float:
    """Share of stored calculations whose SCF started from a previous point's density."""
    records = [json.loads(p.read_text())["record"] for p in Path(store).glob("objects/*/*.json")]
    return float(np.mean([r.get("guess") == "previous point" for r in records])) if records else float("nan")


def _timed(spec, warm, executor, repeat: int):
    ik.run_scan(warm, executor=executor, progress=False, cache=None)
    best, ds, share = float("inf"), None, float("nan")
    for _ in range(repeat):
        with tempfile.TemporaryDirectory() as store:
            t0 = time.perf_counter()
            ds = ik.run_scan(spec, executor=executor, cache=store, progress=False)
            elapsed = time.perf_counter() - t0
            if elapsed < best:
                best, share = elapsed, _guess_share(store)
    return best, ds, share


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--system", default="water_methanol")
    parser.add_argument("--level", default="hf/def2-svp")
    parser.add_argument("--repeat", type=int, default=1, help="runs per configuration (best is kept)")
    args = parser.parse_args()

    from distributed import Client
    from pyscf import lib
    from threadpoolctl import threadpool_limits

    from interkit.run.dask import local_cluster

    load = os.getloadavg()
    threadpool_limits(1)
    lib.num_threads(1)
    dimer = ik.load_demo(args.system)
    contact = ik.demo_catalog()[args.system]["contact"]
    spec = ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(*contact), factors=FACTORS, levels=[args.level])
    warm = ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(*contact), factors=[3.0], levels=[args.level])
    n_tasks = len(plan_scan(spec).jobs)

    t_serial, ref, share_serial = _timed(spec, warm, "serial", args.repeat)
    times, shares, diffs = {}, {}, {}
    for n in (1, 2):
        with local_cluster(n_workers=n, threads_per_worker=1) as cluster, Client(cluster) as client:
            client.wait_for_workers(n)
            times[n], ds, shares[n] = _timed(spec, warm, client, args.repeat)
            diffs[n] = float(np.nanmax(np.abs(ds["e_total_hartree"].values - ref["e_total_hartree"].values)))

    print(f"system: {args.system}, {len(spec.points)} points, {args.level}, counterpoise, {n_tasks} calculations")
    print(f"machine: {os.cpu_count()} cores, load average {load[0]:.1f} before and "
          f"{os.getloadavg()[0]:.1f} after (other work on the machine limits the speed-up)")
    print(f"serial executor            : {t_serial:8.2f} s   (previous-point guesses: {share_serial:.0%})")
    for n in (1, 2):
        label = f"dask, {n} worker{'s' if n > 1 else ''}"
        print(f"{label:<27s}: {times[n]:8.2f} s   "
              f"(previous-point guesses: {shares[n]:.0%}; max |dE_total| vs serial {diffs[n]:.1e} Eh)")
    print(f"speed-up, 2 workers over 1 : {times[1] / times[2]:8.2f} x")
    overhead = (times[1] - t_serial) / n_tasks
    print(f"per-task overhead          : {1000 * overhead:8.1f} ms per calculation "
          f"(dask 1 worker / serial = {times[1] / t_serial:.3f})")


if __name__ == "__main__":
    main()
