"""Provenance of a scan Dataset and checks that its numbers can be reproduced.

A saved scan carries its full spec (``spec_json``), the versions of every library whose
numbers enter it and the store key of each calculation (``job_key``). This module says
what to compare between a saved scan and a recomputation, within which tolerance, on
which points, and compares two Datasets (pure helpers). Two functions run the
recomputation itself, from Python or a notebook as well as from ``interkit
rerun``/``verify``:

* :func:`verify_scan` recomputes a few sampled points from scratch (no store) and
  compares every variable with the saved scan;
* :func:`rerun_scan` runs the saved spec again (reusing a store, if given) and compares.

Both return a :class:`DeviationTable`: a list of :class:`Deviation` rows that prints as
a text table and says whether every variable passed.

Tolerances are absolute, per variable, in the variable's own units (see
:func:`tolerances`). They follow from the convergence thresholds of the calculations,
not from the size of the values, because a recomputation differs from the original
only by where each SCF stopped (a fresh calculation starts from a different initial
density than a point computed after its neighbour).
"""

from __future__ import annotations

import json
import math
import os
from collections.abc import Callable
from dataclasses import asdict, dataclass

import numpy as np
import xarray as xr

from ..errors import InputError
from ..units import HARTREE_TO_KCAL_PER_MOL

#: variables never compared: timings and texts that describe a run, not its numbers
NOT_COMPARED = frozenset({"wall_time_s", "sapt_wall_time_s", "status_detail", "sapt_status_detail",
                          "job_key", "symbol", "fragment", "force_method"})

#: SCF energy threshold of calculations with gradients (``engine.energy`` converges
#: them to at least this, whatever the spec says)
GRADIENT_CONV_TOL_HARTREE = 1e-9
#: Total energies of HF and DFT levels may move by this many SCF energy thresholds
#: (``conv_tol``): the SCF stops when successive energies differ by less than
#: ``conv_tol`` and SCF energies are variational (error second order in the orbitals).
#: Measured here (pyscf 2.14, HF dimer, def2-SVP, ``conv_tol`` 1e-8): a point computed
#: from scratch and the same point computed from its neighbour's density differ by at
#: most 2.3e-9 hartree (HF, PBE0, B3LYP).
SCF_TOTAL_FACTOR = 100.0
#: Total energies of correlated levels (MP2, SCS-MP2, CCSD(T)) may move by this multiple
#: of ``sqrt(conv_tol)`` hartree: the correlation energy is not variational in the
#: orbitals, so it carries the orbital error at first order, and pyscf's orbital-gradient
#: threshold defaults to ``sqrt(conv_tol)``. Measured as above (rigid and frame scans):
#: up to 6.9e-7 hartree for MP2 and SCS-MP2 (5.5e-4 kcal/mol in the interaction energy),
#: against 1e-5 hartree allowed at the default threshold.
CORRELATED_TOTAL_FACTOR = 0.1
#: Absolute tolerance on per-atom forces (kcal/mol/angstrom). Gradients are linear in the
#: density error, which follows the orbital-gradient threshold (pyscf's default is the
#: square root of the energy threshold, ~3e-5 at 1e-9). Measured as above: per-atom
#: forces differ by up to 3.4e-3 kcal/mol/angstrom (HF/STO-3G), 6e-4 (def2-SVP).
FORCE_TOLERANCE = 0.02
#: Electrostatic (Hellmann–Feynman) forces and the Pulay remainder: the electrostatic force
#: is not variational, so it carries the density error at first order with nuclear-charge
#: prefactors. Measured as above: up to 3.3e-2 kcal/mol/angstrom (HF/STO-3G).
FORCE_SPLIT_TOLERANCE = 0.2
#: lever arm (angstrom) turning the force tolerance into a torque tolerance: atoms of a
#: small fragment lie within a few angstrom of its centre of mass
TORQUE_ARM_ANGSTROM = 5.0
#: SAPT0 terms (kcal/mol): their SCFs converge to 1e-10 hartree; the terms are linear in
#: the orbital error (~1e-5); measured as above: identical to 1e-12 kcal/mol
SAPT_TOLERANCE = 1e-4
#: dispersion corrections are analytic functions of the geometry
DISPERSION_CORRECTION_TOLERANCE = 1e-6
#: geometry is rebuilt from the spec; job coordinates are rounded to 1e-10 angstrom
GEOMETRY_TOLERANCE = 1e-8


