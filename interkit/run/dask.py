"""Dask executor: one calculation per task on a ``dask.distributed`` cluster.

``run_scan(spec, executor=client)`` submits every missing calculation of the scan as
its own task. The tasks do not depend on one another, so any worker can run any task,
the scheduler balances the load (work stealing), and a worker that is lost costs only
the calculations it was running: distributed runs them again elsewhere (up to its
``distributed.scheduler.allowed-failures`` setting, 3 by default), and a task that
raised is retried ``retries`` times.

Initial densities. The chunked executors start each SCF from the density of the
previous point in the same role. Here each task carries the keys of the (up to two)
previous points of its role in the same contiguous run of points, and each worker
process keeps the densities of its recent calculations in memory (at most
``DENSITY_CACHE_BYTES``). When those densities are on the worker that runs the task,
the SCF starts from them (extrapolated along a rigid scan, as in
:func:`interkit.run.executors.extrapolated_guess`); otherwise from pyscf's default guess.
To make that likely, the runs of points are placed on the workers as loose hints
(``workers=..., allow_other_workers=True``): the scheduler may still move a task to an
idle or surviving worker. Only the starting point of an SCF changes, never its
converged result; densities never travel between workers.

On each worker: BLAS/OpenMP threads are set to ``blas_threads`` (1 by default, as
distributed itself sets for its worker processes); with one thread per worker each task
runs in its own scratch directory (pyscf's ``lib.param.TMPDIR``) under the worker's
local directory, removed afterwards (with several threads per worker the tasks of a
worker share one scratch directory, since pyscf's setting is process-wide); the result
is written to the store from the worker when a store is given (its folder must be
visible to the workers, e.g. on a shared file system; if a worker cannot write it, the
client does).

Bounded waits, never a hang: :func:`connect` gives up after ``timeout`` seconds
(``CONNECT_TIMEOUT_S``) with a :class:`~interkit.errors.ClusterError`; a scan waits at
most ``DaskExecutor.cluster_wait_s`` (``CLUSTER_WAIT_S``) for a first worker (else
ClusterError before anything runs) and, when every worker has left mid-scan, as long
for a new one before its unfinished calculations come back as failed records.

Dask is an optional dependency (``pip install 'interkit[dask]'``), imported only when
used.
"""

from __future__ import annotations

import os
import tempfile
import threading
import time
import uuid
from collections import OrderedDict
from collections.abc import Callable
from concurrent.futures import CancelledError
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..errors import ClusterError, InputError, InterkitError, NotAvailableError
from ..model.job import failed_record

#: retries of a task that raised (lost workers are handled by distributed's allowed-failures)
DEFAULT_RETRIES = 2
#: densities kept in memory per worker process for initial guesses (bytes)
DENSITY_CACHE_BYTES = 256 * 2**20
#: seconds to wait for a scheduler when connecting by address
CONNECT_TIMEOUT_S = 10.0
#: seconds a scan waits for a first worker (and, mid-scan, for any worker) before it
#: gives up: an error before the scan, failed records ("no Dask worker") during it
CLUSTER_WAIT_S = 60.0
#: the only interface local clusters listen on
LOOPBACK = "127.0.0.1"


