"""``interkit cube``: densities of one scan point as cube files (see :mod:`interkit.cli.main`).

    interkit cube scan.nc --point K -o DIR [--level L] [--cache DIR] [--compute] [--spacing BOHR]

Writes ``DIR/point-K-<name>.cube`` for the dimer density, the two dimer-basis monomer
densities and the deformation density Δρ = ρ_AB − ρ_A − ρ_B (electrons/bohr³, grid in
bohr, first grid axis along the scan direction). Point numbers start at 0, as in the
Python API. The density matrices come from the store (scans run with
``keep_densities = true``); ``--compute`` runs the three calculations of that point only.
"""

from __future__ import annotations

import os

from ..errors import InputError

DEFAULT_SPACING_BOHR = 0.25
#: first comment line of each cube (plain ASCII: many readers expect it)
CUBE_COMMENTS = {"dimer": "dimer density rho_AB", "a_dimer_basis": "density of A in the dimer basis rho_A",
                 "b_dimer_basis": "density of B in the dimer basis rho_B",
                 "deformation": "deformation density rho_AB - rho_A - rho_B"}


def add_commands(sub) -> None:
    """Register ``cube`` on the ``interkit`` sub-command parser."""
    p = sub.add_parser("cube", help="write cube files of the dimer, monomer (dimer basis) and deformation "
                                    "densities of one scan point")
    p.add_argument("scan", help="netCDF scan file")
    p.add_argument("--point", type=int, required=True, help="scan point, numbered from 0 as in the Python API")
    p.add_argument("-o", "--output-dir", required=True, help="folder for the cube files")
    p.add_argument("--level", default=None, help="level of theory (needed when the scan has several)")
    p.add_argument("--cache", default=".interkit-cache", help="result store folder (default: %(default)s)")
    p.add_argument("--compute", action="store_true",
                   help="if the store lacks the density matrices, run the three counterpoise "
                        "calculations of this point (only) and add them to the store")
    p.add_argument("--spacing", type=float, default=DEFAULT_SPACING_BOHR,
                   help="grid step in bohr (default: %(default)s)")


def _check_folder(path: str) -> None:
    if os.path.exists(path) and not os.path.isdir(path):
        raise InputError(f"--output-dir: {path!r} exists and is not a folder")
    parent = os.path.abspath(path) if os.path.isdir(path) else os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(parent) or not os.access(parent, os.W_OK):
        raise InputError(f"--output-dir: {path!r} cannot be written (its folder is missing or read-only)")


def cmd_cube(args) -> int:
    from ..data.cube import cube_text
    from ..data.schema import open_scan
    from ..run.densities import (
        VOLUME_LABELS,
        VOLUME_NAMES,
        DensitiesNotStoredError,
        compute_point_densities,
        load_point_densities,
    )

    if not (0.02 <= args.spacing <= 2.0):
        raise InputError(f"--spacing: {args.spacing!r} bohr is outside 0.02..2")
    _check_folder(args.output_dir)
    ds = open_scan(args.scan)
    try:
        pdens = load_point_densities(ds, args.point, args.level, cache=args.cache if os.path.isdir(args.cache) else None)
    except DensitiesNotStoredError as exc:
        if not args.compute:
            raise InputError(f"{exc}; or add --compute to this command") from None
        print(f"computing the 3 counterpoise calculations of point {args.point} ...")
        pdens = compute_point_densities(ds, args.point, args.level, cache=args.cache)
    box = pdens.box(spacing_bohr=args.spacing)
    volumes = pdens.volumes(box)
    counts = pdens.electron_counts()
    mol = pdens.mol
    symbols = [mol.atom_pure_symbol(i) for i in range(mol.natm)]
    texts = {}
    for name in VOLUME_NAMES:   # every text is made before any file is written
        comments = (f"interkit {CUBE_COMMENTS[name]}, electrons/bohr^3, grid in bohr",
                    f"scan point {args.point} (from 0) at {pdens.distance_angstrom:.4f} angstrom, {pdens.level}")
        texts[name] = cube_text(symbols, mol.atom_coords(), box, volumes[name], comments)
    os.makedirs(args.output_dir, exist_ok=True)
    for name, text in texts.items():
        path = os.path.join(args.output_dir, f"point-{args.point}-{name}.cube")
        with open(path, "w", encoding="utf-8") as fh:
            fh.write(text)
        print(f"wrote {path}  ({VOLUME_LABELS[name]}; integral over all space {counts[name]:+.6f} electrons)")
    return 0


HANDLERS = {"cube": cmd_cube}