@dataclass(frozen=True)
class Tolerance:
    """Largest accepted absolute deviation of one variable, with its reason."""

    value: float
    units: str
    reason: str
    #: a name for the levels this tolerance applies to (e.g. "SCF levels")
    group: str = ""
    #: level label -> its own Tolerance, where the levels differ (energies)
    per_level: dict | None = None


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


# ---------------------------------------------------------------------- tolerances
def _conv_tol(ds: xr.Dataset) -> float:
    try:
        return float(json.loads(ds.attrs["spec_json"]).get("conv_tol", 1e-8))
    except (KeyError, ValueError, TypeError, AttributeError):
        return 1e-8


def _level_methods(ds: xr.Dataset) -> dict[str, str]:
    """Level label -> method (``hf``, ``dft``, ``mp2``, ...) from the stored spec."""
    from ..model.levels import LevelOfTheory

    try:
        levels = json.loads(ds.attrs["spec_json"])["levels"]
        return {LevelOfTheory.from_dict(d).label: LevelOfTheory.from_dict(d).method for d in levels}
    except (KeyError, ValueError, TypeError, InputError):
        return {}


def tolerances(ds: xr.Dataset) -> dict[str, Tolerance]:
    """The tolerance of every comparable variable of ``ds`` (see :func:`compared_variables`).

    Energies follow the spec's SCF threshold ``conv_tol``, per level: a total energy of
    an HF or DFT level may move by ``SCF_TOTAL_FACTOR * conv_tol`` hartree (1e-6 at the
    default 1e-8), one of a correlated level by ``CORRELATED_TOTAL_FACTOR *
    sqrt(conv_tol)`` (1e-5); an interaction energy (three calculations) by three times
    that, in kcal/mol (1.9e-3 and 1.9e-2 kcal/mol). Forces follow the gradient threshold
    (fixed values, see the module constants); numerical forces (central differences)
    inherit the interaction-energy tolerance divided by the step.
    """
    from ..run.plan import NUMERICAL_FORCE_STEP_ANGSTROM

    tol = _conv_tol(ds)
    h = NUMERICAL_FORCE_STEP_ANGSTROM
    scf_total = SCF_TOTAL_FACTOR * tol
    cor_total = CORRELATED_TOTAL_FACTOR * math.sqrt(tol)
    classes = {
        "SCF levels": (scf_total, f"{SCF_TOTAL_FACTOR:g} x SCF threshold {tol:g} hartree (variational)"),
        "correlated levels": (cor_total, f"{CORRELATED_TOTAL_FACTOR:g} x sqrt(SCF threshold {tol:g}) hartree "
                                         "(correlation energy is first order in the orbital error)"),
    }
    methods = _level_methods(ds)
    level_labels = [str(x) for x in ds["level"].values] if "level" in ds.coords else []
    numerical = {}
    if "force_method" in ds.variables and "level" in ds["force_method"].dims:
        numerical = {str(lv): str(m).startswith("numerical")
                     for lv, m in zip(ds["force_method"]["level"].values, ds["force_method"].values)}

    grad_tol = min(tol, GRADIENT_CONV_TOL_HARTREE)
    force_reason = f"per-atom gradients, SCF threshold {grad_tol:g} hartree (first order in the density error)"

    def group_of(label: str) -> str:
        return "SCF levels" if methods.get(label, "hf") in ("hf", "dft") else "correlated levels"

    def energy_tolerance(kind: str, units: str) -> Tolerance:
        per = {}
        for label in level_labels:
            group = group_of(label)
            total, why = classes[group]
            if kind == "total":
                per[label] = Tolerance(total, "hartree", why, group)
            elif kind == "e_int":
                per[label] = Tolerance(3 * total * HARTREE_TO_KCAL_PER_MOL, units,
                                       f"3 calculations x {why}", group)
            elif numerical.get(label):
                per[label] = Tolerance(3 * total * HARTREE_TO_KCAL_PER_MOL / h, units,
                                       f"numerical force: the interaction-energy tolerance over the step {h} "
                                       "angstrom", group + ", numerical forces")
            else:
                per[label] = Tolerance(FORCE_TOLERANCE, units, force_reason, group + ", analytic forces")
        loosest = max(per.values(), key=lambda t: t.value) if per else Tolerance(
            3 * scf_total * HARTREE_TO_KCAL_PER_MOL if kind != "total" else scf_total, units, classes["SCF levels"][1])
        return Tolerance(loosest.value, loosest.units, loosest.reason, loosest.group, per or None)

    out: dict[str, Tolerance] = {}
    for name in compared_variables(ds):
        units = str(ds[name].attrs.get("units", ""))
        if name == "e_total_hartree":
            t = energy_tolerance("total", "hartree")
        elif name == "force_along":
            t = energy_tolerance("force_along", units)
        elif name.startswith(("force_hf", "force_pulay", "fragment_force_hf", "fragment_force_pulay")):
            t = Tolerance(FORCE_SPLIT_TOLERANCE, units,
                          "electrostatic (Hellmann-Feynman) force: not variational, first order in the density error")
        elif name.startswith(("forces", "fragment_force")):
            t = Tolerance(FORCE_TOLERANCE, units, force_reason)
        elif name == "fragment_torque":
            t = Tolerance(FORCE_TOLERANCE * TORQUE_ARM_ANGSTROM, units,
                          f"force tolerance x {TORQUE_ARM_ANGSTROM:g} angstrom lever arm")
        elif name.startswith("sapt_") or name in ("e_elst", "e_exch", "e_ind", "e_disp", "e_sapt0", "e_ssapt0"):
            t = Tolerance(SAPT_TOLERANCE, units, "SAPT0 SCFs converge to 1e-10 hartree; terms are first order in it")
        elif name.startswith("e_disp_corr"):
            t = Tolerance(DISPERSION_CORRECTION_TOLERANCE, units, "analytic function of the geometry")
        elif units == "angstrom" or units == "1":
            t = Tolerance(GEOMETRY_TOLERANCE, units, "rebuilt from the spec (coordinates rounded to 1e-10 angstrom)")
        elif ds[name].dtype.kind in "bUSO":
            t = Tolerance(0.0, "", "points that failed in one scan only")
        else:   # e_int, e_int_nocp, bsse and any later energy along the levels
            t = energy_tolerance("e_int", units or "kcal/mol")
        out[name] = t
    return out