@dataclass(frozen=True)
class DaskExecutor:
    """A Dask client with the settings interkit uses on its workers.

    ``run_scan(spec, executor=client)`` is the same as
    ``run_scan(spec, executor=DaskExecutor(client))``.

    Parameters
    ----------
    client : distributed.Client
        Connected client of the cluster.
    blas_threads : int
        BLAS/OpenMP threads each task uses on its worker (1 suits workers with one
        thread per core; a worker with one thread on an n-core allocation wants n).
    retries : int
        How often a task that raised is submitted again.
    cluster_wait_s : float
        Seconds to wait for the cluster's first worker before the scan starts
        (:class:`~interkit.errors.ClusterError` if none joins), and, during the scan,
        for any worker when all are gone (the unfinished calculations then come back
        as failed records). Default ``CLUSTER_WAIT_S`` (60 s).
    """

    client: Any
    blas_threads: int = 1
    retries: int = DEFAULT_RETRIES
    cluster_wait_s: float = CLUSTER_WAIT_S

    def __post_init__(self):
        for name in ("blas_threads", "retries"):
            value = getattr(self, name)
            low = 1 if name == "blas_threads" else 0
            if isinstance(value, bool) or not isinstance(value, int) or value < low:
                raise InputError(f"{name}: {value!r} is not an integer >= {low}")
        wait = self.cluster_wait_s
        if isinstance(wait, bool) or not isinstance(wait, (int, float)) or not 0 < wait < float("inf"):
            raise InputError(f"cluster_wait_s: {wait!r} is not a positive number of seconds")

    def wait_for_workers(self) -> None:
        """Return once the cluster has a worker; ClusterError after ``cluster_wait_s``."""
        try:
            self.client.wait_for_workers(1, timeout=self.cluster_wait_s)
        except Exception as exc:  # TimeoutError, or the scheduler went away (OSError...)
            if isinstance(exc, TimeoutError) or "timed out" in str(exc).lower():
                why = f"no worker joined within {self.cluster_wait_s:g} s"
            else:
                why = (str(exc).strip().splitlines() or [type(exc).__name__])[0][:160]
            raise ClusterError(f"executor: the Dask cluster cannot run the scan ({why}); start workers "
                               "or raise the wait (cluster_wait_s, --cluster-wait)") from None

    def worker_threads(self) -> dict[str, int]:
        """Threads of each connected worker, by address."""
        return dict(self.client.nthreads())

    def run(self, chunks, jobs, store_root: str | None, report: Callable[[str, dict], None] | None = None,
            cancel: threading.Event | None = None) -> dict[str, dict]:
        """Run every ``(role, key)`` of ``chunks`` as one task each; return ``{key: record}``.

        Tasks are submitted in chunk order; a chunk is a contiguous run of points (see
        :meth:`interkit.run.plan.ScanPlan.chunks`) placed on one worker as a loose hint.
        When ``cancel`` is set, tasks not yet finished are cancelled and left out of the
        result (a task already running on a worker still finishes there and writes the
        store).
        """
        from distributed import wait

        client = self.client
        store_root = os.path.abspath(store_root) if store_root else None
        settings = _WorkerSettings(self.blas_threads, *_versions())
        addresses = sorted(self.worker_threads())
        token = uuid.uuid4().hex[:8]
        futures = {}
        for ci, tasks in enumerate(chunks):
            where = {"workers": [addresses[ci % len(addresses)]], "allow_other_workers": True} \
                if addresses else {}
            seen: dict[str, list[str]] = {}
            for role, key in tasks:
                hints = tuple(seen.get(role, ())[-2:])
                seen.setdefault(role, []).append(key)
                fut = client.submit(_run_task, role, key, jobs[key], hints, store_root, settings,
                                    key=f"interkit-{role.replace('_', '-')}-{key[:16]}-{token}",
                                    pure=False, retries=self.retries, priority=-len(futures), **where)
                futures[fut] = (role, key)
        results: dict[str, dict] = {}
        pending = set(futures)
        seen_worker = next_check = time.monotonic()
        try:
            while pending:
                if cancel is not None and cancel.is_set():
                    client.cancel(list(pending))
                    break
                try:
                    with client.as_current():  # wait() uses the current client
                        wait(list(pending), timeout=0.25, return_when="FIRST_COMPLETED")
                except TimeoutError:
                    now = time.monotonic()
                    if now >= next_check:  # all workers gone for too long: give up, never hang
                        next_check = now + 1.0
                        if self._has_workers():
                            seen_worker = now
                        elif now - seen_worker > self.cluster_wait_s:
                            client.cancel(list(pending))
                            for fut in pending:
                                role, key = futures[fut]
                                results[key] = _failed_record(
                                    role, f"no Dask worker for {self.cluster_wait_s:g} s (cluster_wait_s)")
                                if report is not None:
                                    report(key, results[key])
                            pending.clear()
                    continue
                except CancelledError:  # futures cancelled, e.g. the scheduler was lost
                    pass
                done = [f for f in pending if f.status != "pending"]
                for fut in done:
                    pending.discard(fut)
                    role, key = futures[fut]
                    record = self._collect(fut, role, key, jobs, store_root)
                    results[key] = record
                    if report is not None:
                        report(key, record)
        finally:
            if pending:
                client.cancel(list(pending))
        return results

    def _has_workers(self) -> bool:
        try:
            return bool(self.client.nthreads())
        except Exception:  # scheduler unreachable: its futures are cancelled, handled above
            return True

    @staticmethod
    def _collect(fut, role, key, jobs, store_root) -> dict:
        if fut.status == "finished":
            try:
                record, stored = fut.result()
            except Exception as exc:  # lost between finishing and fetching
                return _lost_record(role, exc)
            if not stored and store_root and record.get("status") != "failed":
                from .executors import NOT_STORED_FIELD, put_record
                from .store import ResultStore

                try:
                    why = put_record(ResultStore(store_root), key, record, jobs[key].describe())
                except (OSError, InterkitError) as exc:
                    why = f"{type(exc).__name__}: {exc}"[:200]
                if why is not None:  # the scan still gets the result; run_scan counts it
                    record[NOT_STORED_FIELD] = why
            return record
        exc = fut.exception() if fut.status == "error" else RuntimeError(f"task {fut.status}")
        return _lost_record(role, exc)


