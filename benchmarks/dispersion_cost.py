"""Cost of comparing dispersion corrections: a scan with four schemes (none, D3(0), D3(BJ),
D4) against the same scan with one scheme (B3LYP-D3(BJ)), in the same run.

The schemes leave the density unchanged, so the four-scheme scan runs the same SCFs as
the one-scheme scan and adds only the post-hoc dispersion terms (milliseconds per
calculation). Both scans run twice in the order one, four, four, one, and the ratio
uses the faster run of each, which damps the noise of a shared machine.
Target: ratio <= 1.05.
"""

from __future__ import annotations

import argparse
import tempfile
import time

import interkit as ik

FACTORS = (0.9, 0.95, 1.0, 1.05, 1.1, 1.2, 1.35, 1.6)


def timed_scan(spec: ik.ScanSpec) -> tuple[float, float]:
    """Wall time of a fresh scan (s) and the part spent on post-hoc dispersion (s)."""
    with tempfile.TemporaryDirectory() as store:
        t0 = time.perf_counter()
        ds = ik.run_scan(spec, executor="processes", cache=store, progress=False)
        elapsed = time.perf_counter() - t0
    assert (ds["status"] != "failed").all()
    return elapsed, float(ds.attrs.get("dispersion_wall_time_s", 0.0))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--system", default="water_methanol")
    parser.add_argument("--functional", default="b3lyp")
    parser.add_argument("--basis", default="def2-svp")
    args = parser.parse_args()
    dimer = ik.load_demo(args.system)
    contact = ik.demo.demo_catalog()[args.system]["contact"]
    common = dict(dimer=dimer, coordinate=ik.AtomPair(*contact), factors=FACTORS)
    one = ik.ScanSpec(levels=[f"{args.functional}-d3bj/{args.basis}"], **common)
    four = ik.ScanSpec(levels=[f"{args.functional}/{args.basis}"], dispersion=["none", "d3zero", "d3bj", "d4"],
                       **common)
    print(f"system: {args.system}, {len(FACTORS)} points, counterpoise, processes executor")
    runs = {"one": [], "four": []}
    for name in ("one", "four", "four", "one"):
        runs[name].append(timed_scan(one if name == "one" else four))
    t_one = min(t for t, _ in runs["one"])
    t_four = min(t for t, _ in runs["four"])
    post_hoc = min(p for _, p in runs["four"])
    print(f"{'scan':<34s} {'runs / s':>18s}")
    print(f"{'one scheme (' + one.levels[0].label + ')':<34s} "
          f"{', '.join(f'{t:.1f}' for t, _ in runs['one']):>18s}")
    print(f"{'four schemes (none, d3zero, d3bj, d4)':<34s} "
          f"{', '.join(f'{t:.1f}' for t, _ in runs['four']):>18s}")
    print(f"post-hoc dispersion terms in the four-scheme scan: {post_hoc:.3f} s "
          f"({100 * post_hoc / t_four:.2f} % of the scan)")
    print(f"ratio four / one (faster runs): {t_four / t_one:.3f}   target: <= 1.05")


if __name__ == "__main__":
    main()
