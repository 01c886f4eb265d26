"""Reference curves from outside a scan: a CSV table or another saved scan.

:class:`ReferenceCurve` holds one; :func:`reference_from_file` reads it from a CSV file
(the column convention of :mod:`interkit.data.columns`) or a saved scan (``.nc``), and
:meth:`ReferenceCurve.on` interpolates it onto a scan's distances (angstrom, kcal/mol).
:func:`curve_pairs` lists the curves of a scan by their folded labels.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import xarray as xr
from scipy.interpolate import CubicSpline

from ..errors import InputError
from ..model.levels import default_reference

DISTANCE_COLUMN = "distance_angstrom"
ENERGY_COLUMN = "e_int_kcal_per_mol"


@dataclass(frozen=True)
class ReferenceCurve:
    """An external reference curve.

    Attributes
    ----------
    distance_angstrom : numpy.ndarray
        Increasing distances of the finite reference points.
    e_int_kcal_per_mol : numpy.ndarray
        Reference interaction energies.
    source : str
        Where the curve was read from.
    """

    distance_angstrom: np.ndarray
    e_int_kcal_per_mol: np.ndarray
    source: str = ""

    def on(self, distance) -> np.ndarray:
        """Reference energies (kcal/mol) at ``distance`` (angstrom) by a natural cubic
        spline; NaN outside the reference's distance range (never extrapolated)."""
        x = np.asarray(distance, dtype=float)
        out = np.full(x.shape, np.nan)
        r, e = self.distance_angstrom, self.e_int_kcal_per_mol
        inside = np.isfinite(x) & (x >= r[0]) & (x <= r[-1])
        if inside.any():
            out[inside] = CubicSpline(r, e, bc_type="natural")(x[inside])
        return out


def reference_from_csv(path, curve: str | None = None) -> ReferenceCurve:
    """Read a reference curve from a CSV file.

    The first non-blank line not starting with ``#`` is a header that follows the column
    convention of :mod:`interkit.data.columns`: ``distance_angstrom`` and
    ``e_int_kcal_per_mol`` (or ``e_int`` in another energy unit, e.g. ``e_int_kj_per_mol``;
    other columns are ignored), or a tidy table (``variable``, ``value``, ``unit``). Every
    CSV curve table interkit exports reads back this way. Rows whose energy is empty or
    ``nan`` are dropped.

    Parameters
    ----------
    path : str or pathlib.Path
        CSV file.
    curve : str, optional
        With several curves in the table (columns ``curve`` or ``level`` [+
        ``dispersion``]), the folded label of the one to read; by default the most
        accurate wavefunction level (:func:`default_reference`).

    Returns
    -------
    ReferenceCurve
        Use :meth:`ReferenceCurve.on` to interpolate onto a scan's distances.

    Raises
    ------
    InputError
        Missing file or column, a row with a missing or non-numeric value, non-positive
        or repeated distances, or fewer than 2 finite points.
    """
    from ..data.columns import read_curve_table

    p = Path(path)
    r, e, label = read_curve_table(p, curve)
    ok = np.isfinite(e)
    r, e = r[ok], e[ok]
    if len(r) < 2:
        raise InputError(f"{p.name}: column {ENERGY_COLUMN!r} has {len(r)} finite value(s); need at least 2")
    order = np.argsort(r)
    r, e = r[order], e[order]
    if np.any(np.diff(r) == 0):
        raise InputError(f"{p.name}: column {DISTANCE_COLUMN!r} repeats the value "
                         f"{r[:-1][np.diff(r) == 0][0]!r}")
    return ReferenceCurve(r, e, f"{p} [{label}]" if label else str(p))


def curve_pairs(ds: xr.Dataset, variable: str | None = None) -> dict[str, tuple[str, str | None]]:
    """Folded label -> (level, scheme or None) of every curve with values of ``variable``
    (default ``e_int``, or ``e_int_nocp`` for a scan run without counterpoise)."""
    from ..data.dispersion import scheme_label
    from ..model.composite import parse_level

    if variable is None:
        variable = "e_int_nocp" if ds.attrs.get("counterpoise", "") == "none" else "e_int"
    out = {}
    if "dispersion" in ds.dims:
        from ..data.dispersion import available_pairs

        for level, scheme in available_pairs(ds):
            if np.isfinite(ds[variable].sel(level=level, dispersion=scheme).values).any():
                out[scheme_label(parse_level(level), scheme)] = (level, scheme)
    else:
        for level in ds["level"].values:
            if np.isfinite(ds[variable].sel(level=level).values).any():
                out[str(level)] = (str(level), None)
    return out


def reference_from_scan(path, curve: str | None = None) -> ReferenceCurve:
    """A reference curve taken from another saved scan (netCDF written by ``save_scan``).

    Parameters
    ----------
    path : str or pathlib.Path
        The scan file, e.g. a CCSD(T) scan of the same dimer along the same coordinate.
    curve : str, optional
        Folded label of the curve (e.g. ``'ccsd(t)/aug-cc-pvtz'`` or
        ``'b3lyp-d3bj/def2-tzvp'``); by default the most accurate wavefunction level.

    Returns
    -------
    ReferenceCurve
        Its finite points, interpolated onto another scan's distances by
        :meth:`ReferenceCurve.on`.
    """
    from ..data.schema import open_scan

    ds = open_scan(path)
    pairs = curve_pairs(ds)
    if not pairs:
        raise InputError(f"reference scan {str(path)!r}: no curve has values")
    label = curve if curve is not None else default_reference(list(pairs))
    if label not in pairs:
        raise InputError(f"reference curve: {label!r} is not a curve of {str(path)!r} ({', '.join(pairs)})")
    level, scheme = pairs[label]
    da = ds["e_int_nocp" if ds.attrs.get("counterpoise", "") == "none" else "e_int"].sel(level=level)
    if scheme is not None:
        da = da.sel(dispersion=scheme)
    r, e = ds["distance"].values, da.transpose("distance").values
    keep = np.isfinite(e)
    if keep.sum() < 2:
        raise InputError(f"reference curve {label!r} of {str(path)!r}: fewer than 2 finite points")
    return ReferenceCurve(r[keep], e[keep], f"{Path(path).name} [{label}]")


def reference_from_file(path, curve: str | None = None) -> ReferenceCurve:
    """A reference curve from a CSV file (:func:`reference_from_csv`) or a saved scan
    (``.nc``, :func:`reference_from_scan`); ``curve`` chooses the curve of either."""
    if str(path).lower().endswith(".nc"):
        return reference_from_scan(path, curve)
    return reference_from_csv(path, curve)