def compared_variables(ds: xr.Dataset) -> list[str]:
    """Variables of ``ds`` that a recomputation must reproduce: every data variable
    along ``distance`` except timings and descriptive texts (:data:`NOT_COMPARED`)."""
    out = []
    for name, var in ds.data_vars.items():
        if name in NOT_COMPARED or "distance" not in var.dims:
            continue
        if var.dtype.kind in "fiub" or name in ("status", "sapt_status"):
            out.append(str(name))
    return out


# ---------------------------------------------------------------------- sampling
def sample_points(n_points: int, n: int, seed: int = 0) -> np.ndarray:
    """``n`` distinct point indices of ``range(n_points)``, reproducible for a seed, sorted.

    ``n`` larger than ``n_points`` takes every point.
    """
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1:
        raise InputError(f"sample: {n!r} is not a positive number of points")
    if n >= n_points:
        return np.arange(n_points)
    rng = np.random.default_rng(seed)
    return np.sort(rng.choice(n_points, size=int(n), replace=False))


def subset_spec(spec, indices):
    """A ScanSpec with only the points ``indices`` (positions in ``spec.points``).

    Everything else (levels, options, thresholds, the starting geometry) is kept, so the
    calculations of those points are the same jobs, with the same store keys.
    """
    from ..model.coordinates import Frames
    from ..model.spec import ScanSpec

    idx = [int(i) for i in indices]
    n = len(spec.points)
    for i in idx:
        if not 0 <= i < n:
            raise InputError(f"points: index {i} is outside the scan's {n} points")
    data = spec.to_dict()
    points = [spec.points[i] for i in idx]
    if isinstance(spec.coordinate, Frames):
        coord = spec.coordinate
        values = coord.frame_values(spec.dimer)
        # points are the frames sorted by value (values are distinct)
        order = sorted(range(len(values)), key=lambda k: values[k])
        frames = [order[i] for i in idx]
        data["coordinate"] = dict(data["coordinate"],
                                  frames_angstrom=[coord.frames[k].tolist() for k in frames],
                                  values=[coord.values[k] for k in frames] if coord.values is not None else None)
    elif spec.distances is not None:
        data["distances"] = [p.distance for p in points]
    else:
        data["factors"] = [p.factor for p in points]
    return ScanSpec.from_dict(data)


# ---------------------------------------------------------------------- comparison
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


# ---------------------------------------------------------------------- provenance
def store_keys(ds: xr.Dataset) -> list[str]:
    """The distinct store keys of the calculations recorded in ``ds`` (sorted)."""
    if "job_key" not in ds.variables:
        return []
    return sorted({str(k) for k in np.asarray(ds["job_key"].values).ravel() if str(k)})


