"""Executors: run chunks of jobs serially or in local worker processes.

A chunk is an ordered list of ``(role, key)``; a worker runs it in order, seeding each
SCF with the best density it already has (:func:`chunk_guess`), and writes every
finished result to the store at once so a killed run loses at most the running jobs.
A result that cannot be written (disk full, permission) is still returned, marked with
``NOT_STORED_FIELD``.
"""

from __future__ import annotations

import multiprocessing
import os
import queue as queue_module
import threading
from collections.abc import Callable
from concurrent.futures import ProcessPoolExecutor, as_completed
from contextlib import contextmanager

import numpy as np

from ..model.job import Job, failed_record

_THREAD_VARS = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")
#: field an executor adds to a record it could not write to the store (the reason);
#: :func:`interkit.run.run_scan` counts and removes it
NOT_STORED_FIELD = "_not_stored"


def run_chunk(tasks, jobs: dict[str, Job], store_root: str | None = None,
              report: Callable[[str, dict], None] | None = None,
              cancel=None) -> list[tuple[str, dict]]:
    """Run one chunk in this process; return ``[(key, record), ...]``.

    Jobs asking for ``'sapt0'`` go to :func:`interkit.engine.decomposition.run_decomposition_job`,
    every other job to :func:`interkit.engine.energy.run_energy_job`.
    """
    from ..engine.decomposition import run_decomposition_job
    from ..engine.energy import run_energy_job
    from .store import ResultStore

    store, store_problem = None, None
    if store_root:
        try:
            store = ResultStore(store_root)
        except OSError as exc:  # e.g. made read-only meanwhile: results are still returned
            store_problem = _reason(exc)
    history: dict[str, list] = {}
    latest: dict[str, tuple] = {}
    out = []
    for role, key in guess_order(tasks):
        if cancel is not None and cancel.is_set():
            break
        job = jobs[key]
        if "sapt0" in job.outputs:
            record, density = run_decomposition_job(job), None
        else:
            guess, source = chunk_guess(role, job, history, latest)
            record, density = run_energy_job(job, guess)
            if guess is not None and record.get("guess") == "previous point":  # the engine's name for any guess
                record["guess"] = source
        if density is not None:
            history[role] = (history.get(role, []) + [(np.asarray(job.coordinates), density)])[-2:]
            latest[role] = (job, density)
        else:
            history.pop(role, None)
            latest.pop(role, None)
        record["role"] = role
        if store_root and record["status"] != "failed":
            why = store_problem if store is None else put_record(store, key, record, job.describe())
            if why is not None:
                record[NOT_STORED_FIELD] = why
        out.append((key, record))
        if report is not None:
            report(key, record)
    return out


def put_record(store, key: str, record: dict, job: dict) -> str | None:
    """Write one record to ``store``; None when written, else why not (one line)."""
    try:
        store.put(key, record, job)
    except (OSError, ValueError, TypeError) as exc:  # disk full, permission...
        return _reason(exc)
    return None


def _reason(exc: BaseException) -> str:
    text = exc.strerror if isinstance(exc, OSError) and exc.strerror else str(exc)
    return f"{type(exc).__name__}: {(text.strip().splitlines() or [''])[0]}"[:200]


#: order of the roles of a chunk's first point: each one can then start from the
#: densities of those before it (own-basis monomer -> ghosted monomer -> dimer)
_FIRST_POINT_ORDER = {"a_own_basis": 0, "b_own_basis": 0}


def _first_point_rank(role: str) -> int:
    if role in _FIRST_POINT_ORDER:
        return _FIRST_POINT_ORDER[role]
    return 2 if role.startswith("dimer") else 1


def guess_order(tasks) -> list[tuple[str, str]]:
    """``tasks`` with the calculations of the first point reordered (own-basis monomers,
    then ghosted monomers, then the dimer), later points as they are: from the second
    point on every role starts from its own previous density."""
    tasks = list(tasks)
    seen: set[str] = set()
    n_first = len(tasks)
    for i, (role, _) in enumerate(tasks):
        if role in seen:
            n_first = i
            break
        seen.add(role)
    first = sorted(tasks[:n_first], key=lambda t: _first_point_rank(t[0]))
    return first + tasks[n_first:]


def chunk_guess(role: str, job: Job, history: dict, latest: dict) -> tuple[object, str]:
    """Initial density for ``job`` and where it comes from, from what the chunk has computed.

    In order of preference (measured on water-methanol, B3LYP/def2-SVP: default guess
    7-9 SCF cycles, these 4-7):

    1. the same role at the previous points (:func:`extrapolated_guess`);
    2. a monomer in the dimer basis: the same monomer in its own basis, its density
       carried into the dimer-basis layout (:func:`interkit.engine.guess.embed_density`);
    3. the dimer: the sum of the two ghosted monomers' densities at the same geometry.

    Only the starting point of an SCF changes, never its converged result.
    """
    from ..engine.guess import embed_density

    guess = extrapolated_guess(history.get(role, []), job)
    if guess is not None:
        return guess, "previous point"
    base, _, suffix = role.partition("_dimer_basis")
    if base in ("a", "b") and f"{base}_own_basis" in latest:
        src_job, src_dm = latest[f"{base}_own_basis"]
        guess = embed_density(src_job, src_dm, job)
        if guess is not None:
            return guess, "own-basis monomer"
    if role.startswith("dimer"):
        suffix = role[len("dimer"):]
        parts = [latest.get(f"{m}_dimer_basis{suffix}") for m in ("a", "b")]
        if all(p is not None and p[0].coordinates == job.coordinates and p[0].symbols == job.symbols
               and p[0].level == job.level and np.shape(p[1]) == np.shape(parts[0][1]) for p in parts):
            return np.asarray(parts[0][1]) + np.asarray(parts[1][1]), "sum of ghosted monomers"
    return None, "default"


