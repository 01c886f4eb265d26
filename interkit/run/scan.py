"""run_scan: plan -> store lookup -> executor -> assemble, with progress reporting."""

from __future__ import annotations

import os
import sys
import threading
import time
import warnings
from collections.abc import Callable

import xarray as xr

from ..data.schema import assemble
from ..errors import InputError, InterkitWarning
from ..model.job import ScanPlan
from ..model.spec import ScanSpec
from .executors import NOT_STORED_FIELD, run_processes, run_serial
from .plan import plan_scan
from .store import DEFAULT_STORE, ResultStore, resolve_cache

ProgressCallback = Callable[[int, int, str, dict], None]


def _guarded(report):
    """``report`` that never raises: the first exception is reported once (an
    :class:`InterkitWarning`), later calls are still attempted, the scan goes on."""
    if report is None:
        return None
    failed = threading.Event()

    def guarded(key, record):
        try:
            report(key, record)
        except Exception as exc:  # a broken progress display must not stop the scan
            if not failed.is_set():
                failed.set()
                text = (str(exc).strip().splitlines() or [""])[0][:200]
                warnings.warn(f"progress: the progress display raised {type(exc).__name__}: {text}; "
                              "the scan goes on (further errors of the display are not reported)",
                              InterkitWarning, stacklevel=2)

    return guarded


def _make_progress(progress, total: int):
    """Return (report(key, record), close()) for True/False/a callable.

    An exception in the progress callback (or the bar) never stops a scan: it is reported
    once as an :class:`~interkit.errors.InterkitWarning`.
    """
    report, close = _make_progress_unguarded(progress, total)

    def safe_close():
        try:
            close()
        except Exception:
            pass

    return _guarded(report), safe_close


def _make_progress_unguarded(progress, total: int):
    if callable(progress):
        done = [0]

        def report(key, record):
            done[0] += 1
            progress(done[0], total, key, record)

        return report, lambda: None
    if progress:
        from tqdm.auto import tqdm

        bar = tqdm(total=total, desc="calculations", unit="calc", file=sys.stderr, leave=True)

        def report(key, record):
            bar.update(1)
            if record.get("status") == "failed":
                bar.set_postfix_str("a calculation failed", refresh=False)

        return report, bar.close
    return None, lambda: None


def resolve_executor(executor, workers: int | None):
    """Validate ``executor`` and ``workers`` of run_scan/run_study.

    Returns ``(name, dask_executor, n_workers)``: ``name`` is 'processes', 'serial' or
    'dask'; ``dask_executor`` the :class:`~interkit.run.dask.DaskExecutor` (or None);
    ``n_workers`` the workers asked for (default: all cores), or with Dask the threads
    of the cluster's workers (the cluster decides; chunks follow its threads).
    """
    dask_executor = None
    if not isinstance(executor, str):
        from .dask import as_dask_executor

        dask_executor, executor = as_dask_executor(executor), "dask"
    elif executor not in ("processes", "serial"):
        raise InputError(f"executor: {executor!r} is not one of 'processes', 'serial' or a Dask client")
    n_workers = workers if workers is not None else (os.cpu_count() or 1)
    if isinstance(n_workers, bool) or not isinstance(n_workers, int) or n_workers < 1:
        raise InputError(f"workers: {workers!r} is not a positive integer")
    if dask_executor is not None:
        n_workers = max(1, sum(dask_executor.worker_threads().values()))
    return executor, dask_executor, n_workers


def execute_chunks(chunks, jobs, store, report, executor: str, dask_executor, n_workers: int,
                   pool: dict | None, cancel) -> dict[str, dict]:
    """Hand the chunks to the executor run_scan/run_study resolved: the Dask executor,
    this process (with the pool's orbital-cache budget) or local worker processes."""
    store_root = os.fspath(store.root) if store is not None else None
    if dask_executor is not None:
        return dask_executor.run(chunks, jobs, store_root, report, cancel)
    if executor == "serial" or n_workers == 1:
        from ..engine.numint_cache import set_cache_budget

        old_budget = set_cache_budget(pool["cache_mb"])
        try:
            return run_serial(chunks, jobs, store_root, report, cancel)
        finally:
            set_cache_budget(old_budget)
    return run_processes(chunks, jobs, store_root, report, workers=min(n_workers, len(chunks)), cancel=cancel,
                         cache_mb=pool["cache_mb"])


