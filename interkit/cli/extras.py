"""Commands of ``interkit`` that help write a spec or a paper (see :mod:`interkit.cli.main`).

    interkit methods scan.nc [--bibtex refs.bib]     # methods paragraph with its references
    interkit inspect FILE.xyz [--charges QA QB] [--multiplicities MA MB] [--fragment-a I ...]
                              [--frame N] [--contacts N]
    interkit systems                                 # demo dimers with their suggested contact
    interkit spec scan.nc [-o scan.toml]             # the spec of a saved scan as a TOML file

Atom numbers are 0-based everywhere (as in the Python API and the spec files).
"""

from __future__ import annotations

import os

import numpy as np

from ..errors import InputError

DEFAULT_CONTACTS = 5


def add_commands(sub) -> None:
    """Register ``methods`` and ``inspect`` on the ``interkit`` sub-command parser
    (``systems`` is registered by :mod:`interkit.cli.main`; its handler is here)."""
    p = sub.add_parser("methods", help="print a methods paragraph for a paper (method, bases, grid, "
                                       "counterpoise, dispersion, versions) with its references")
    p.add_argument("scan", help="netCDF scan file")
    p.add_argument("--bibtex", metavar="FILE", default=None, help="also write the references as BibTeX")

    p = sub.add_parser("inspect", help="print the atoms (0-based numbers), the fragment split and the "
                                       "closest A-B contacts of an XYZ file, as spec suggestions")
    p.add_argument("xyz", help="XYZ file (angstrom)")
    p.add_argument("--charges", type=int, nargs=2, default=(0, 0), metavar=("QA", "QB"),
                   help="charges of fragments A and B (default: 0 0)")
    p.add_argument("--multiplicities", type=int, nargs=2, default=(1, 1), metavar=("MA", "MB"),
                   help="spin multiplicities of fragments A and B (default: 1 1)")
    p.add_argument("--fragment-a", type=int, nargs="+", default=None, metavar="I",
                   help="0-based atoms of fragment A (default: split by covalent connectivity)")
    p.add_argument("--frame", type=int, default=0, help="frame of a multi-frame file (default: 0)")
    p.add_argument("--contacts", type=int, default=DEFAULT_CONTACTS,
                   help="number of closest A-B pairs to list (default: %(default)s)")
    add_spec_command(sub)


def _ranges(indices) -> str:
    """``0-2, 5`` for ``[0, 1, 2, 5]``."""
    out, run = [], []
    for i in sorted(indices):
        if run and i == run[-1] + 1:
            run.append(i)
            continue
        if run:
            out.append(f"{run[0]}-{run[-1]}" if len(run) > 1 else str(run[0]))
        run = [i]
    if run:
        out.append(f"{run[0]}-{run[-1]}" if len(run) > 1 else str(run[0]))
    return ", ".join(out)


def _formula(symbols) -> str:
    counts: dict[str, int] = {}
    for s in symbols:
        counts[s] = counts.get(s, 0) + 1
    order = (["C", "H"] if "C" in counts else []) + sorted(k for k in counts if k not in ("C", "H") or "C" not in counts)
    return "".join(f"{k}{counts[k] if counts[k] > 1 else ''}" for k in order)


def closest_contacts(dimer, n: int = DEFAULT_CONTACTS) -> list[tuple[int, int, float]]:
    """The ``n`` closest pairs (atom of A, atom of B, distance in angstrom), closest first."""
    dist = dimer.intermolecular_distances()
    a, b = list(dimer.fragment_a), list(dimer.fragment_b)
    pairs = [(a[i], b[j], float(dist[i, j])) for i in range(len(a)) for j in range(len(b))]
    pairs.sort(key=lambda p: (p[2], p[0], p[1]))
    return pairs[:n]


