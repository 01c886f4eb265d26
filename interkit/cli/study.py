"""``interkit study``: run a study and rank its methods (see :mod:`interkit.cli.main`).

    interkit study run FILE.toml -o study.nc [--cache DIR] [--workers N] [--serial] [--quiet] [--scheduler ADDR]
    interkit study rank study.nc [--reference stored|LEVEL|FILE.csv] [--region all|bound|minimum]
                                 [--points curve|equilibrium] [--category C]
    interkit study verify study.nc [--sample N] [--seed S] [--workers N] [--serial] [--quiet]
    interkit study rerun study.nc [-o out.nc] [--cache DIR] [--workers N] [--serial] [--quiet]
    interkit study report study.nc -o report.html [--reference ...] [--region ...]

``verify`` and ``rerun`` exit with status 1 when a number lies outside its tolerance;
``run`` with status 1 when a point failed.
"""

from __future__ import annotations

import os
import sys

from ..errors import InputError


def add_commands(sub, add_run_options) -> None:
    """Register ``interkit study ...`` on the sub-parser collection ``sub``."""
    p = sub.add_parser("study", help="run a collection of dimers (a study) and compare methods over it")
    actions = p.add_subparsers(dest="study_command", metavar="ACTION", parser_class=type(p))
    actions.required = True
    q = actions.add_parser("run", help="run every system of a study TOML file through one executor")
    q.add_argument("study", help="study TOML file")
    q.add_argument("-o", "--output", required=True, help="netCDF file to write (one file, one node per system)")
    add_run_options(q)
    q = actions.add_parser("rank", help="rank the study's methods by their errors against a reference")
    q.add_argument("study", help="netCDF study file")
    _add_reference_options(q)
    q.add_argument("--points", choices=("curve", "equilibrium"), default="curve",
                   help="every point with a reference, or each system's equilibrium point (default: %(default)s)")
    q.add_argument("--category", default="all", help="rank within one category (default: the whole study)")
    q = actions.add_parser("verify", help="recompute sampled points of every system from scratch and compare")
    q.add_argument("study", help="netCDF study file")
    q.add_argument("--sample", type=int, default=1, help="points per system (default: %(default)s)")
    q.add_argument("--seed", type=int, default=0, help="seed of the point sampling (default: %(default)s)")
    q.add_argument("--workers", type=int, default=None, help="worker processes (default: all cores)")
    q.add_argument("--serial", action="store_true", help="run in this process instead of worker processes")
    q.add_argument("--quiet", action="store_true", help="no progress bar")
    q = actions.add_parser("rerun", help="run a saved study again (store entries reused) and compare")
    q.add_argument("study", help="netCDF study file")
    q.add_argument("-o", "--output", default=None, help="netCDF file for the rerun (optional)")
    add_run_options(q)
    q = actions.add_parser("report", help="write a self-contained HTML report of a study")
    q.add_argument("study", help="netCDF study file")
    q.add_argument("-o", "--output", required=True, help="HTML file to write")
    _add_reference_options(q)


def _add_reference_options(q) -> None:
    q.add_argument("--reference", default=None,
                   help="'stored' (the study's reference values), a level of the study, or a CSV of reference "
                        "energies (default: stored values if any, else the most accurate level)")
    q.add_argument("--region", choices=("all", "bound", "minimum"), default="all",
                   help="points compared: all, where the reference binds, or near its minimum (default: %(default)s)")


def _executor_of(args):
    from .saved import _executor

    return _executor(args)


def _save(tree, path: str) -> None:
    from ..data.study_tree import save_study

    try:
        save_study(tree, path)
    except OSError as exc:  # nothing computed is lost: a copy next to the working folder
        import tempfile

        fd, rescue = tempfile.mkstemp(prefix="interkit-study-", suffix=".nc", dir=tempfile.gettempdir())
        os.close(fd)
        save_study(tree, rescue)
        raise InputError(f"--output: {path!r} could not be written ({type(exc).__name__}); "
                         f"the study was saved to {rescue!r}") from None
    print(f"wrote {path}")


