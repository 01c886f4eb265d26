"""Worker processes and orbital-cache budget sized from the machine's memory."""

from __future__ import annotations

import warnings

import pytest

import interkit as ik
from interkit.errors import InterkitWarning
from interkit.run import resources


def _costs(rest_mb, cache_mb):
    return {"x": {"tensor_mb": {"SCF three-index (P|mu nu)": rest_mb, "DFT orbital values on the grid": cache_mb}}}


def test_pool_fits_in_memory():
    """workers = min(wanted, usable / peak) with usable = 80 % of the available memory
    (arithmetic of the documented rule)."""
    m = resources.PEAK_MARGIN
    rest = m * (700.0 + resources.WORKER_BASE_MB)
    pool = resources.plan_pool(_costs(700.0, 500.0), wanted=2, available_mb=2000.0, base_mb=resources.WORKER_BASE_MB)
    assert pool["workers"] == 1 and pool["limited_by_memory"]
    assert pool["cache_mb"] == pytest.approx(0.8 * 2000.0 - rest)
    assert pool["worker_peak_mb"] == pytest.approx(0.8 * 2000.0)
    roomy = resources.plan_pool(_costs(700.0, 500.0), wanted=2, available_mb=64000.0, base_mb=resources.WORKER_BASE_MB)
    assert roomy["workers"] == 2 and not roomy["limited_by_memory"]
    assert roomy["worker_peak_mb"] == pytest.approx(rest + m * 500.0)
    # one worker always runs, even when it does not fit
    assert resources.plan_pool(_costs(9000.0, 0.0), wanted=4, available_mb=1000.0, base_mb=resources.WORKER_BASE_MB)["workers"] == 1


def test_available_memory_is_read_from_the_system():
    """MemAvailable (Linux) lies between 1 MB and the physical memory (os.sysconf)."""
    import os

    physical = os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE") / 1e6
    assert 1.0 < resources.available_memory_mb() <= physical


def test_run_scan_runs_fewer_workers_when_memory_is_short(monkeypatch):
    """Asking for more workers than fit gives one warning and fewer workers; the sizes
    chosen are recorded in the Dataset attrs."""
    monkeypatch.setattr(resources, "available_memory_mb", lambda: 1.25 * (resources.WORKER_BASE_MB + 50.0))
    dimer = ik.load_demo("water_methanol")
    spec = ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(1, 3), factors=[1.0, 1.2], levels=["hf/sto-3g"])
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        ds = ik.run_scan(spec, executor="processes", workers=2, progress=False)
    assert ds.attrs["workers"] == 1
    assert any(issubclass(w.category, InterkitWarning) and "workers" in str(w.message) for w in caught)
    assert ds.attrs["worker_peak_estimate_mb"] > resources.WORKER_BASE_MB
    assert ds.attrs["available_memory_mb"] == pytest.approx(1.25 * (resources.WORKER_BASE_MB + 50.0))
