"""A scan running in a background thread, with per-point progress for the launcher.

This module only orchestrates: it calls :func:`interkit.run_scan` (with a progress
callback and a cancel Event) and, for live views, :func:`interkit.data.schema.assemble`
on the records received so far. It computes nothing itself.
"""

from __future__ import annotations

import os
import threading
import time
from collections.abc import Callable

import numpy as np
import xarray as xr

from ..data.schema import assemble
from ..errors import InterkitError
from ..model.spec import ScanSpec
from ..run.plan import plan_scan
from ..run.scan import posthoc_dispersion, run_scan
from ..run.store import DEFAULT_STORE, resolve_cache


def default_workers() -> int:
    """Worker processes the launcher offers by default: every core but one, which stays
    free for the notebook's kernel (at least one worker)."""
    return max(1, (os.cpu_count() or 1) - 1)


def count_calculations(n_levels: int, n_points: int, counterpoise: bool = True) -> int:
    """Calculations of a rigid scan: per level and point the dimer and, with
    counterpoise, both ghosted monomers; plus the two monomers in their own basis per level."""
    per_point = 3 if counterpoise else 1
    return n_levels * n_points * per_point + 2 * n_levels


class BackgroundScan:
    """Run one scan in a daemon thread.

    Parameters
    ----------
    spec : ScanSpec
    executor, cache, workers :
        Passed to :func:`interkit.run_scan` (``cache``: the default store by default,
        None for none).
    on_progress : callable, optional
        Called as ``on_progress(scan)`` (from the worker thread) after each finished
        calculation.
    on_done : callable, optional
        Called as ``on_done(scan)`` when the run ends (result or error).

    Attributes
    ----------
    done, total : int
        Finished and planned calculations of this run.
    result : xarray.Dataset or None
        The finished (possibly cancelled) scan.
    error : str or None
        Message of an :class:`~interkit.errors.InterkitError` (or other exception).
    """

    def __init__(self, spec: ScanSpec, executor: str = "processes", cache: str | os.PathLike | None = DEFAULT_STORE,
                 workers: int | None = None, on_progress: Callable | None = None,
                 on_done: Callable | None = None):
        self.spec = spec
        self.plan = plan_scan(spec)  # feasibility checks: refuse before the background thread starts
        cache = resolve_cache(cache)
        self.executor, self.cache, self.workers = executor, cache, workers
        self.on_progress, self.on_done = on_progress, on_done
        self.cancel_event = threading.Event()
        self.records: dict[str, dict] = {}
        self._lock = threading.Lock()
        self.done = 0
        self.total = len(self.plan.jobs)
        self.result: xr.Dataset | None = None
        self.error: str | None = None
        self.started = self.finished = None
        self._thread: threading.Thread | None = None
        self._dispersion_terms: dict | None = None
        if cache is not None:
            self._preload(cache)

    def _preload(self, cache) -> None:
        """Records already in the store count as finished (read only, nothing computed)."""
        from ..run.store import ResultStore

        try:
            store = ResultStore(cache)
            for key in self.plan.jobs:
                rec = store.get(key)
                if rec is not None:
                    self.records[key] = rec
        except InterkitError:
            self.records.clear()

    # ------------------------------------------------------------------ control
    def start(self) -> BackgroundScan:
        """Start the thread and return ``self``."""
        self.started = time.perf_counter()
        self._thread = threading.Thread(target=self._run, name="interkit-scan", daemon=True)
        self._thread.start()
        return self

    def cancel(self) -> None:
        """Stop after the running calculations; finished results are kept."""
        self.cancel_event.set()

    @property
    def running(self) -> bool:
        return self._thread is not None and self._thread.is_alive()

    def wait(self, timeout: float | None = None) -> bool:
        """Block until the run ends; True if it has ended."""
        if self._thread is not None:
            self._thread.join(timeout)
        return not self.running

    def _progress(self, done: int, total: int, key: str, record: dict) -> None:
        with self._lock:
            self.records[key] = record
            self.done = done + (self.total - total)
        if self.on_progress is not None:
            self.on_progress(self)

    def _run(self) -> None:
        try:
            self.result = run_scan(self.spec, executor=self.executor, cache=self.cache,
                                   progress=self._progress, workers=self.workers, cancel=self.cancel_event)
            self.done = self.total if not self.cancel_event.is_set() else self.done
        except InterkitError as exc:
            self.error = str(exc)
        except Exception as exc:  # noqa: BLE001 - shown in the widget, not as a traceback
            self.error = f"{type(exc).__name__}: {exc}"
        finally:
            self.finished = time.perf_counter()
            if self.on_done is not None:
                self.on_done(self)

    # ------------------------------------------------------------------ views
    def partial(self) -> xr.Dataset:
        """The scan as far as it has come (missing points are NaN, status 'failed')."""
        with self._lock:
            records = dict(self.records)
        if self._dispersion_terms is None:
            self._dispersion_terms = posthoc_dispersion(self.plan)
        return assemble(self.plan, records, missing_reason="pending", dispersion_terms=self._dispersion_terms)

    def point_states(self) -> np.ndarray:
        """(level, point) array of 'waiting', 'partial', 'ok', 'retried', 'spin-contaminated'
        or 'failed'."""
        from ..model.spin import spin_note

        with self._lock:
            records = dict(self.records)
        nl, npnt = len(self.spec.levels), len(self.spec.points)
        out = np.full((nl, npnt), "waiting", dtype=object)
        for (li, pi), roles in self.plan.table.items():
            recs = [records.get(key) for key in roles.values()]
            flagged = any(r is not None and r.get("status") != "failed" and spin_note(self.plan.jobs[k], r)
                          for k, r in zip(roles.values(), recs))
            got = [r for r in recs if r is not None]
            if not got:
                continue
            states = {r.get("status") for r in got}
            if "failed" in states:
                out[li, pi] = "failed"
            elif len(got) < len(recs):
                out[li, pi] = "partial"
            elif flagged:
                out[li, pi] = "spin-contaminated"
            else:
                out[li, pi] = "retried" if "retried" in states else "ok"
        return out