def inspect_text(dimer, source: str, n_contacts: int = DEFAULT_CONTACTS, split: str = "") -> str:
    """The report of ``interkit inspect`` for ``dimer`` (see the module docstring)."""
    lines = [f"{source}: {dimer.natoms} atoms; atom numbers are 0-based (as in the Python API and spec files)",
             f"{'atom':>4s}  {'element':<7s}  {'fragment':<8s}  {'x / Å':>11s}  {'y / Å':>11s}  {'z / Å':>11s}"]
    for k, (s, f, x) in enumerate(zip(dimer.symbols, dimer.fragment_labels, dimer.coordinates)):
        lines.append(f"{k:>4d}  {s:<7s}  {f:<8s}  {x[0]:>11.5f}  {x[1]:>11.5f}  {x[2]:>11.5f}")
    lines.append(f"fragments{split}:")
    for label, atoms, q, m in (("A", dimer.fragment_a, dimer.charges[0], dimer.multiplicities[0]),
                               ("B", dimer.fragment_b, dimer.charges[1], dimer.multiplicities[1])):
        lines.append(f"  {label}: atoms {_ranges(atoms)} ({_formula([dimer.symbols[i] for i in atoms])}), "
                     f"charge {q}, multiplicity {m}")
    contacts = closest_contacts(dimer, n_contacts)
    lines.append("closest A-B contacts (suggestions for [scan] coordinate = \"atom-pair\"):")
    for i, j, d in contacts:
        lines.append(f"  atoms = [{i}, {j}]   # {dimer.symbols[i]}{i} (A) to {dimer.symbols[j]}{j} (B): {d:.3f} Å")
    return "\n".join(lines)


def cmd_inspect(args) -> int:
    from ..model.geometry import Dimer

    if args.contacts < 1:
        raise InputError(f"--contacts: {args.contacts} is not a positive integer")
    dimer = Dimer.from_xyz(args.xyz, fragment_a=args.fragment_a, charges=tuple(args.charges),
                           multiplicities=tuple(args.multiplicities), frame=args.frame)
    split = " (as given by --fragment-a)" if args.fragment_a is not None else " (split by covalent connectivity)"
    source = f"{args.xyz}" + (f" frame {args.frame}" if args.frame else "")
    print(inspect_text(dimer, source, args.contacts, split))
    return 0


def cmd_methods(args) -> int:
    from ..data.schema import open_scan
    from ..share.methods import methods_bibtex, methods_text

    if args.bibtex is not None:
        folder = os.path.dirname(os.path.abspath(args.bibtex))
        if not os.path.isdir(folder):
            raise InputError(f"--bibtex: folder {folder!r} does not exist")
    ds = open_scan(args.scan)
    text = methods_text(ds)
    bib = methods_bibtex(ds) if args.bibtex is not None else None
    print(text, end="")
    if bib is not None:
        with open(args.bibtex, "w", encoding="utf-8") as fh:
            fh.write(bib)
        print(f"wrote {args.bibtex}")
    return 0


def cmd_systems(args) -> int:
    """The demo dimers with their character and the suggested contact ``atoms = [i, j]``."""
    from ..model.demo import demo_catalog, load_demo

    rows = []
    for name, entry in sorted(demo_catalog().items()):
        contact = entry.get("contact")
        if contact:
            d = load_demo(name)
            i, j = (int(x) for x in contact)
            r = float(np.linalg.norm(d.coordinates[i] - d.coordinates[j]))
            where = f"atoms = [{i}, {j}]  ({d.symbols[i]}{i}-{d.symbols[j]}{j}, {r:.2f} Å)"
        else:
            where = "-"
        rows.append((name, entry.get("character", ""), where, entry.get("title", "")))
    print(f"{'system':<20s} {'character':<22s} {'suggested contact (0-based)':<36s} title")
    for name, character, where, title in rows:
        print(f"{name:<20s} {character:<22s} {where:<36s} {title}")
    return 0


HANDLERS = {"methods": cmd_methods, "inspect": cmd_inspect, "systems": cmd_systems}


def add_spec_command(sub) -> None:
    """Register ``spec``: the spec of a saved scan as a TOML spec file."""
    p = sub.add_parser("spec", help="write the spec of a saved scan as a TOML spec file "
                                    "(runs again with interkit scan)")
    p.add_argument("scan", help="netCDF scan file")
    p.add_argument("-o", "--output", default=None, help="TOML file to write (default: print it)")


def cmd_spec(args) -> int:
    from ..share.spec_writer import spec_toml_of

    if args.output is not None:
        from .output import check_output

        check_output(args.output, "--output", (".toml",), "TOML spec file")
    text = spec_toml_of(args.scan)
    if args.output is None:
        print(text, end="")
        return 0
    from ..fileio import atomic_write_text

    atomic_write_text(args.output, text)
    print(f"wrote {args.output}")
    return 0


HANDLERS["spec"] = cmd_spec
