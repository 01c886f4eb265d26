"""run_study: every calculation of every system of a study through one plan and one executor.

The plans of the systems (:func:`interkit.run.plan.plan_scan`) are merged into one
dictionary of jobs (a calculation shared by two systems, same key, runs once), split
into chunks (contiguous runs of points of one system and level, so SCF guesses carry
over), and handed to ONE executor call: local processes, this process, or a Dask
cluster. One progress bar counts them, one store keeps them, so a killed study resumes
where it stopped. A failed calculation is a failed record (NaN with its reason) in its
system only; the other systems are unaffected. Each system's Dataset is then assembled
exactly as :func:`interkit.run_scan` assembles it.
"""

from __future__ import annotations

import math
import os
import threading
import time
import warnings

import xarray as xr

from ..data.schema import assemble
from ..data.study_tree import build_study_tree
from ..errors import InputError, InterkitError, InterkitWarning
from ..model.study import Study
from .plan import plan_scan
from .scan import _make_progress, _not_stored, execute_chunks, fit_pool, posthoc_dispersion, resolve_executor
from .store import ResultStore


def plan_study(study: Study) -> list:
    """The :class:`~interkit.model.job.ScanPlan` of every system, with the feasibility
    checks; a refusal names the system and nothing runs."""
    if not isinstance(study, Study):
        raise InputError(f"study: expected an interkit Study, got {type(study).__name__}")
    plans = []
    for name, spec in zip(study.names, study.specs):
        try:
            plans.append(plan_scan(spec))
        except InterkitError as exc:
            raise type(exc)(f"system {name!r}: {exc}") from None
    return plans


def merged_jobs(plans) -> dict:
    """One dictionary of every job of every plan, deduplicated by key."""
    jobs: dict = {}
    for plan in plans:
        for key, job in plan.jobs.items():
            jobs.setdefault(key, job)
    return jobs


def study_chunks(plans, done: set[str] | dict, n_workers: int) -> list[list[tuple[str, str]]]:
    """Ordered task lists of ``(role, key)`` over all systems, each key once, without
    ``done`` keys; the most expensive first, so the last chunks to start are short ones."""
    total = sum(len(p.jobs) for p in plans) or 1
    seen: set[str] = set(done)
    out = []
    for plan in plans:
        n_levels = len(plan.spec.levels)
        k = max(n_levels, math.ceil(2 * n_workers * len(plan.jobs) / total))
        for tasks in plan.chunks(k):
            todo = []
            for role, key in tasks:
                if key not in seen:
                    seen.add(key)
                    todo.append((role, key))
            if todo:
                out.append(todo)
    # longest first (by a rough cost, atoms cubed): the last chunks to start are short ones
    jobs = {k: j for plan in plans for k, j in plan.jobs.items()}
    out.sort(key=lambda tasks: sum(len(jobs[k].symbols) ** 3 for _, k in tasks), reverse=True)
    return out


def run_study(study: Study, executor="processes", cache: str | os.PathLike | None = None,
              progress=True, workers: int | None = None, cancel: threading.Event | None = None) -> xr.DataTree:
    """Run every system of a study in one executor call and collect the results.

    Parameters
    ----------
    study : Study
    executor : {'processes', 'serial'} or distributed.Client
        As in :func:`interkit.run_scan`; with a Dask client (or
        :class:`~interkit.run.dask.DaskExecutor`) every calculation is one task on the
        cluster, e.g. a ``dask_jobqueue`` cluster of batch jobs.
    cache : path-like, optional
        Result store folder; a rerun or a resumed study computes only what is missing.
    progress : bool or callable
        One tqdm bar for the whole study, or ``callback(done, total, key, record)``.
    workers : int, optional
        Worker processes (default: all cores); ignored with a Dask client.
    cancel : threading.Event, optional
        When set, workers stop after their running calculation; what finished is kept
        (and stored), the rest comes back as failed ("cancelled").

    Returns
    -------
    xarray.DataTree
        One node per system holding its scan Dataset (as :func:`interkit.run_scan`
        returns it) and a root with the study's summary (see
        :mod:`interkit.data.study_tree`). Root attributes ``calculations_computed``,
        ``calculations_from_store`` and ``run_wall_time_s`` (s) describe the run.

    Raises
    ------
    Exception
        An error once calculations have started carries every record at hand as
        ``exc.records`` (job key -> record), besides the copies in the store.
    """
    executor, dask_executor, n_workers = resolve_executor(executor, workers)
    plans = plan_study(study)
    jobs = merged_jobs(plans)
    store = ResultStore(cache) if cache is not None else None
    records: dict[str, dict] = {}
    if store is not None:
        for key in jobs:
            rec = store.get(key)
            if rec is not None:
                records[key] = rec
    from_store = set(records)
    parallel = executor in ("processes", "dask")
    pool = None
    if executor in ("processes", "serial"):  # sized by the largest calculation of any system
        costs = {f"{name}: {label}": cost for name, plan in zip(study.names, plans)
                 for label, cost in ((plan.feasibility or {}).get("levels") or {}).items()}
        pool = fit_pool(costs, n_workers if executor == "processes" else 1, workers is not None)
        n_workers = pool["workers"] if executor == "processes" else n_workers
    chunks = study_chunks(plans, records, n_workers if parallel else 1)
    n_todo = sum(len(c) for c in chunks)
    shown, close = _make_progress(progress if n_todo else False, n_todo)

    def report(key, record):
        records[key] = record
        if shown is not None:
            shown(key, record)

    t0 = time.perf_counter()
    try:
        if n_todo:
            records.update(execute_chunks(chunks, jobs, store, report, executor, dask_executor, n_workers, pool,
                                          cancel))
        not_stored = set(_not_stored(records, store))
        cancelled = cancel is not None and cancel.is_set()
        datasets, failures = {}, {}
        for name, plan in zip(study.names, plans):
            try:
                ds = assemble(plan, {k: records[k] for k in plan.jobs if k in records},
                              missing_reason="cancelled" if cancelled else "not computed",
                              dispersion_terms=posthoc_dispersion(plan))
            except Exception as exc:  # one system's problem never hides the others' results
                failures[name] = f"{type(exc).__name__}: {(str(exc).splitlines() or [''])[0][:300]}"
                warnings.warn(f"system {name!r}: its results could not be assembled ({failures[name]}); "
                              "the other systems are kept", InterkitWarning, stacklevel=2)
                continue
            ds.attrs["executor"] = executor
            ds.attrs["workers"] = n_workers if parallel else 1
            ds.attrs["calculations_from_store"] = sum(k in from_store for k in plan.jobs)
            ds.attrs["calculations_computed"] = sum(k in records and k not in from_store for k in plan.jobs)
            ds.attrs["calculations_not_stored"] = sum(k in not_stored for k in plan.jobs)
            datasets[name] = ds
        wall = time.perf_counter() - t0
        run_attrs = {"executor": executor, "workers": n_workers if parallel else 1,
                     "calculations_total": len(jobs), "calculations_computed": n_todo,
                     "calculations_from_store": len(jobs) - n_todo, "calculations_not_stored": len(not_stored),
                     "run_wall_time_s": wall}
        if pool is not None:
            run_attrs.update(worker_peak_estimate_mb=pool["worker_peak_mb"], orbital_cache_mb=pool["cache_mb"],
                             available_memory_mb=pool["available_mb"])
        tree = build_study_tree(study, datasets, failures, run_attrs)
    except BaseException as exc:  # nothing computed is lost to a late error
        try:
            exc.records = dict(records)
        except AttributeError:
            pass
        raise
    finally:
        close()
    return tree