def run_scan(
    spec: ScanSpec,
    executor: str = "processes",
    cache: str | os.PathLike | None = DEFAULT_STORE,
    progress: bool | ProgressCallback = True,
    workers: int | None = None,
    cancel: threading.Event | None = None,
) -> xr.Dataset:
    """Run a counterpoise-corrected interaction-energy scan.

    Parameters
    ----------
    spec : ScanSpec
        What to compute.
    executor : {'processes', 'serial'} or distributed.Client
        ``'processes'`` runs contiguous chunks of points in local worker processes with
        one BLAS/OpenMP thread each; ``'serial'`` runs in this process; a Dask client
        (or :class:`~interkit.run.dask.DaskExecutor`) runs one calculation per
        task on its cluster (see :mod:`interkit.run.dask`).
    cache : path-like, None or DEFAULT_STORE
        Directory of a :class:`~interkit.run.store.ResultStore`. Finished calculations are
        written there at once; a rerun (or a resumed, killed run) computes only what
        is missing. The default, :data:`interkit.DEFAULT_STORE`, is the folder of
        :func:`~interkit.run.store.default_store_folder`: ``$INTERKIT_CACHE`` if set, else
        ``.interkit-cache`` in the current folder (as on the command line). ``None``
        keeps no store (every calculation runs, nothing is written).
    progress : bool or callable
        True shows a tqdm bar; a callable receives ``(done, total, key, record)``.
    workers : int, optional
        Worker processes (default: all cores); ignored with a Dask client. Fewer run
        when the estimated peak per worker times the workers would not fit in the
        available memory (:mod:`interkit.run.resources`; a warning says so when
        ``workers`` was given).
    cancel : threading.Event, optional
        When set, workers stop after their running calculation (Dask: tasks not yet
        finished are cancelled); finished results are kept and missing points come
        back as failed ("cancelled").

    Returns
    -------
    xarray.Dataset
        See :mod:`interkit.data.schema` for the layout; energies in kcal/mol. The attribute
        ``calculations_not_stored`` counts the calculations that could not be written to
        the store (disk full, no permission; a warning says why): their results are in
        the Dataset all the same, a rerun computes them again.

    Raises
    ------
    Exception
        An error once calculations have started (an interrupt, an error of the executor,
        while assembling the Dataset or in the post-hoc dispersion step) carries every
        record at hand, computed or read from the store, as ``exc.records`` (job key ->
        record; ``assemble(plan_scan(spec), exc.records)`` builds the Dataset, see
        :func:`interkit.data.schema.assemble`), besides the copies in the store.
    """
    if not isinstance(spec, ScanSpec):
        raise InputError(f"spec: expected an interkit.ScanSpec, got {type(spec).__name__}")
    executor, dask_executor, n_workers = resolve_executor(executor, workers)
    cache = resolve_cache(cache)
    plan = plan_scan(spec)  # with the feasibility checks: refuses before any calculation
    store = ResultStore(cache) if cache is not None else None
    records: dict[str, dict] = {}
    if store is not None:
        for key in plan.jobs:
            rec = store.get(key)
            if rec is not None:
                records[key] = rec
    pool = None
    if executor in ("processes", "serial"):
        pool = fit_pool((plan.feasibility or {}).get("levels") or {}, n_workers if executor == "processes" else 1,
                        workers is not None)
        n_workers = pool["workers"] if executor == "processes" else n_workers
    chunks = _pending_chunks(plan, records, n_workers if executor in ("processes", "dask") else 1)
    n_todo = sum(len(c) for c in chunks)
    shown, close = _make_progress(progress if n_todo else False, n_todo)

    def report(key, record):  # every finished record is kept here at once
        records[key] = record
        if shown is not None:
            shown(key, record)

    t0 = time.perf_counter()
    try:
        if n_todo:
            records.update(execute_chunks(chunks, plan.jobs, store, report, executor, dask_executor, n_workers,
                                          pool, cancel))
        not_stored = _not_stored(records, store)
        cancelled = cancel is not None and cancel.is_set()
        t_disp = time.perf_counter()
        terms = posthoc_dispersion(plan)
        t_disp = time.perf_counter() - t_disp
        ds = assemble(plan, records, missing_reason="cancelled" if cancelled else "not computed",
                      dispersion_terms=terms)
    except BaseException as exc:  # nothing computed is lost to a late error
        try:
            exc.records = dict(records)
        except AttributeError:
            pass
        raise
    finally:
        close()
    ds.attrs["calculations_not_stored"] = len(not_stored)
    ds.attrs["executor"] = executor
    ds.attrs["workers"] = n_workers if executor in ("processes", "dask") else 1
    if pool is not None:
        ds.attrs["worker_peak_estimate_mb"] = pool["worker_peak_mb"]
        ds.attrs["orbital_cache_mb"] = pool["cache_mb"]
        ds.attrs["available_memory_mb"] = pool["available_mb"]
    ds.attrs["calculations_computed"] = n_todo
    ds.attrs["calculations_from_store"] = len(plan.jobs) - n_todo
    ds.attrs["run_wall_time_s"] = time.perf_counter() - t0
    if spec.dispersion:
        ds.attrs["dispersion_wall_time_s"] = t_disp
    return ds


