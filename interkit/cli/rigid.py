"""Commands of ``interkit`` for the bound geometry and site-site fits.

    interkit optimise INPUT -o traj.nc [--level L] [--xyz final.xyz] [--force-tol F] ...
        INPUT: a TOML spec file (its dimer and its one level) or an XYZ file (with --level)
    interkit fit-sites scan.nc [scan2.nc ...] --model lj|buckingham-tt [--c8]
        [--type ELEMENT=TYPE ...] [--charge ELEMENT=Q ...] [--csv p.csv] [--json p.json] [--plot fit.png]
"""

from __future__ import annotations

import os

from ..errors import InputError


def add_commands(sub) -> None:
    """Register ``optimise`` and ``fit-sites`` on the ``interkit`` sub-command parser."""
    from ..run.optimise import (
        DEFAULT_ENERGY_TOL_KCAL_PER_MOL,
        DEFAULT_FORCE_TOL_KCAL_PER_MOL_PER_ANGSTROM,
        DEFAULT_TORQUE_TOL_KCAL_PER_MOL,
    )
    from ..run.store import DEFAULT_STORE_FOLDER, STORE_ENV_VARIABLE

    p = sub.add_parser("optimise", help="counterpoise-corrected rigid-body minimum of B relative to A "
                                        "(monomers rigid); writes the trajectory and the final XYZ")
    p.add_argument("input", help="TOML spec file (its dimer and level) or XYZ file (with --level)")
    p.add_argument("-o", "--output", required=True, help="netCDF trajectory file to write")
    p.add_argument("--xyz", default=None, help="final geometry as XYZ (default: the --output name with .xyz)")
    p.add_argument("--level", default=None, help="level with analytic forces, e.g. hf/def2-svp "
                                                 "(required with an XYZ file)")
    p.add_argument("--fragment-a", type=int, nargs="+", default=None, metavar="I",
                   help="XYZ input: 0-based atoms of fragment A (default: split by covalent connectivity)")
    p.add_argument("--charges", type=int, nargs=2, default=(0, 0), metavar=("QA", "QB"),
                   help="XYZ input: charges of fragments A and B (default: 0 0)")
    p.add_argument("--multiplicities", type=int, nargs=2, default=(1, 1), metavar=("MA", "MB"),
                   help="XYZ input: spin multiplicities of fragments A and B (default: 1 1)")
    p.add_argument("--force-tol", type=float, default=DEFAULT_FORCE_TOL_KCAL_PER_MOL_PER_ANGSTROM,
                   help="converged below this net force on B, kcal/mol/Å (default: %(default)s)")
    p.add_argument("--torque-tol", type=float, default=DEFAULT_TORQUE_TOL_KCAL_PER_MOL,
                   help="converged below this torque on B, kcal/mol per rad (default: %(default)s)")
    p.add_argument("--energy-tol", type=float, default=DEFAULT_ENERGY_TOL_KCAL_PER_MOL,
                   help="converged when the next step is predicted to gain less, kcal/mol (default: %(default)s)")
    p.add_argument("--max-steps", type=int, default=60, help="most evaluations (default: %(default)s)")
    p.add_argument("--cache", default=os.environ.get(STORE_ENV_VARIABLE, "").strip() or DEFAULT_STORE_FOLDER,
                   help="result store folder (default: %(default)s); a rerun reuses every step")

    p = sub.add_parser("fit-sites", help="fit site-site pair potentials (LJ 12-6 or Buckingham with "
                                         "Tang-Toennies damping) by atom type to saved scans")
    p.add_argument("scans", nargs="+", help="netCDF scan files")
    p.add_argument("--model", required=True, choices=["lj", "buckingham-tt"])
    p.add_argument("--c8", action="store_true", help="buckingham-tt: also a damped C8 term")
    p.add_argument("--level", default=None, help="level to fit (needed when a scan has several)")
    p.add_argument("--type", action="append", default=[], metavar="ELEMENT=TYPE",
                   help="atom type of an element (default: the element itself); repeatable")
    p.add_argument("--charge", action="append", default=[], metavar="ELEMENT=Q",
                   help="fixed point charge of an element, e (all elements or none); repeatable")
    p.add_argument("--csv", default=None, help="write the parameter table as CSV")
    p.add_argument("--json", default=None, help="write parameters, uncertainties and RMSDs as JSON")
    p.add_argument("--plot", default=None, help="write the fitted and computed curves as PNG/PDF/SVG")


def _read_input(args):
    from ..model.geometry import Dimer

    path = args.input
    if not os.path.isfile(path):
        raise InputError(f"input: {path!r} does not exist")
    if path.lower().endswith(".toml"):
        from ..model.spec_file import load_spec_toml

        spec = load_spec_toml(path)
        if args.level is None:
            if len(spec.levels) != 1:
                raise InputError(f"levels: the spec has {len(spec.levels)} levels; name one with --level")
            return spec.dimer, spec.levels[0]
        return spec.dimer, args.level
    if not path.lower().endswith(".xyz"):
        raise InputError(f"input: {path!r} should end in .toml or .xyz")
    if args.level is None:
        raise InputError("--level: an XYZ input needs a level, e.g. --level hf/def2-svp")
    return Dimer.from_xyz(path, fragment_a=args.fragment_a, charges=tuple(args.charges),
                          multiplicities=tuple(args.multiplicities)), args.level


