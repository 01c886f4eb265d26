"""``interkit compare``: rank the curves of a saved scan against a reference.

    interkit compare scan.nc [--reference LABEL | --reference-file FILE [--reference-curve LABEL]]
                             [--region all|bound|window] [--window X] [--relative] [--table out.csv]
                             [--unit kJ/mol] [--variable e_int|e_int_nocp|e_int_halfcp]

The reference is a curve of the same scan, named by its folded label (e.g.
``mp2/def2-svp`` or ``b3lyp-d3bj/def2-svp``), or an external curve: a CSV file with
columns ``distance_angstrom`` and ``e_int_kcal_per_mol``, or another saved scan (``.nc``;
``--reference-curve`` picks its curve); by default the most accurate wavefunction level
of the scan (:func:`interkit.model.levels.default_reference`, the rule of the report and
the comparison widget too). ``--variable`` picks the energy compared: counterpoise-corrected
(``e_int``, the default), uncorrected (``e_int_nocp``) or half-counterpoise
(``e_int_halfcp``). When the reference has a basis-set uncertainty (an extrapolated or
composite level), the table has a column with it. The table is
:func:`interkit.analysis.comparison.comparison_table`'s, the same as the report's.
"""

from __future__ import annotations

import csv


def add_commands(sub) -> None:
    """Register ``compare`` on the ``interkit`` sub-command parser."""
    from ..analysis.error_statistics import DEFAULT_WINDOW_ANGSTROM, REGIONS

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
    p.add_argument("--region", choices=REGIONS, default="all",
                   help="points in the statistics: all, bound (reference E_int < 0) or window "
                        "(within --window of the reference minimum) (default: all)")
    p.add_argument("--window", metavar="ANGSTROM", type=float, default=None,
                   help=f"half-width of --region window in angstrom (default {DEFAULT_WINDOW_ANGSTROM:g})")
    p.add_argument("--relative", action="store_true",
                   help="errors in per cent of |reference| (points with |reference| < 0.1 kcal/mol left out)")
    p.add_argument("--table", metavar="CSV", help="also write the ranking to this CSV file")
    p.add_argument("--variable", choices=("e_int", "e_int_nocp", "e_int_halfcp"), default=None,
                   help="energy compared: e_int (counterpoise-corrected), e_int_nocp (uncorrected) or "
                        "e_int_halfcp (half-counterpoise) (default: e_int, or e_int_nocp for a scan "
                        "without counterpoise)")
    from .output import add_unit_options

    add_unit_options(p, forces=False)
    p.set_defaults(handler=run_compare)


def _table(ds, args):
    from ..analysis.comparison import comparison_table, reference_from_file
    from ..errors import InputError

    if args.reference_curve and not args.reference_file:
        raise InputError("--reference-curve: give --reference-file as well")
    if args.window is not None and args.region != "window":
        raise InputError(f"--window: {args.window:g} given, but --region is {args.region!r}, not 'window'")
    external = reference_from_file(args.reference_file, args.reference_curve) if args.reference_file else None
    try:
        return comparison_table(ds, reference=args.reference, external=external, region=args.region,
                                window_angstrom=args.window, relative=args.relative,
                                variable=getattr(args, "variable", None))
    except InputError as exc:
        text = str(exc)
        for word, option in (("reference:", "--reference:"), ("window_angstrom:", "--window:"),
                             ("region:", "--region:"), ("variable:", "--variable:")):
            if text.startswith(word):
                text = option + text[len(word):]
        raise InputError(text) from None


def format_table(table, unit: str = "kcal/mol", counterpoise: bool = False) -> list[str]:
    """The printed lines of a :class:`~interkit.analysis.comparison.ComparisonTable`, with
    energies in ``unit`` (relative errors stay in per cent) and levels in the trade's
    spelling; ``counterpoise`` says the scan has counterpoise calculations (so uncorrected
    curves were compared by choice)."""
    from ..model.level_names import display_label

    shown_unit = "per cent of |reference|" if table.relative else unit
    reference = display_label(table.reference)
    if reference != table.reference:
        reference += f" (--reference {table.reference})"
    lines = [f"reference: {reference} ({table.chosen_by}); errors in {shown_unit} (curve minus reference); "
             f"ΔR_min in Å",
             f"region: {table.region_text}"]
    if table.variable == "e_int_nocp":
        lines.append("the uncorrected curves (e_int_nocp) are compared" if counterpoise else
                     "the scan ran without counterpoise correction: the uncorrected curves (e_int_nocp) are compared")
    elif table.variable == "e_int_halfcp":
        lines.append("the half-counterpoise curves (e_int_halfcp: mean of corrected and uncorrected) are compared")
    if table.has_reference_uncertainty:
        lines.append(f"note: {table.uncertainty_text(unit)}")
    width = max([26] + [len(display_label(r["curve"])) + 2 for r in table.rows])
    widths = [max(10, len(h) + 2) for _, h, _ in table.columns]
    lines.append(f"{'rank':>4s}  {'curve':<{width}s}"
                 + "".join(f"{h:>{w}s}" for (_, h, _), w in zip(table.columns, widths)) + f"{'points':>8s}")
    for row in table.rows:
        cells = "".join(f"{_shown(row, k, unit):>{w}.3f}" if row[k] == row[k] else f"{'–':>{w}s}"
                        for (k, _, _), w in zip(table.columns, widths))
        lines.append(f"{row['rank']:>4d}  {display_label(row['curve']):<{width}s}{cells}{row['n_compared']:>8d}"
                     + ("" if row["status"] == "ok" else f"  ({row['status']})"))
    return lines


def _shown(row: dict, key: str, unit: str) -> float:
    """A ranking value in the display unit (energies converted, distances kept)."""
    from ..units import convert_energy

    value = row[key]
    return convert_energy(value, "kcal/mol", unit) if key.endswith("_kcal_per_mol") and value == value else value


def run_compare(args) -> int:
    """Print the ranking (energies in ``--unit`` or per cent, angstrom); optionally write
    it as CSV (kcal/mol or per cent: the column names say so)."""
    from ..data.schema import open_scan
    from ..model.level_names import display_label

    if args.table:
        from .output import check_output

        check_output(args.table, "--table", (".csv",), "CSV")
    ds = open_scan(args.scan)
    table = _table(ds, args)
    print("\n".join(format_table(table, getattr(args, "unit", "kcal/mol"),
                                  ds.attrs.get("counterpoise", "") != "none")))
    if "dispersion_status" in ds.variables:
        for level in ds["level"].values:
            for scheme in ds["dispersion"].values:
                status = str(ds["dispersion_status"].sel(level=level, dispersion=scheme).values)
                if status.startswith("unavailable"):
                    print(f"note: {display_label(str(level))} with {scheme}: {status}")
    print("Note: " + ds.attrs.get("caution", ""))
    if args.table:
        with open(args.table, "w", newline="", encoding="utf-8") as fh:
            csv.writer(fh).writerows(table.csv_rows())
        print(f"wrote {args.table}")
    return 0
