"""Replay a saved scan: recompute it, or sampled points of it, and compare.

Two functions run the recomputation, from Python or a notebook as well as from
``interkit rerun``/``verify``:

* :func:`verify_scan` recomputes a few sampled points from scratch (no store) and
  compares every variable with the saved scan;
* :func:`rerun_scan` runs the saved spec again (reusing a store, if given) and compares.

Both return a :class:`~interkit.share.compare.DeviationTable`: a list of
:class:`~interkit.share.compare.Deviation` rows that prints as a text table and says
whether every variable passed (tolerances: :mod:`interkit.share.tolerances`).
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable

import numpy as np
import xarray as xr

from ..errors import InputError
from .compare import Deviation, DeviationTable, compare_datasets
from .provenance import key_agreement, load_saved, rebuild_spec
from .tolerances import GEOMETRY_TOLERANCE


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
        if "symbols" in data["coordinate"]:
            data["coordinate"]["symbols"] = [coord.to_dict()["symbols"][k] for k in frames]
    elif spec.distances is not None:
        data["distances"] = [p.distance for p in points]
    else:
        data["factors"] = [p.factor for p in points]
    return ScanSpec.from_dict(data)


def _say(log: Callable[[str], None] | None, text: str) -> None:
    if log is not None:
        log(text)


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
                           key_agreement(saved, plan_scan(sub, check=False), indices), file_pyscf, fresh)
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
                           key_agreement(saved, plan_scan(spec, check=False)), str(saved.attrs.get("pyscf_version", "")), fresh)
    _say(log, table.key_line())
    return fresh, table