def key_agreement(saved: xr.Dataset, plan, indices=None) -> tuple[int, int]:
    """``(matching, total)`` store keys of the points ``indices`` of ``saved`` against
    the keys ``plan`` (of the same spec, or of a :func:`subset_spec`) gives today.

    Keys differ when the pyscf version or interkit's numerics version changed since
    the file was written; the calculations are then new jobs, not store hits.
    """
    if "job_key" not in saved.variables:
        return 0, 0
    idx = np.arange(saved.sizes["distance"]) if indices is None else np.asarray(indices, dtype=int)
    keys = saved["job_key"].isel(distance=idx)
    levels = [str(x) for x in saved["level"].values]
    roles = [str(x) for x in saved["role"].values]
    labels = [lv.label for lv in plan.spec.levels]
    match = total = 0
    for (li, pi), entry in plan.table.items():
        if li >= len(labels) or labels[li] not in levels or pi >= idx.size:
            continue
        for role, key in entry.items():
            if role not in roles:
                continue
            stored = str(keys.sel(level=labels[li], role=role).values[pi])
            if stored:
                total += 1
                match += stored == key
    return match, total


def version_attrs(ds: xr.Dataset) -> dict[str, str]:
    """The library versions recorded in ``ds`` (attributes ending in ``_version``)."""
    return {k[: -len("_version")]: str(v) for k, v in sorted(ds.attrs.items()) if k.endswith("_version")}


def provenance_summary(ds: xr.Dataset) -> dict:
    """What a saved scan says about its own making.

    Returns
    -------
    dict
        ``spec`` (parsed spec JSON), ``versions`` (library -> version), ``created_utc``,
        ``codata``, ``schema``, ``n_store_keys`` (distinct calculations with a key),
        ``counterpoise`` and, when present, ``executor``, ``workers``,
        ``calculations_computed``, ``calculations_from_store``, ``run_wall_time_s``.
    """
    try:
        spec = json.loads(ds.attrs["spec_json"])
    except (KeyError, ValueError):
        raise InputError("dataset attrs.spec_json: missing or not JSON") from None
    out = {
        "spec": spec,
        "versions": version_attrs(ds),
        "created_utc": str(ds.attrs.get("created_utc", "")),
        "codata": str(ds.attrs.get("codata", "")),
        "schema": str(ds.attrs.get("schema", "")),
        "counterpoise": str(ds.attrs.get("counterpoise", "")),
        "n_store_keys": len(store_keys(ds)),
    }
    for key in ("executor", "workers", "calculations_computed", "calculations_from_store", "run_wall_time_s"):
        if key in ds.attrs:
            value = ds.attrs[key]
            out[key] = value.item() if hasattr(value, "item") else value
    return out


# ---------------------------------------------------------------------- replay
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


def _say(log: Callable[[str], None] | None, text: str) -> None:
    if log is not None:
        log(text)


def load_saved(ds_or_path) -> tuple[xr.Dataset, str | None]:
    """The scan Dataset of ``ds_or_path`` and its path (None for a Dataset in memory).

    Parameters
    ----------
    ds_or_path : xarray.Dataset or path-like
        A scan Dataset, or the ``.nc`` file written by :func:`interkit.save_scan`.
    """
    from ..data.schema import open_scan, validate

    if isinstance(ds_or_path, xr.Dataset):
        validate(ds_or_path)
        return ds_or_path, None
    if isinstance(ds_or_path, (str, os.PathLike)):
        return open_scan(ds_or_path), os.fspath(ds_or_path)
    raise InputError(f"scan: expected an xarray.Dataset or the path of a .nc file, got {type(ds_or_path).__name__}")


def rebuild_spec(ds: xr.Dataset, path: str | None = None):
    """The :class:`~interkit.model.spec.ScanSpec` recorded in ``ds`` (``attrs["spec_json"]``).

    Raises :class:`~interkit.errors.InputError` naming the file (``path``) when the
    spec is missing or cannot be rebuilt.
    """
    from ..data.schema import spec_of

    where = f"scan file {path!r}" if path is not None else "scan"
    try:
        return spec_of(ds)
    except InputError as exc:
        raise InputError(f"{where}: its spec cannot be rebuilt ({exc})") from None
    except (KeyError, TypeError, ValueError) as exc:
        raise InputError(f"{where}: attrs.spec_json cannot be rebuilt into a spec "
                         f"({type(exc).__name__}: {exc})") from None