def _failed_lines(tree) -> list[str]:
    out = []
    for name, node in tree.children.items():
        n = int((node["status"] == "failed").sum())
        if n:
            out.append(f"system {name}: {n} failed calculation point(s); see its status_detail")
    return out


def cmd_run(args) -> int:
    from ..model.study_file import load_study_toml
    from ..run.study import run_study
    from .output import check_scan_output

    study = load_study_toml(args.study)
    check_scan_output(args.output)
    with _executor_of(args) as executor:
        tree = run_study(study, executor=executor, cache=args.cache, progress=not args.quiet, workers=args.workers)
    _save(tree, args.output)
    print(f"{len(tree.children)} systems, {tree.attrs['calculations_total']} calculations: "
          f"{tree.attrs['calculations_computed']} computed, {tree.attrs['calculations_from_store']} from the store")
    failed = _failed_lines(tree)
    for line in failed:
        print(line)
    if "reference_e_int" in tree.variables or tree.sizes.get("curve", 0) > 1:
        print(ranking_text(tree, None, "all", "curve", "all"))
    return 1 if failed else 0


def ranking_text(tree, reference, region: str, points: str, category: str) -> str:
    """The ranking as a plain text table (kcal/mol)."""
    from ..analysis.study_stats import rank_methods

    table = rank_methods(tree, reference, region, points, category)
    ref = table.attrs["reference"]
    head = (f"ranking against {'the stored reference values' if ref == 'stored' else ref} "
            f"(points: {points}, region: {region}, category: {category}); errors in kcal/mol, "
            "negative = binds more strongly")
    width = max(6, *(len(str(c)) for c in table["curve"]))
    lines = [head, f"{'#':>2}  {'method':<{width}}  {'n':>4}  {'MAE':>7}  {'signed':>7}  {'RMSE':>7}  "
                   f"{'largest':>8}  where"]
    for _, r in table.iterrows():
        lines.append(f"{r['rank']:>2}  {r['curve']:<{width}}  {r['n_points']:>4}  {r['mae_kcal_per_mol']:7.3f}  "
                     f"{r['mean_signed_error_kcal_per_mol']:+7.3f}  {r['rmse_kcal_per_mol']:7.3f}  "
                     f"{r['max_error_kcal_per_mol']:+8.3f}  {r['max_error_system']} "
                     f"({r['max_error_distance_angstrom']:.3f} Å)")
    return "\n".join(lines)


def cmd_rank(args) -> int:
    from ..data.study_tree import open_study

    tree = open_study(args.study)
    print(ranking_text(tree, args.reference, args.region, args.points, args.category))
    return 0


def cmd_verify(args) -> int:
    from ..share.study_replay import verify_study
    from .output import verify_and_print

    return verify_and_print(verify_study, args.study, args)


def cmd_rerun(args) -> int:
    from ..share.study_replay import rerun_study
    from .output import check_scan_output

    if args.output is not None:
        check_scan_output(args.output)
    with _executor_of(args) as executor:
        fresh, check = rerun_study(args.study, cache=args.cache, executor=executor, workers=args.workers,
                                   progress=not args.quiet, log=print)
    print(check)
    if args.output is not None:
        _save(fresh, args.output)
    return 0 if check.passed else 1


def cmd_report(args) -> int:
    from ..share.study_report import write_study_report
    from .output import check_output

    check_output(args.output, "--output", (".html", ".htm"), "HTML")
    write_study_report(args.study, args.output, args.reference, args.region)
    print(f"wrote {args.output}")
    return 0


ACTIONS = {"run": cmd_run, "rank": cmd_rank, "verify": cmd_verify, "rerun": cmd_rerun, "report": cmd_report}


def cmd_study(args) -> int:
    if getattr(args, "sample", 1) is not None and getattr(args, "sample", 1) < 1:
        print(f"interkit: error: --sample: {args.sample} is not a positive number of points", file=sys.stderr)
        return 2
    return ACTIONS[args.study_command](args)


HANDLERS = {"study": cmd_study}
