"""refine_minimum: R_min and De of a scan to 0.001 Å / 0.001 kcal/mol with a few extra points.

The grid minimum of a scan is only as good as its spacing. ``refine_minimum`` computes a
few more points on the same coordinate (same level, settings and store), near the
minimum of the spline through the grid (:func:`interkit.analysis.minima.find_minimum`):

* with forces (``force_along = -dE/dR``): secant steps on the zero of the force, from
  the two computed points closest to the estimate, until a step is shorter than
  ``tolerance_angstrom``; E_min from the cubic Hermite interpolant (energies and
  forces) between the two closest points;
* without forces: three points ``c - h, c, c + h`` (``h = 0.01`` Å) around the estimate
  ``c``; the vertex of their parabola is the next estimate, until it moves by less than
  ``tolerance_angstrom``. The vertex of a symmetric three-point parabola is off the
  true minimum by about ``E''' h^2 / (6 E'')``, ~1e-4 Å for hydrogen-bonded or van der
  Waals curves at this ``h``.

For a :class:`~interkit.Frames` scan the geometry between two frames is their linear
interpolation, allowed only when the frames differ by a rigid translation of B (as the
S22x5 curves do); otherwise the refinement is refused.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

import numpy as np
import xarray as xr
from scipy.optimize import brentq

from ..data.schema import spec_of
from ..errors import ConvergenceError, InputError, NotAvailableError
from ..model.coordinates import Frames
from ..model.geometry import Dimer
from ..model.spec import ScanSpec
from ..run.scan import run_scan
from ..run.store import DEFAULT_STORE
from .minima import find_minimum

DEFAULT_TOLERANCE_ANGSTROM = 2e-4
STENCIL_ANGSTROM = 0.01
#: frames count as related by a rigid translation of B when they agree to this (Å)
RIGID_TOLERANCE_ANGSTROM = 1e-6


@dataclass
class RefinedMinimum:
    """Result of :func:`refine_minimum`.

    Attributes
    ----------
    level : str
    r_min_angstrom, e_min_kcal_per_mol, well_depth_kcal_per_mol : float
        Refined position of the minimum, E_int there, and ``-E_int``.
    grid_r_min_angstrom, grid_e_min_kcal_per_mol : float
        The spline estimate from the grid alone.
    method : str
        How the extra points were placed.
    points : xarray.Dataset
        The extra points (dimension ``distance``): ``e_int`` (kcal/mol) and, with
        forces, ``force_along`` (kcal/mol/Å), in the order computed.
    """

    level: str
    r_min_angstrom: float
    e_min_kcal_per_mol: float
    well_depth_kcal_per_mol: float
    grid_r_min_angstrom: float
    grid_e_min_kcal_per_mol: float
    method: str
    points: xr.Dataset

    def to_dict(self) -> dict:
        return {k: getattr(self, k) for k in ("level", "r_min_angstrom", "e_min_kcal_per_mol",
                                              "well_depth_kcal_per_mol", "grid_r_min_angstrom",
                                              "grid_e_min_kcal_per_mol", "method")}


def _frames_geometry(spec: ScanSpec):
    """Function R -> Dimer interpolating between neighbouring frames (rigid B translations only)."""
    frames = spec.coordinate.dimers(spec.dimer)
    values = np.array(spec.coordinate.frame_values(spec.dimer))
    order = np.argsort(values)
    frames, values = [frames[i] for i in order], values[order]
    a, b = list(spec.dimer.fragment_a), list(spec.dimer.fragment_b)
    measure = spec.coordinate.measure

    def geometry(r: float) -> Dimer:
        k = int(np.clip(np.searchsorted(values, r) - 1, 0, len(values) - 2))
        x0, x1 = frames[k].coordinates, frames[k + 1].coordinates
        shift = x1[b] - x0[b]
        if (np.abs(x1[a] - x0[a]).max() > RIGID_TOLERANCE_ANGSTROM
                or np.abs(shift - shift.mean(axis=0)).max() > RIGID_TOLERANCE_ANGSTROM):
            raise NotAvailableError(f"coordinate frames[{order[k]}] and frames[{order[k + 1]}]: they do not differ "
                                    "by a rigid translation of B; refine_minimum needs a continuous coordinate")

        def at(lam: float) -> Dimer:
            return frames[k].with_coordinates(x0 + lam * (x1 - x0))

        lam = brentq(lambda t: measure.value(at(t)) - r, -1.0, 2.0, xtol=1e-14)
        return at(lam)

    return geometry, measure


def refine_minimum(ds: xr.Dataset, level: str | None = None, *,
                   tolerance_angstrom: float = DEFAULT_TOLERANCE_ANGSTROM, max_points: int = 10,
                   cache: str | os.PathLike | None = DEFAULT_STORE, executor="serial",
                   workers: int | None = None) -> RefinedMinimum:
    """Locate the minimum of one level's curve of ``ds`` to ``tolerance_angstrom``.

    Parameters
    ----------
    ds : xarray.Dataset
        A scan from :func:`interkit.run_scan` or :func:`interkit.open_scan` (its spec
        is read from the Dataset).
    level : str, optional
        Level label; needed when the scan has more than one.
    tolerance_angstrom : float
        Stop when the estimate moves by less than this (Å; default 2e-4).
    max_points : int
        At most this many extra points; more raise ConvergenceError (the points are
        in the store).
    cache, executor, workers
        As in :func:`interkit.run_scan`; the extra points go into the same store.

    Returns
    -------
    RefinedMinimum
    """
    spec = spec_of(ds)
    if "dispersion" in ds["e_int"].dims:
        raise NotAvailableError("refine_minimum: the scan compares dispersion schemes; refine a scan of one level")
    labels = [str(x) for x in ds["level"].values]
    if level is None:
        if len(labels) != 1:
            raise InputError(f"level: the scan has levels {labels}; name the one to refine")
        level = labels[0]
    if level not in labels:
        raise InputError(f"level: {level!r} is not one of {labels}")
    li = labels.index(level)
    tol = float(tolerance_angstrom)
    if not np.isfinite(tol) or tol <= 0:
        raise InputError(f"tolerance_angstrom: {tolerance_angstrom!r} is not a positive number")
    r_grid = ds["distance"].values.astype(float)
    e_grid = ds["e_int"].values[li].astype(float)
    grid = find_minimum(r_grid, e_grid)
    if not grid.interior:
        raise InputError(f"e_int of level {level!r}: the lowest point lies at the edge of the grid "
                         f"({grid.r_min_angstrom:.3f} Å) or the curve has fewer than 4 points; "
                         "no minimum to refine inside the scanned range")
    if isinstance(spec.coordinate, Frames):
        geometry, measure = _frames_geometry(spec)
    else:
        measure = spec.coordinate

        def geometry(r: float) -> Dimer:
            return spec.coordinate.displaced(spec.dimer, r)

    forces = bool(spec.forces) and "force_along" in ds
    lv = spec.levels[li]
    done: dict[float, tuple[float, float]] = {}
    order: list[float] = []

    def compute(r: float) -> tuple[float, float]:
        r = float(r)
        for known, val in done.items():
            if abs(known - r) < 1e-9:
                return val
        if len(order) >= max_points:
            raise ConvergenceError(f"refine_minimum: no convergence to {tol:g} Å within {max_points} extra points "
                                   "(the points are in the store)")
        one = ScanSpec(dimer=spec.dimer, coordinate=Frames([geometry(r)], measure=measure), levels=[lv],
                       counterpoise=spec.counterpoise, forces=forces, scf_threshold_hartree=spec.scf_threshold_hartree,
                       memory_limit_mb=spec.memory_limit_mb, name=spec.name)
        out = run_scan(one, executor=executor, cache=cache, progress=False, workers=workers)
        if not bool(out["converged"].values[0, 0]):
            raise ConvergenceError(f"refine_minimum: the point at {r:.4f} Å failed ({out['status'].values[0, 0]})")
        val = (float(out["e_int"].values[0, 0]), float(out["force_along"].values[0, 0]) if forces else np.nan)
        done[r] = val
        order.append(r)
        return val

    if forces:
        f_grid = ds["force_along"].values[li].astype(float)
        known = [(r, e, f) for r, e, f in zip(r_grid, e_grid, f_grid) if np.isfinite(e) and np.isfinite(f)]
        c = grid.r_min_angstrom
        e_c, f_c = compute(c)
        known.append((c, e_c, f_c))
        while True:
            known.sort(key=lambda p: abs(p[0] - c))
            (r1, _, f1), (r2, _, f2) = known[0], known[1]
            slope = (f2 - f1) / (r2 - r1)  # f = -dE/dR falls through zero at the minimum
            if not slope < 0:
                raise ConvergenceError(f"refine_minimum: the force of level {level!r} does not fall through zero "
                                       f"near {c:.4f} Å")
            new = r1 - f1 / slope
            if abs(new - c) < tol and abs(new - r1) < tol:
                c = new
                break
            c = new
            e_c, f_c = compute(c)
            known.append((c, e_c, f_c))
        known.sort(key=lambda p: abs(p[0] - c))
        (ra, ea, fa), (rb, eb, fb) = sorted(known[:2])
        e_min = _hermite(c, ra, rb, ea, eb, -fa, -fb)
        method = "secant steps on the zero of the force along the coordinate"
    else:
        c, h = grid.r_min_angstrom, STENCIL_ANGSTROM
        while True:
            em, e0, ep = (compute(c + s * h)[0] for s in (-1, 0, 1))
            curv = (ep - 2 * e0 + em) / h**2
            if not curv > 0:
                raise ConvergenceError(f"refine_minimum: the curve of level {level!r} is not convex near {c:.4f} Å")
            new = c - (ep - em) / (2 * h) / curv
            step = new - c
            e_min = e0 + (ep - em) / (2 * h) * step + 0.5 * curv * step**2
            c = new
            if abs(step) < tol:
                break
        method = f"vertex of the parabola through three points {STENCIL_ANGSTROM} Å apart"
    pts = xr.Dataset(
        {"e_int": ("distance", [done[r][0] for r in order],
                   {"units": "kcal/mol", "long_name": "counterpoise-corrected interaction energy"})},
        coords={"distance": ("distance", order, {"units": "angstrom"})},
        attrs={"level": level, "method": method, "tolerance_angstrom": tol,
               "stencil_angstrom": STENCIL_ANGSTROM if not forces else float("nan")})
    if forces:
        pts["force_along"] = ("distance", [done[r][1] for r in order],
                              {"units": "kcal/mol/angstrom", "long_name": "net force on B along the coordinate"})
    return RefinedMinimum(level, float(c), float(e_min), float(-e_min), grid.r_min_angstrom,
                          grid.e_min_kcal_per_mol, method, pts)


def _hermite(x: float, x0: float, x1: float, e0: float, e1: float, d0: float, d1: float) -> float:
    """Cubic Hermite interpolant of values ``e`` and slopes ``d`` at ``x``."""
    h = x1 - x0
    t = (x - x0) / h
    return float((2 * t**3 - 3 * t**2 + 1) * e0 + (t**3 - 2 * t**2 + t) * h * d0
                 + (-2 * t**3 + 3 * t**2) * e1 + (t**3 - t**2) * h * d1)
