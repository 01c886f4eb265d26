"""How many worker processes fit in the machine's memory, and how much orbital cache
each may keep.

Before a scan runs, the size estimate of its largest calculation
(:func:`interkit.engine.cost.scan_cost`, made at plan time) plus the memory of an
idle worker (Python, numpy and pyscf loaded) gives the peak of one worker. The number
of workers is then (a forked worker also starts with the parent's resident pages, so the
idle size is at least the parent's ``VmRSS``)

    workers = min(requested or cores, chunks, floor(usable memory / worker peak)), at least 1

with the usable memory a fraction (:data:`MEMORY_FRACTION`) of what the system reports
as available (``MemAvailable`` in ``/proc/meminfo``; else physical pages times page size
from ``os.sysconf``). The orbital-value cache of DFT calculations
(:mod:`interkit.engine.numint_cache`) only saves time; its budget per worker is what is
left of the worker's share once the rest of the calculation is counted, capped at its
default. So a pool is never sized to run out of memory; one worker that does not fit
still runs (the plan's ``memory_limit_mb`` check is the guard against calculations too
large for the machine).
"""

from __future__ import annotations

import os

#: fraction of the available memory the pool may use (the rest: the parent process,
#: the page cache, other programs, estimate error)
MEMORY_FRACTION = 0.8
#: resident memory of an idle worker process with numpy and pyscf imported, MB (measured
#: here: 150-250 MB)
WORKER_BASE_MB = 300.0
#: factor on the estimated worker peak for what the size estimate does not count
#: (allocator slack, small pyscf temporaries). Measured here: the largest VmHWM of
#: run_scan's workers over the margin-included estimate, B3LYP-D3(BJ)/def2-SVP, was 0.64
#: on water-methanol (9 atoms) and 0.80 on benzene-pyridine (23 atoms); without the
#: grid-batch term of the estimate it had been 1.16 on 23 atoms
PEAK_MARGIN = 1.4
#: label of the orbital-cache term in the size estimate (engine.cost)
_CACHE_TERM = "DFT orbital values on the grid"


def available_memory_mb() -> float:
    """Memory the system can give to new processes, MB: ``MemAvailable`` from
    ``/proc/meminfo`` where it exists, else physical memory (``os.sysconf``)."""
    try:
        with open("/proc/meminfo") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return float(line.split()[1]) * 1024 / 1e6  # kB (KiB) -> MB
    except OSError:
        pass
    try:
        return os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE") / 1e6
    except (ValueError, OSError, AttributeError):
        return float("inf")


def process_rss_mb() -> float:
    """Resident memory of this process, MB (``VmRSS``; 0 where /proc is missing). A forked
    worker starts with these pages (shared copy-on-write, but counted in its RSS)."""
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith("VmRSS:"):
                    return float(line.split()[1]) * 1024 / 1e6
    except OSError:
        pass
    return 0.0


def worker_peak_mb(costs: dict[str, dict], base_mb: float | None = None) -> tuple[float, float]:
    """(peak of one worker without the orbital cache, largest orbital cache wanted), MB,
    from the size estimates of the levels (``plan.feasibility['levels']``) and the
    worker's starting size ``base_mb`` (default: the larger of :data:`WORKER_BASE_MB`
    and this process's resident memory, which a forked worker inherits)."""
    base = max(WORKER_BASE_MB, process_rss_mb()) if base_mb is None else float(base_mb)
    rest = cache = 0.0
    for cost in costs.values():
        tensors = dict(cost.get("tensor_mb", {}))
        want = float(tensors.pop(_CACHE_TERM, 0.0))
        rest = max(rest, float(sum(tensors.values())))
        cache = max(cache, want)
    return PEAK_MARGIN * (base + rest), PEAK_MARGIN * cache


def plan_pool(costs: dict[str, dict], wanted: int, available_mb: float | None = None,
              base_mb: float | None = None) -> dict:
    """Workers and per-worker orbital-cache budget that fit in memory.

    Parameters
    ----------
    costs : dict
        Size estimates by level label (see :func:`interkit.engine.cost.scan_cost`).
    wanted : int
        Workers asked for (or the number of cores).
    available_mb : float, optional
        Available memory, MB (default: :func:`available_memory_mb`).
    base_mb : float, optional
        Starting size of a worker, MB (see :func:`worker_peak_mb`).

    Returns
    -------
    dict
        ``workers``, ``cache_mb`` (orbital-cache budget per worker), ``worker_peak_mb``
        (estimated peak per worker with that cache), ``available_mb``, ``limited_by_memory``.
    """
    from ..engine.numint_cache import DEFAULT_CACHE_MB

    avail = available_memory_mb() if available_mb is None else float(available_mb)
    usable = MEMORY_FRACTION * avail
    rest, cache_want = worker_peak_mb(costs, base_mb)
    cache_want = min(cache_want, float(DEFAULT_CACHE_MB))
    fit = int(usable // rest) if rest > 0 and usable < float("inf") else wanted
    workers = max(1, min(int(wanted), fit))
    share = usable / workers - rest if usable < float("inf") else cache_want
    cache_mb = max(0.0, min(float(DEFAULT_CACHE_MB), share))
    return {"workers": workers, "cache_mb": cache_mb, "worker_peak_mb": rest + min(cache_mb, cache_want),
            "available_mb": avail, "limited_by_memory": workers < int(wanted)}