@dataclass(frozen=True)
class _WorkerSettings:
    blas_threads: int
    pyscf_version: str
    numerics_version: int


def _versions() -> tuple[str, int]:
    import pyscf

    from ..model.job import NUMERICS_VERSION

    return pyscf.__version__, NUMERICS_VERSION


def as_dask_executor(obj) -> DaskExecutor:
    """``obj`` as a :class:`DaskExecutor` (a ``distributed.Client`` or one already)."""
    if isinstance(obj, DaskExecutor):
        executor = obj
    else:
        try:
            from distributed import Client
        except ImportError:
            raise InputError(f"executor: {type(obj).__name__} is not 'processes', 'serial' or a Dask client "
                             "(dask is not installed: pip install 'interkit[dask]')") from None
        if not isinstance(obj, Client):
            raise InputError(f"executor: {type(obj).__name__} is not 'processes', 'serial' or a "
                             "dask.distributed Client")
        executor = DaskExecutor(obj)
    if executor.client.status != "running":
        raise InputError(f"executor: the Dask client is {executor.client.status}, not connected")
    executor.wait_for_workers()
    return executor


def dask_executor(client, cluster_wait_s: float | None = None) -> DaskExecutor:
    """``DaskExecutor(client)`` with ``cluster_wait_s`` (None: the default wait)."""
    if cluster_wait_s is None:
        return DaskExecutor(client)
    return DaskExecutor(client, cluster_wait_s=cluster_wait_s)


