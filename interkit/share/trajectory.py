"""Scan geometries as multi-frame XYZ, and as extended XYZ with energies and forces.

Plain XYZ (:func:`write_scan_xyz`, ``.xyz``): one frame per scan point, coordinates in
angstrom; the comment line holds ``key=value`` pairs without any level of theory:
``point_index``, ``distance_angstrom``, ``factor``, ``fragment_a_atoms`` (0-based),
``charges``, ``multiplicities`` and the scan coordinate.

Extended XYZ (:func:`write_scan_extxyz`, ``.extxyz``), the convention ase reads
(``ase.io.read(path, index=":")``): per frame the per-atom columns
``species``, ``pos`` (angstrom), ``fragment`` (A/B) and ``forces``, and in the comment
line ``energy`` with the units ase expects: **eV** for the energy and **eV/angstrom** for
the forces (converted from kcal/mol with :mod:`interkit.units`, CODATA 2018). The
energy is the counterpoise-corrected interaction energy of one curve
(``E(AB) - E(A) - E(B)``, monomers in the dimer basis; negative = bound), and the forces
are minus its gradient (the ``forces`` variable of the Dataset), for fitting force
fields or machine-learned interaction potentials. The info keys ``energy_unit``,
``forces_unit``, ``energy_kind``, ``curve`` and ``counterpoise`` say so in the file.
Points that failed are left out (with a warning naming them).
"""

from __future__ import annotations

import os
import warnings

import numpy as np
import xarray as xr

from ..errors import InputError, InterkitWarning
from ..fileio import existing_folder
from ..units import convert_energy

TRAJECTORY_FORMATS = ("xyz", "extxyz")
ENERGY_KIND = "counterpoise-corrected interaction energy E(AB)-E(A)-E(B), monomers in the dimer basis"


def _quote(text: str) -> str:
    return '"' + str(text).replace('"', "'") + '"'


def _point_info(ds: xr.Dataset, i: int) -> list[str]:
    frag = np.asarray(ds["fragment"].values).astype(str)
    factor = float(ds["factor"].values[i]) if "factor" in ds.coords else float("nan")
    out = [f"point_index={i}", f"distance_angstrom={float(ds['distance'].values[i]):.8f}"]
    if np.isfinite(factor):
        out.append(f"factor={factor:.8f}")
    out += [f"fragment_a_atoms={_quote(' '.join(str(k) for k, f in enumerate(frag) if f == 'A'))}",
            f"charges={_quote(' '.join(str(c) for c in _json_list(ds, 'charges', [0, 0])))}",
            f"multiplicities={_quote(' '.join(str(c) for c in _json_list(ds, 'multiplicities', [1, 1])))}",
            f"scan_coordinate={_quote(ds.attrs.get('scan_coordinate', ''))}"]
    return out


def _json_list(ds: xr.Dataset, key: str, default: list) -> list:
    import json

    return json.loads(ds.attrs.get(key, json.dumps(default)))


def _atom_lines(symbols, xyz, extra=None) -> list[str]:
    lines = []
    for k, (s, x) in enumerate(zip(symbols, xyz)):
        row = f"{s:<2s} {x[0]:16.10f} {x[1]:16.10f} {x[2]:16.10f}"
        if extra is not None:
            row += extra(k)
        lines.append(row)
    return lines


def _write(path: str, lines: list[str]) -> str:
    existing_folder(path, "export")
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("\n".join(lines) + "\n")
    return path


def write_scan_xyz(ds: xr.Dataset, path: str | os.PathLike) -> str:
    """Write every scan geometry as one frame of a multi-frame XYZ file (angstrom).

    Returns
    -------
    str
        The path written.
    """
    path = os.fspath(path)
    symbols = [str(s) for s in ds["symbol"].values]
    lines = []
    for i in range(ds.sizes["distance"]):
        lines.append(str(len(symbols)))
        lines.append(" ".join(_point_info(ds, i)))
        lines += _atom_lines(symbols, np.asarray(ds["coordinates"].values[i], dtype=float))
    return _write(path, lines)