def extrapolated_guess(previous: list, job: Job):
    """Initial density for ``job`` from the same role at the previous points.

    With two previous points on a straight path (a rigid scan), the density is
    extrapolated linearly along the displacement; otherwise the last density is used.
    Only the starting point of the SCF changes, never its converged result.
    """
    if not previous:
        return None
    coords = np.asarray(job.coordinates)
    c1, d1 = previous[-1]
    if len(previous) < 2 or np.shape(c1) != coords.shape:
        return d1
    c0, d0 = previous[-2]
    if np.shape(d0) != np.shape(d1):
        return d1
    step_prev, step = (c1 - c0).ravel(), (coords - c1).ravel()
    norm_prev = float(np.linalg.norm(step_prev))
    if norm_prev < 1e-12:
        return d1
    cosine = float(step_prev @ step) / (norm_prev * max(float(np.linalg.norm(step)), 1e-300))
    if cosine < 0.999:
        return d1
    t = float(np.linalg.norm(step)) / norm_prev
    if t > 2.0:  # far ahead: extrapolation would overshoot
        return d1
    return d1 + t * (d1 - d0)


def _init_worker(threads: int, cache_mb: float | None = None) -> None:
    from pyscf import lib
    from threadpoolctl import threadpool_limits

    lib.num_threads(threads)
    threadpool_limits(threads)
    if cache_mb is not None:
        from ..engine.numint_cache import set_cache_budget

        set_cache_budget(cache_mb)


def _worker_chunk(tasks, jobs, store_root, progress_queue, cancel):
    def report(key, record):
        if progress_queue is not None:
            progress_queue.put((key, record))

    return run_chunk(tasks, jobs, store_root, report, cancel)


@contextmanager
def _single_threaded_children(threads: int):
    saved = {k: os.environ.get(k) for k in _THREAD_VARS}
    for k in _THREAD_VARS:
        os.environ[k] = str(threads)
    try:
        yield
    finally:
        for k, v in saved.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v


def run_serial(chunks, jobs, store_root, report, cancel=None) -> dict[str, dict]:
    """Run every chunk in this process (pyscf's own threading applies); afterwards the
    orbital values and fitted tensor kept between calculations are freed, so a notebook
    does not hold them after the scan."""
    from ..engine.fitted_integrals import release_scf_tensor
    from ..engine.numint_cache import release_pool

    results: dict[str, dict] = {}
    try:
        for tasks in chunks:
            for key, record in run_chunk(tasks, jobs, store_root, report, cancel):
                results[key] = record
    finally:
        release_pool()
        release_scf_tensor()
    return results


def run_processes(chunks, jobs, store_root, report, workers: int, threads_per_worker: int = 1,
                  cancel=None, cache_mb: float | None = None) -> dict[str, dict]:
    """Run chunks in ``workers`` forked processes with ``threads_per_worker`` threads each
    (``cache_mb``: each worker's orbital-cache budget, see :mod:`interkit.run.resources`).

    A chunk whose worker dies leaves its unfinished jobs as failed records.
    """
    # fork: works from unguarded scripts and notebooks alike; OpenMP and BLAS pools
    # are reset to one thread in each worker before any calculation runs
    ctx = multiprocessing.get_context("fork")
    results: dict[str, dict] = {}
    with ctx.Manager() as manager:
        progress_queue = manager.Queue()
        shared_cancel = manager.Event()
        stop = threading.Event()

        def drain():
            while not stop.is_set() or not progress_queue.empty():
                try:
                    key, record = progress_queue.get(timeout=0.1)
                except queue_module.Empty:
                    continue
                except (EOFError, OSError):
                    return
                results[key] = record
                if report is not None:
                    report(key, record)

        def watch_cancel():
            while not stop.is_set():
                if cancel is not None and cancel.wait(0.2):
                    shared_cancel.set()
                    return
                if cancel is None:
                    return

        listener = threading.Thread(target=drain, daemon=True)
        listener.start()
        watcher = threading.Thread(target=watch_cancel, daemon=True)
        watcher.start()
        try:
            with _single_threaded_children(threads_per_worker), ProcessPoolExecutor(
                max_workers=workers, mp_context=ctx, initializer=_init_worker,
                initargs=(threads_per_worker, cache_mb)
            ) as pool:
                futures = {
                    pool.submit(_worker_chunk, tasks, {k: jobs[k] for _, k in tasks}, store_root,
                                progress_queue, shared_cancel): tasks
                    for tasks in chunks
                }
                for fut in as_completed(futures):
                    try:
                        for key, record in fut.result():
                            results.setdefault(key, record)
                    except Exception as exc:  # worker died: keep what it reported
                        for _, key in futures[fut]:
                            results.setdefault(key, _lost_record(exc))
        finally:
            stop.set()
            listener.join()
    return results


def _lost_record(exc: BaseException) -> dict:
    return failed_record(f"worker process failed: {type(exc).__name__}: {exc}")
