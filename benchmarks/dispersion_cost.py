"""Cost of comparing dispersion corrections: a scan with four schemes (none, D3(0), D3(BJ),
D4) against the same scan with one scheme (B3LYP-D3(BJ)), in the same run.

The schemes leave the density unchanged, so the four-scheme scan runs the same SCFs as
the one-scheme scan and adds only the post-hoc dispersion terms (milliseconds per
calculation). Both scans run twice in the order one, four, four, one. Two ratios are
printed: of wall times and of CPU times (this process and its worker processes); both
use the faster run of each scan. On a shared machine the CPU-time ratio is the steadier
one, since waiting for a busy core does not count. Target: ratio <= 1.05.
"""

from __future__ import annotations

import argparse
import resource
import tempfile
import time

import interkit as ik

FACTORS = (0.9, 0.95, 1.0, 1.05, 1.1, 1.2, 1.35, 1.6)


def _cpu_seconds() -> float:
    own = resource.getrusage(resource.RUSAGE_SELF)
    children = resource.getrusage(resource.RUSAGE_CHILDREN)  # finished worker processes
    return own.ru_utime + own.ru_stime + children.ru_utime + children.ru_stime


def timed_scan(spec: ik.ScanSpec) -> tuple[float, float, float]:
    """Wall time, CPU time and the post-hoc dispersion part (s) of a fresh scan."""
    with tempfile.TemporaryDirectory() as store:
        c0, t0 = _cpu_seconds(), time.perf_counter()
        ds = ik.run_scan(spec, executor="processes", cache=store, progress=False)
        elapsed, cpu = time.perf_counter() - t0, _cpu_seconds() - c0
    assert (ds["status"] != "failed").all()
    return elapsed, cpu, float(ds.attrs.get("dispersion_wall_time_s", 0.0))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--system", default="water_methanol")
    parser.add_argument("--functional", default="b3lyp")
    parser.add_argument("--basis", default="def2-svp")
    args = parser.parse_args()
    dimer = ik.load_demo(args.system)
    contact = ik.demo_catalog()[args.system]["contact"]
    common = dict(dimer=dimer, coordinate=ik.AtomPair(*contact), factors=FACTORS)
    one = ik.ScanSpec(levels=[f"{args.functional}-d3bj/{args.basis}"], **common)
    four = ik.ScanSpec(levels=[f"{args.functional}/{args.basis}"], dispersion=["none", "d3zero", "d3bj", "d4"],
                       **common)
    print(f"system: {args.system}, {len(FACTORS)} points, counterpoise, processes executor")
    runs = {"one": [], "four": []}
    for name in ("one", "four", "four", "one"):
        runs[name].append(timed_scan(one if name == "one" else four))
    t_one, t_four = (min(r[0] for r in runs[k]) for k in ("one", "four"))
    c_one, c_four = (min(r[1] for r in runs[k]) for k in ("one", "four"))
    post_hoc = min(r[2] for r in runs["four"])
    print(f"{'scan':<40s} {'wall / s':>14s} {'CPU / s':>14s}")
    for key, label in (("one", f"one scheme ({one.levels[0].label})"),
                       ("four", "four schemes (none, d3zero, d3bj, d4)")):
        print(f"{label:<40s} {', '.join(f'{r[0]:.1f}' for r in runs[key]):>14s} "
              f"{', '.join(f'{r[1]:.1f}' for r in runs[key]):>14s}")
    print(f"post-hoc dispersion terms in the four-scheme scan: {post_hoc:.3f} s "
          f"({100 * post_hoc / t_four:.2f} % of its wall time)")
    print(f"ratio four / one: wall {t_four / t_one:.3f}, CPU {c_four / c_one:.3f}   target: <= 1.05")

if __name__ == "__main__":
    main()