def fit_pool(costs: dict[str, dict], wanted: int, asked: bool) -> dict:
    """Workers and orbital-cache budget that fit in memory, from size estimates by name
    (see :func:`interkit.run.resources.plan_pool`); warns when fewer workers than asked
    for fit."""
    from .resources import plan_pool

    pool = plan_pool(costs, wanted)
    if pool["limited_by_memory"] and asked:
        warnings.warn(f"workers: {wanted} workers would need about {wanted * pool['worker_peak_mb']:.0f} MB, "
                      f"{pool['available_mb']:.0f} MB are available; running {pool['workers']}",
                      InterkitWarning, stacklevel=3)
    return pool


def _not_stored(records: dict[str, dict], store: ResultStore | None) -> list[str]:
    """Keys of the records the executor could not write to the store (one warning).

    Executors mark such a record with ``NOT_STORED_FIELD`` (the reason); the mark is
    removed here, the record itself stays in the scan.
    """
    keys, reasons = [], []
    for key, rec in records.items():
        why = rec.pop(NOT_STORED_FIELD, None)
        if why is not None:
            keys.append(key)
            reasons.append(str(why))
    if keys and store is not None:
        warnings.warn(f"store: {len(keys)} calculation(s) could not be written to {str(store.root)!r} "
                      f"({reasons[0][:160]}); their results are in this scan, a rerun computes them again",
                      InterkitWarning, stacklevel=3)
    return keys


def posthoc_dispersion(plan: ScanPlan) -> dict | None:
    """The post-hoc dispersion terms of every scheme in ``plan.spec.dispersion`` for the
    plan's DFT calculations (None without schemes). They depend on the geometry only,
    so they can be computed before, during or after the SCFs: milliseconds each."""
    if not plan.spec.dispersion:
        return None
    from ..engine.dispersion import dispersion_terms

    return dispersion_terms(plan.jobs.values(), plan.spec.dispersion, with_gradient=plan.spec.forces)


def _pending_chunks(plan: ScanPlan, records: dict, n_workers: int) -> list[list[tuple[str, str]]]:
    n_chunks = n_workers if len(plan.spec.levels) == 1 else 2 * n_workers
    out = []
    for tasks in plan.chunks(n_chunks):
        todo = [(role, key) for role, key in tasks if key not in records]
        if todo:
            out.append(todo)
    return out