def verify_scan(ds_or_path, sample: int = 3, seed: int = 0, executor="processes", workers: int | None = None,
                progress=True, log: Callable[[str], None] | None = None) -> DeviationTable:
    """Recompute sampled points of a saved scan from scratch and compare every variable.

    The sampled points form a spec of their own (:func:`subset_spec`), so they are the
    same calculations, with the same store keys, as in the full scan; they run without
    a store, each SCF from pyscf's default initial guess.

    Parameters
    ----------
    ds_or_path : xarray.Dataset or path-like
        The saved scan (its ``spec_json`` attribute says what to recompute).
    sample : int
        Number of points to recompute; more than the scan has recomputes all.
    seed : int
        Seed of the point sampling (:func:`sample_points`); the same seed picks the
        same points.
    executor : {'processes', 'serial'} or distributed.Client
        Where to compute (see :func:`interkit.run_scan`).
    workers : int, optional
        Worker processes for ``'processes'`` (default: all cores).
    progress : bool or callable
        Progress of the recomputation, as in :func:`interkit.run_scan`.
    log : callable, optional
        Receives one-line messages (the points chosen, the store keys), e.g. ``print``.

    Returns
    -------
    DeviationTable
        One :class:`Deviation` per variable: largest absolute deviation and its
        tolerance, both in the variable's units (kcal/mol for energies, hartree for
        totals, kcal/mol/angstrom for forces, angstrom for distances). A saved scan
        whose number of points differs from its spec gives a single failed
        ``distance`` row.
    """
    from ..run.plan import plan_scan
    from ..run.scan import run_scan

    saved, path = load_saved(ds_or_path)
    spec = rebuild_spec(saved, path)
    n = len(spec.points)
    m = int(saved.sizes["distance"])
    file_pyscf = str(saved.attrs.get("pyscf_version", ""))
    if m != n:
        row = Deviation("distance", "angstrom", 0, math.inf, f"the file has {m} points but its spec gives {n}",
                        abs(m - n), GEOMETRY_TOLERANCE, "same scan points", False)
        return DeviationTable([row], "verify", file_pyscf_version=file_pyscf)
    indices = sample_points(n, sample, seed)
    sub = subset_spec(spec, indices)
    distances = np.array([p.distance for p in sub.points])
    _say(log, f"verifying {len(indices)} of {n} points (seed {seed}) at "
              f"{', '.join(f'{r:.4f}' for r in distances)} Å, recomputed from scratch")
    fresh = run_scan(sub, executor=executor, cache=None, progress=progress, workers=workers)
    table = DeviationTable(compare_datasets(saved, fresh, indices), "verify", indices, distances,
                           key_agreement(saved, plan_scan(sub), indices), file_pyscf, fresh)
    _say(log, table.key_line())
    return table


def rerun_scan(ds_or_path, cache: str | os.PathLike | None = None, executor="processes",
               workers: int | None = None, progress=True,
               log: Callable[[str], None] | None = None) -> tuple[xr.Dataset, DeviationTable]:
    """Run a saved scan's spec again and compare the result with the saved numbers.

    Parameters
    ----------
    ds_or_path : xarray.Dataset or path-like
        The saved scan (its ``spec_json`` attribute is the spec to run).
    cache : path-like, optional
        Result store; calculations found there are reused, not recomputed (with the
        store the scan was computed into, a rerun checks the store and the file agree).
    executor : {'processes', 'serial'} or distributed.Client
        Where to compute (see :func:`interkit.run_scan`).
    workers : int, optional
        Worker processes for ``'processes'`` (default: all cores).
    progress : bool or callable
        Progress of the run, as in :func:`interkit.run_scan`.
    log : callable, optional
        Receives one-line messages (calculations computed and reused, store keys).

    Returns
    -------
    (xarray.Dataset, DeviationTable)
        The new scan (energies in kcal/mol, as every scan) and one :class:`Deviation`
        per variable against the saved one, in the variable's units.
    """
    from ..run.plan import plan_scan
    from ..run.scan import run_scan

    saved, path = load_saved(ds_or_path)
    spec = rebuild_spec(saved, path)
    fresh = run_scan(spec, executor=executor, cache=cache, progress=progress, workers=workers)
    _say(log, f"rerun of {path or 'the scan'}: {fresh.attrs.get('calculations_from_store', 0)} calculations from "
              f"the store, {fresh.attrs.get('calculations_computed', 0)} computed")
    n = int(saved.sizes["distance"])
    distances = np.asarray(saved["distance"].values, dtype=float)
    table = DeviationTable(compare_datasets(saved, fresh), "rerun", np.arange(n), distances,
                           key_agreement(saved, plan_scan(spec)), str(saved.attrs.get("pyscf_version", "")), fresh)
    _say(log, table.key_line())
    return fresh, table
