"""Compare a recomputation with a saved scan, variable by variable.

:func:`compare_datasets` gives one :class:`Deviation` row per variable (largest
absolute deviation, its tolerance from :mod:`interkit.share.tolerances`, pass or fail);
:class:`DeviationTable` is such a list with what was compared, as returned by
:func:`interkit.verify_scan` and :func:`interkit.rerun_scan`. Pure helpers: nothing
is computed or written here.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np
import xarray as xr

from .tolerances import GEOMETRY_TOLERANCE, Tolerance, compared_variables, tolerances


@dataclass(frozen=True)
class Deviation:
    """How far one variable of a recomputation lies from the saved scan.

    Attributes
    ----------
    variable : str
    units : str
    n_compared : int
        Values finite in both Datasets.
    max_abs_deviation : float
        Largest ``|saved - recomputed|`` (0 when nothing was compared).
    where : str
        Labels of the largest deviation, e.g. ``"level=hf/sto-3g, distance=2.750"``.
    mismatched : int
        Values that are NaN (or failed) in one Dataset and not in the other; for
        status-like variables, points that failed in one Dataset only.
    tolerance : float
    tolerance_reason : str
    passed : bool
        ``max_abs_deviation <= tolerance`` and no mismatch.
    """

    variable: str
    units: str
    n_compared: int
    max_abs_deviation: float
    where: str
    mismatched: int
    tolerance: float
    tolerance_reason: str
    passed: bool

    def to_dict(self) -> dict:
        return asdict(self)


def _labels(da: xr.DataArray, flat_index: int) -> str:
    pos = np.unravel_index(flat_index, da.shape)
    parts = []
    for dim, k in zip(da.dims, pos):
        label = da[dim].values[k] if dim in da.coords else k
        if isinstance(label, (float, np.floating)):
            parts.append(f"{dim}={float(label):.4f}")
        else:
            parts.append(f"{dim}={label}")
    return ", ".join(parts)


def _aligned(saved: xr.DataArray, fresh: xr.DataArray) -> xr.DataArray | None:
    """``fresh`` with the dims and labels of ``saved`` (None if they cannot match)."""
    if set(saved.dims) != set(fresh.dims):
        return None
    fresh = fresh.transpose(*saved.dims)
    for dim in saved.dims:
        if dim == "distance" or dim not in saved.coords or dim not in fresh.coords:
            continue
        if saved[dim].dtype.kind in "US" or fresh[dim].dtype.kind in "US":
            labels = [str(x) for x in saved[dim].values]
            have = {str(x) for x in fresh[dim].values}
            if not set(labels) <= have:
                return None
            fresh = fresh.sel({dim: labels})
    if fresh.shape != saved.shape:
        return None
    return fresh


def _level_groups(a: xr.DataArray, tol: Tolerance) -> list[tuple[str, Tolerance, list | None]]:
    """Split a comparison by level where levels have different tolerances:
    ``[(name suffix, tolerance, level labels or None for all)]``."""
    if not tol.per_level or "level" not in a.dims:
        return [("", tol, None)]
    groups: dict[tuple, list[str]] = {}
    for label in (str(x) for x in a["level"].values):
        t = tol.per_level.get(label, tol)
        groups.setdefault((t.value, t.reason, t.group, t.units), []).append(label)
    if len(groups) == 1:
        (value, reason, group, units), _ = next(iter(groups.items()))
        return [("", Tolerance(value, units, reason, group), None)]
    return [(f" [{group}]", Tolerance(value, units, reason, group), labels)
            for (value, reason, group, units), labels in groups.items()]


def _numeric_row(name: str, units: str, a: xr.DataArray, b: xr.DataArray, tol: Tolerance) -> Deviation:
    x = np.asarray(a.values, dtype=float)
    y = np.asarray(b.values, dtype=float)
    both = np.isfinite(x) & np.isfinite(y)
    mismatched = int((np.isnan(x) != np.isnan(y)).sum())
    diff = np.where(both, np.abs(x - y), -1.0)
    n = int(both.sum())
    dmax, where = 0.0, ""
    if n:
        flat = int(np.argmax(diff))
        dmax = float(diff.flat[flat])
        where = _labels(a, flat) if dmax > 0 else ""
    if mismatched and not where:
        where = _labels(a, int(np.argmax(np.isnan(x) != np.isnan(y))))
    return Deviation(name, units, n, dmax, where, mismatched, tol.value, tol.reason,
                     dmax <= tol.value and mismatched == 0)


def compare_datasets(saved: xr.Dataset, fresh: xr.Dataset, indices=None,
                     tolerance_table: dict[str, Tolerance] | None = None) -> list[Deviation]:
    """Compare a recomputation with a saved scan, variable by variable.

    Parameters
    ----------
    saved : xarray.Dataset
        The scan as saved.
    fresh : xarray.Dataset
        A recomputation of all its points, or of the points ``indices``.
    indices : sequence of int, optional
        Positions (in ``saved.distance``) of the points of ``fresh``; default all.
    tolerance_table : dict, optional
        Variable -> :class:`Tolerance`; default :func:`tolerances` of ``saved``.

    Returns
    -------
    list of Deviation
        One row per variable, plus a ``distance`` row checking that the points are the
        same, in the order of :func:`compared_variables`.
    """
    idx = np.arange(saved.sizes["distance"]) if indices is None else np.asarray(indices, dtype=int)
    sub = saved.isel(distance=idx)
    table = tolerance_table if tolerance_table is not None else tolerances(saved)
    rows = []
    r_saved = np.asarray(sub["distance"].values, dtype=float)
    r_fresh = np.asarray(fresh["distance"].values, dtype=float)
    if r_saved.shape != r_fresh.shape:
        rows.append(Deviation("distance", "angstrom", 0, math.inf, "number of points differs",
                              abs(r_saved.size - r_fresh.size), GEOMETRY_TOLERANCE, "same scan points", False))
        return rows
    dev = np.abs(r_saved - r_fresh)
    k = int(np.argmax(dev)) if dev.size else 0
    dmax = float(dev.max()) if dev.size else 0.0
    rows.append(Deviation("distance", "angstrom", int(dev.size), dmax,
                          f"distance={r_saved[k]:.4f}" if dmax > 0 else "", 0, GEOMETRY_TOLERANCE,
                          "scan points rebuilt from the spec", dmax <= GEOMETRY_TOLERANCE))
    for name in compared_variables(saved):
        tol = table.get(name) or Tolerance(0.0, "", "no tolerance stated")
        units = str(saved[name].attrs.get("units", tol.units))
        a = sub[name]
        if name not in fresh.variables:
            rows.append(Deviation(name, units, 0, math.inf, "missing from the recomputation",
                                  int(a.size), tol.value, tol.reason, False))
            continue
        b = fresh[name]
        if "distance" in b.dims and b.sizes["distance"] == a.sizes["distance"]:
            b = b.assign_coords(distance=a["distance"].values)
        b = _aligned(a, b)
        if b is None:
            rows.append(Deviation(name, units, 0, math.inf,
                                  f"dimensions {fresh[name].dims} do not match {a.dims}",
                                  int(a.size), tol.value, tol.reason, False))
            continue
        if a.dtype.kind in "fiu":
            for suffix, t, labels in _level_groups(a, tol):
                aa = a if labels is None else a.sel(level=labels)
                bb = b if labels is None else b.sel(level=labels)
                rows.append(_numeric_row(name + suffix, units, aa, bb, t))
        else:
            if a.dtype.kind == "b":
                x, y = np.asarray(a.values, dtype=bool), np.asarray(b.values, dtype=bool)
            else:
                x = np.asarray(a.values).astype(str) == "failed"
                y = np.asarray(b.values).astype(str) == "failed"
            bad = x != y
            mismatched = int(bad.sum())
            where = _labels(a, int(np.argmax(bad))) if mismatched else ""
            rows.append(Deviation(name, units, int(x.size), float(mismatched), where, mismatched, 0.0,
                                  tol.reason if a.dtype.kind != "b" else "same convergence outcome",
                                  mismatched == 0))
    return rows


def all_passed(rows: list[Deviation]) -> bool:
    """True when every row of :func:`compare_datasets` passed."""
    return all(r.passed for r in rows)


def deviation_lines(rows: list[Deviation]) -> list[str]:
    """Text table of :func:`compare_datasets` rows (one line per variable)."""
    width = max([len("variable")] + [len(r.variable) for r in rows])
    lines = [f"{'variable':<{width}s}  {'units':<18s} {'max |deviation|':>15s} {'tolerance':>10s}  "
             f"{'result':<6s} where"]
    for r in rows:
        note = r.where
        if r.mismatched:
            note = f"{r.mismatched} value(s) missing or failed in one scan only; first at {r.where}"
        lines.append(f"{r.variable:<{width}s}  {r.units:<18s} {r.max_abs_deviation:>15.3g} {r.tolerance:>10.3g}  "
                     f"{'PASS' if r.passed else 'FAIL':<6s} {note}")
    return lines


class DeviationTable(list):
    """The rows of :func:`compare_datasets` (a list of :class:`Deviation`), with what
    was compared.

    ``print(table)`` shows one line per variable and the verdict; ``table.passed`` is
    True when every variable lies within its tolerance.

    Attributes
    ----------
    what : str
        ``"verify"`` or ``"rerun"``.
    indices : numpy.ndarray of int
        Positions of the compared points in the saved scan.
    distances : numpy.ndarray of float
        Their values of the scan coordinate (angstrom).
    keys_matching, keys_total : int
        Store keys recorded for the compared points that are the keys of today's
        calculations, and all recorded keys of those points (see :func:`key_agreement`).
    file_pyscf_version : str
        The pyscf version the saved scan was computed with.
    fresh : xarray.Dataset or None
        The recomputation.
    """

    def __init__(self, rows=(), what: str = "", indices=None, distances=None, keys: tuple[int, int] = (0, 0),
                 file_pyscf_version: str = "", fresh: xr.Dataset | None = None):
        super().__init__(rows)
        self.what = what
        self.indices = np.asarray(indices if indices is not None else [], dtype=int)
        self.distances = np.asarray(distances if distances is not None else [], dtype=float)
        self.keys_matching, self.keys_total = int(keys[0]), int(keys[1])
        self.file_pyscf_version = file_pyscf_version
        self.fresh = fresh

    @property
    def passed(self) -> bool:
        """True when every row passed (see :func:`all_passed`)."""
        return all_passed(self)

    @property
    def failed(self) -> list[str]:
        """Names of the variables (rows) outside their tolerance."""
        return [r.variable for r in self if not r.passed]

    def lines(self) -> list[str]:
        """The text table (see :func:`deviation_lines`)."""
        return deviation_lines(self)

    def verdict(self) -> str:
        """One line: every variable within its tolerance, or which failed."""
        if self.passed:
            return f"{self.what}: every variable within its tolerance"
        return f"{self.what}: FAILED for {', '.join(self.failed)}"

    def key_line(self) -> str:
        """One line on the store keys of the compared points."""
        line = (f"store keys: {self.keys_matching} of {self.keys_total} recorded keys are the keys of "
                "today's calculations")
        if self.keys_matching < self.keys_total:
            line += (" (keys change with the pyscf version or interkit's numerics version: "
                     f"file written with pyscf {self.file_pyscf_version or '?'})")
        return line

    def __str__(self) -> str:
        return "\n".join(self.lines() + [self.verdict()])