def _select_curve(ds: xr.Dataset, level: str | None) -> tuple[str, str, str | None]:
    """(folded label, level, scheme) of the curve to export."""
    from ..analysis.comparison import curve_pairs

    pairs = curve_pairs(ds)
    if not pairs:
        raise InputError("export: no curve of the scan has values")
    if level is None:
        if len(pairs) > 1:
            raise InputError(f"level: the scan has several curves ({', '.join(pairs)}); name one")
        level = next(iter(pairs))
    if level not in pairs:
        raise InputError(f"level: {level!r} is not a curve of the scan ({', '.join(pairs)})")
    return (level, *pairs[level])


def write_scan_extxyz(ds: xr.Dataset, path: str | os.PathLike, level: str | None = None) -> str:
    """Write the geometries with the counterpoise-corrected interaction energy (eV) and
    per-atom forces (eV/angstrom) of one curve as extended XYZ (see the module docstring).

    Parameters
    ----------
    ds : xarray.Dataset
        A scan with per-atom forces (``forces = true`` and a level with analytic
        gradients).
    path : path-like
    level : str, optional
        Folded curve label (e.g. ``'b3lyp-d3bj/def2-svp'``); required when the scan has
        several curves.

    Returns
    -------
    str
        The path written.
    """
    path = os.fspath(path)
    label, lv, scheme = _select_curve(ds, level)
    if "forces" not in ds.variables:
        raise InputError("export: the scan has no per-atom forces (run it with forces = true)")
    sel = {"level": lv} if scheme is None else {"level": lv, "dispersion": scheme}
    energy = convert_energy(ds["e_int"].sel(sel).transpose("distance").values, "kcal/mol", "eV")
    f_units = ds["forces"].attrs.get("units")
    if f_units != "kcal/mol/angstrom":
        raise InputError(f"dataset variable forces: units {f_units!r} is not 'kcal/mol/angstrom'")
    # kcal/mol/angstrom -> eV/angstrom: the energy factor (the length unit stays)
    forces = convert_energy(ds["forces"].sel(sel).transpose("distance", "atom", "xyz").values, "kcal/mol", "eV")
    ok = np.isfinite(energy) & np.all(np.isfinite(forces), axis=(1, 2))
    if not ok.any():
        method = str(ds["force_method"].sel(level=lv).values) if "force_method" in ds.variables else ""
        raise InputError(f"level: {label!r} has no point with an energy and per-atom forces"
                         + (f" (forces: {method})" if method else ""))
    if not ok.all():
        skipped = ", ".join(f"{float(r):.4f}" for r in ds["distance"].values[~ok])
        warnings.warn(f"export: {label}: points at {skipped} angstrom have no energy or forces "
                      "and are left out", InterkitWarning, stacklevel=2)
    symbols = [str(s) for s in ds["symbol"].values]
    frag = np.asarray(ds["fragment"].values).astype(str)
    lines = []
    for i in np.flatnonzero(ok):
        lines.append(str(len(symbols)))
        head = ["Properties=species:S:1:pos:R:3:fragment:S:1:forces:R:3", f"energy={energy[i]:.12e}",
                "energy_unit=eV", _kv("forces_unit", "eV/angstrom"), _kv("energy_kind", ENERGY_KIND),
                _kv("curve", label), _kv("counterpoise", ds.attrs.get("counterpoise", "")),
                *_point_info(ds, int(i)), 'pbc="F F F"']
        lines.append(" ".join(head))
        f_i = forces[i]
        lines += _atom_lines(symbols, np.asarray(ds["coordinates"].values[i], dtype=float),
                             lambda k, f_i=f_i: f" {frag[k]} {f_i[k, 0]:18.10e} {f_i[k, 1]:18.10e} {f_i[k, 2]:18.10e}")
    return _write(path, lines)


def _kv(key: str, value: str) -> str:
    return f"{key}={_quote(value)}"


def write_trajectory(ds: xr.Dataset, path: str | os.PathLike, kind: str, level: str | None = None) -> str:
    """Write ``kind`` (``'xyz'`` or ``'extxyz'``); ``level`` applies to extxyz only."""
    if kind == "xyz":
        if level is not None:
            raise InputError("level: a plain XYZ file holds geometries only; use .extxyz for energies")
        return write_scan_xyz(ds, path)
    return write_scan_extxyz(ds, path, level)