def connect(address: str, timeout: float | None = None, security=None):
    """A ``distributed.Client`` connected to the scheduler at ``address``.

    Parameters
    ----------
    address : str
        Scheduler address, e.g. ``tcp://HOST:8786``.
    timeout : float, optional
        Seconds to wait for the scheduler (default ``CONNECT_TIMEOUT_S``, 10 s).
    security : distributed.security.Security, optional
        Passed to the client; without it the connection uses the Dask configuration
        (``distributed.comm.tls.*``), which by default means plain TCP: no encryption
        and no authentication.

    Raises
    ------
    ClusterError
        One line naming the address when no scheduler answers there within ``timeout``.
    InputError
        A malformed address or timeout.
    NotAvailableError
        When dask.distributed is not installed.
    """
    try:
        from distributed import Client
    except ImportError:
        raise NotAvailableError("--scheduler: dask.distributed is not installed "
                                "(pip install 'interkit[dask]')") from None
    from distributed.comm import get_address_host_port
    from distributed.comm.addressing import parse_address
    from distributed.comm.registry import get_backend

    timeout = CONNECT_TIMEOUT_S if timeout is None else timeout
    if isinstance(timeout, bool) or not isinstance(timeout, (int, float)) or not 0 < timeout < float("inf"):
        raise InputError(f"--cluster-wait: {timeout!r} is not a positive number of seconds")
    try:  # a malformed address is refused before a client exists
        get_backend(parse_address(address)[0])
        get_address_host_port(address)
    except (ValueError, TypeError) as exc:
        raise InputError(f"--scheduler: {address!r} is not a scheduler address such as "
                         f"tcp://HOST:8786 ({str(exc)[:120]})") from None
    try:
        return Client(address, timeout=timeout, set_as_default=False, security=security)
    except Exception as exc:  # distributed raises OSError, TimeoutError, ValueError, TypeError...
        reason = (str(exc).strip().splitlines() or [type(exc).__name__])[0][:200]
        raise ClusterError(f"--scheduler: cannot connect to {address!r} within {timeout:g} s ({reason})") from None


def local_cluster(n_workers: int = 2, threads_per_worker: int = 1, **kwargs):
    """A ``distributed.LocalCluster`` of worker processes that listens on 127.0.0.1 only.

    Parameters
    ----------
    n_workers, threads_per_worker : int
        Worker processes and threads in each (one thread per worker suits pyscf).
    **kwargs
        Passed to ``LocalCluster`` (``memory_limit``, ``dashboard_address``...). The
        scheduler's HTTP server takes a free port on 127.0.0.1, the workers' are off;
        ``host`` is always 127.0.0.1.

    Use it as a context manager, or close it when done::

        with local_cluster(2) as cluster, Client(cluster) as client:
            ds = run_scan(spec, executor=client)
    """
    import dask
    from distributed import LocalCluster

    host = kwargs.pop("host", LOOPBACK)
    if host not in (LOOPBACK, "localhost"):
        raise InputError(f"host: {host!r}; local clusters listen on {LOOPBACK} only")
    # the scheduler's HTTP routes (dashboard if bokeh is installed) on a free loopback port
    options = {"processes": True, "dashboard_address": f"{LOOPBACK}:0", "worker_dashboard_address": None}
    options.update(kwargs)
    # distributed sets MALLOC_TRIM_THRESHOLD_=65536 in its workers, which makes glibc map
    # and unmap every large temporary array of pyscf (about 5x the page faults of a plain
    # process); the workers of this cluster keep glibc's default unless dask's config
    # "distributed.nanny.pre-spawn-environ" asks for another value
    trim = dask.config.get("distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_", None)
    cfg = {"distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_": None} if str(trim) == "65536" else {}
    with dask.config.set(cfg):
        return LocalCluster(n_workers=n_workers, threads_per_worker=threads_per_worker, host=LOOPBACK,
                            **options)


# ---------------------------------------------------------------------------------------
# worker side

_density_lock = threading.Lock()
_densities: OrderedDict[str, tuple[np.ndarray, np.ndarray]] = OrderedDict()
_density_bytes = [0]
_thread_state = threading.local()  # OpenMP thread counts are per calling thread
_scratch_lock = threading.Lock()
_task_dirs: list[str] = []