def cmd_optimise(args) -> int:
    from ..data.rigid_trajectory import save_trajectory
    from ..model.levels import parse_level
    from ..run.optimise import RigidBodyEnergy, optimise_dimer
    from .output import check_output

    check_output(args.output, "--output", (".nc",), "netCDF")
    xyz = args.xyz or os.path.splitext(args.output)[0] + ".xyz"
    check_output(xyz, "--xyz", (".xyz",), "XYZ")
    dimer, level = _read_input(args)
    energy = RigidBodyEnergy(parse_level(level), cache=args.cache)  # refuses levels without forces
    res = optimise_dimer(dimer, level, max_steps=args.max_steps, energy_tol_kcal_per_mol=args.energy_tol,
                         force_tol_kcal_per_mol_per_angstrom=args.force_tol,
                         torque_tol_kcal_per_mol=args.torque_tol, energy=energy)
    tr = res.trajectory
    print(f"rigid-body optimisation, {tr.attrs['level']}, counterpoise-corrected")
    print(f"{'step':>4s}  {'E_int/kcal mol-1':>16s}  {'|F_B|/kcal mol-1 Å-1':>20s}  "
          f"{'|tau_B|/kcal mol-1':>18s}  taken")
    for k in range(tr.sizes["step"]):
        print(f"{k:4d}  {float(tr['e_int'][k]):16.5f}  {float(tr['force_norm'][k]):20.5f}  "
              f"{float(tr['torque_norm'][k]):18.5f}  {'yes' if bool(tr['accepted'][k]) else 'no'}")
    state = "converged" if res.converged else f"NOT converged after {res.evaluations} evaluations"
    print(f"{state}: E_int = {res.e_int_kcal_per_mol:.5f} kcal/mol; "
          f"{tr.attrs['calculations_computed']} calculations computed, the rest from the store")
    save_trajectory(tr, args.output)
    with open(xyz, "w", encoding="utf-8") as fh:
        fh.write(res.dimer.to_xyz_string(f"{dimer.name}: rigid-body optimum, {tr.attrs['level']}, "
                                         f"counterpoise-corrected, E_int = {res.e_int_kcal_per_mol:.5f} kcal/mol"
                                         + ("" if res.converged else " (not converged)")))
    print(f"wrote {args.output} and {xyz}")
    return 0 if res.converged else 1


def _pairs(items: list[str], option: str, kind=str) -> dict | None:
    if not items:
        return None
    out = {}
    for item in items:
        key, sep, value = item.partition("=")
        if not sep or not key.strip() or not value.strip():
            raise InputError(f"{option}: {item!r} is not ELEMENT=VALUE")
        try:
            out[key.strip()] = kind(value.strip())
        except ValueError:
            raise InputError(f"{option}: {value!r} of {key!r} is not a number") from None
    return out


def cmd_fit_sites(args) -> int:
    from ..analysis.site_fits import fit_site_site
    from ..data.schema import open_scan
    from .output import check_output

    for path, opt, suffixes, kind in ((args.csv, "--csv", (".csv",), "CSV"), (args.json, "--json", (".json",), "JSON"),
                                      (args.plot, "--plot", (".png", ".pdf", ".svg"), "figure")):
        if path:
            check_output(path, opt, suffixes, kind)
    types = _pairs(args.type, "--type")
    charges = _pairs(args.charge, "--charge", float)
    scans = {os.path.basename(p): open_scan(p) for p in args.scans}
    fit = fit_site_site(scans, args.model, level=args.level, types=types, charges=charges, c8=args.c8)
    print(f"site-site fit, {fit.model}{' with C8' if fit.c8 else ''}, {fit.n_points} points; weights: {fit.weights}")
    print(f"{'pair':>12s}  {'parameter':>9s}  {'value':>14s}  {'uncertainty':>12s}  unit")
    for row in fit.table():
        print(f"{row['type_a'] + '-' + row['type_b']:>12s}  {row['parameter']:>9s}  {row['value']:14.6g}  "
              f"{row['uncertainty']:12.3g}  {row['unit']}")
    for label, value in fit.rmse_kcal_per_mol.items():
        print(f"RMSD {label}: {value:.4f} kcal/mol (bound points: {fit.rmse_bound_kcal_per_mol[label]:.4f})")
    if args.csv:
        fit.to_csv(args.csv)
        print(f"wrote {args.csv}")
    if args.json:
        fit.to_json(args.json)
        print(f"wrote {args.json}")
    if args.plot:
        import matplotlib

        matplotlib.use("Agg")
        from ..plot.site_fits import plot_site_fit

        ax = plot_site_fit(fit, scans, level=args.level, types=types, charges=charges)
        ax.figure.savefig(args.plot, dpi=120, bbox_inches="tight")
        print(f"wrote {args.plot}")
    return 0


HANDLERS = {"optimise": cmd_optimise, "fit-sites": cmd_fit_sites}
