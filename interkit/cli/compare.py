"""``interkit compare``: rank the curves of a saved scan against a reference.

    interkit compare scan.nc [--reference LABEL | --reference-file FILE [--reference-curve LABEL]]
                             [--table out.csv] [--unit kJ/mol]

The reference is a curve of the same scan, named by its folded label (e.g.
``mp2/def2-svp`` or ``b3lyp-d3bj/def2-svp``), or an external curve: a CSV file with
columns ``distance_angstrom`` and ``e_int_kcal_per_mol``, or another saved scan (``.nc``;
``--reference-curve`` picks its curve); by default the most accurate wavefunction level
of the scan.
"""

from __future__ import annotations

import csv

#: columns of the printed and written ranking (row key, header)
COLUMNS = (("rmse_kcal_per_mol", "RMSE"), ("mae_kcal_per_mol", "MAE"),
           ("max_abs_error_kcal_per_mol", "max|err|"),
           ("error_at_reference_minimum_kcal_per_mol", "err@min"),
           ("minimum_shift_angstrom", "ΔR_min/Å"), ("well_depth_error_kcal_per_mol", "ΔDe"))


def add_commands(sub) -> None:
    """Register ``compare`` on the ``interkit`` sub-command parser."""
    p = sub.add_parser("compare", help="rank the curves of a scan (functionals x dispersion schemes) "
                                       "against a reference curve")
    p.add_argument("scan", help="netCDF scan file")
    group = p.add_mutually_exclusive_group()
    group.add_argument("--reference", metavar="LABEL", help="reference curve of the scan, e.g. mp2/def2-svp "
                                                            "(default: its most accurate wavefunction level)")
    group.add_argument("--reference-file", metavar="FILE",
                       help="external reference: CSV with distance_angstrom and e_int_kcal_per_mol, "
                            "or another saved scan (.nc)")
    p.add_argument("--reference-curve", metavar="LABEL",
                   help="curve of the --reference-file scan or CSV table (default: its most accurate "
                        "wavefunction level)")
    p.add_argument("--table", metavar="CSV", help="also write the ranking to this CSV file")
    from .output import add_unit_options

    add_unit_options(p, forces=False)
    p.set_defaults(handler=run_compare)


def _ranking(ds, args) -> tuple[list[dict], str]:
    from ..analysis.comparison import (
        curve_pairs,
        default_reference,
        ranking_table,
        reference_from_file,
        resolve_reference,
    )
    from ..errors import InputError

    if args.reference_curve and not args.reference_file:
        raise InputError("--reference-curve: give --reference-file as well")
    if args.reference_file:
        curve = reference_from_file(args.reference_file, args.reference_curve)
        _, label = resolve_reference(ds, reference=curve, variable=_variable(ds))
        return ranking_table(ds, reference=curve, variable=_variable(ds)), label
    pairs = curve_pairs(ds, _variable(ds))
    if not pairs:
        raise InputError(f"scan {args.scan!r}: no curve has a finite interaction energy to compare")
    choice = args.reference or default_reference(list(pairs))
    if choice not in pairs:
        raise InputError(f"--reference: {choice!r} is not a curve of the scan ({', '.join(pairs)})")
    level, scheme = pairs[choice]
    return ranking_table(ds, reference_level=level, reference_dispersion=scheme, variable=_variable(ds)), choice


def _variable(ds) -> str:
    """``e_int``, or the uncorrected ``e_int_nocp`` of a scan run without counterpoise."""
    return "e_int_nocp" if ds.attrs.get("counterpoise", "") == "none" else "e_int"


def _label(row: dict) -> str:
    from ..data.dispersion import scheme_label
    from ..model.levels import parse_level

    scheme = row.get("dispersion")
    return scheme_label(parse_level(row["level"]), scheme) if scheme else row["level"]


def _shown(row: dict, key: str, unit: str) -> float:
    """A ranking value in the display unit (energies converted, distances kept)."""
    from ..units import convert_energy

    value = row[key]
    return convert_energy(value, "kcal/mol", unit) if key.endswith("_kcal_per_mol") and value == value else value


def run_compare(args) -> int:
    """Print the ranking (energies in ``--unit``, angstrom); optionally write it as CSV
    (kcal/mol, the column names say so)."""
    from ..data.schema import open_scan
    from ..model.level_names import display_label

    if args.table:
        from .output import check_output

        check_output(args.table, "--table", (".csv",), "CSV")
    ds = open_scan(args.scan)
    rows, label = _ranking(ds, args)
    unit = getattr(args, "unit", "kcal/mol")
    width = max([26] + [len(display_label(_label(r))) + 2 for r in rows])
    shown_ref = display_label(label) + (f" (--reference {label})" if display_label(label) != label else "")
    print(f"reference: {shown_ref}; errors in {unit} (curve minus reference)")
    if _variable(ds) == "e_int_nocp":
        print("the scan ran without counterpoise correction: the uncorrected curves (e_int_nocp) are compared")
    print(f"{'rank':>4s}  {'curve':<{width}s}" + "".join(f"{h:>10s}" for _, h in COLUMNS))
    for row in rows:
        cells = "".join(f"{_shown(row, k, unit):>10.3f}" if row[k] == row[k] else f"{'–':>10s}"
                        for k, _ in COLUMNS)
        print(f"{row['rank']:>4d}  {display_label(_label(row)):<{width}s}{cells}")
    if "dispersion_status" in ds.variables:
        for level in ds["level"].values:
            for scheme in ds["dispersion"].values:
                status = str(ds["dispersion_status"].sel(level=level, dispersion=scheme).values)
                if status.startswith("unavailable"):
                    print(f"note: {display_label(str(level))} with {scheme}: {status}")
    print("Note: " + ds.attrs.get("caution", ""))
    if args.table:
        keys = ["rank", "curve"] + [k for k, _ in COLUMNS] + ["n_compared", "status"]
        with open(args.table, "w", newline="", encoding="utf-8") as fh:
            out = csv.writer(fh)
            out.writerow([f"# reference: {label}"])
            out.writerow(keys)
            for row in rows:
                out.writerow([row["rank"], _label(row)] + [row.get(k, "") for k in keys[2:]])
        print(f"wrote {args.table}")
    return 0