def _run_task(role: str, key: str, job, hints: tuple[str, ...], store_root: str | None,
              settings: _WorkerSettings) -> tuple[dict, bool]:
    """One calculation on a worker; returns ``(record, written_to_store)``."""
    from ..engine.decomposition import run_decomposition_job
    from ..engine.energy import run_energy_job
    from .executors import extrapolated_guess

    versions = _versions()
    if versions != (settings.pyscf_version, settings.numerics_version):
        return _failed_record(role, f"version mismatch: worker has pyscf {versions[0]} and numerics "
                                    f"version {versions[1]}, the client {settings.pyscf_version} and "
                                    f"{settings.numerics_version}"), False
    _set_threads(settings.blas_threads)
    with _scratch_directory(key):
        if "sapt0" in job.outputs:
            record, density = run_decomposition_job(job), None
        else:
            record, density = run_energy_job(job, extrapolated_guess(_previous(hints), job))
    if density is not None:
        _remember(key, np.asarray(job.coordinates), np.asarray(density))
    record["role"] = role
    stored = False
    if store_root and record["status"] != "failed":
        from .store import ResultStore

        try:
            ResultStore(store_root).put(key, record, job.describe())
            stored = True
        except (OSError, InterkitError):
            pass  # the client writes it
    return record, stored


def _previous(hints: tuple[str, ...]) -> list:
    with _density_lock:
        return [_densities[k] for k in hints if k in _densities]


def _remember(key: str, coords: np.ndarray, density: np.ndarray) -> None:
    with _density_lock:
        old = _densities.pop(key, None)
        if old is not None:
            _density_bytes[0] -= old[1].nbytes
        _densities[key] = (coords, density)
        _density_bytes[0] += density.nbytes
        while _density_bytes[0] > DENSITY_CACHE_BYTES and len(_densities) > 1:
            _, (_, d) = _densities.popitem(last=False)
            _density_bytes[0] -= d.nbytes


def _set_threads(n: int) -> None:
    """BLAS and OpenMP threads for the calculations of this worker thread.

    OpenMP keeps the count per calling thread, so it is set in the thread that runs
    the task (once per thread and value).
    """
    if getattr(_thread_state, "threads", None) == n:
        return
    from pyscf import lib
    from threadpoolctl import threadpool_limits

    threadpool_limits(n)
    lib.num_threads(n)
    _thread_state.threads = n


def _worker_directory() -> tuple[str, int]:
    try:
        from distributed import get_worker

        worker = get_worker()
        return worker.local_directory, int(worker.state.nthreads)
    except (ImportError, ValueError, AttributeError):
        return tempfile.gettempdir(), 1


@contextmanager
def _scratch_directory(key: str):
    """pyscf's scratch directory for one task (shared by the tasks of a multi-thread worker)."""
    from pyscf import lib

    base, nthreads = _worker_directory()
    if nthreads > 1:
        shared = os.path.join(base, "interkit-scratch")
        with _scratch_lock:
            os.makedirs(shared, exist_ok=True)
            lib.param.TMPDIR = shared
        yield shared
        return
    path = tempfile.mkdtemp(prefix=f"interkit-task-{key[:12]}-", dir=base)
    saved = lib.param.TMPDIR
    lib.param.TMPDIR = path
    try:
        yield path
    finally:
        lib.param.TMPDIR = saved
        _sweep_scratch(path)


def _sweep_scratch(path: str) -> None:
    """Remove the scratch directories of finished tasks once they are empty.

    pyscf deletes its temporary files (SCF checkpoints...) when their objects are
    garbage-collected, which may be after the task returned; a directory removed
    before that would make those deletions fail. So a directory goes once it is empty,
    at the end of a later task; what is left goes with the worker's local directory
    when the worker closes.
    """
    with _scratch_lock:
        _task_dirs.append(path)
        for d in list(_task_dirs):
            try:
                os.rmdir(d)
            except FileNotFoundError:
                pass
            except OSError:
                continue  # not empty yet
            _task_dirs.remove(d)


def _lost_record(role: str, exc: BaseException) -> dict:
    return _failed_record(role, f"Dask task failed: {type(exc).__name__}: {exc}")


def _failed_record(role: str, detail: str) -> dict:
    return failed_record(detail, role=role)
