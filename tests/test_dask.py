"""The Dask executor on a real LocalCluster (worker processes, 127.0.0.1 only): the same
numbers as the serial executor, a worker killed mid-scan, results written to the store
by the workers, cancellation, BLAS threads and scratch directories, ``--scheduler``."""

from __future__ import annotations

import gc
import os
import signal
import threading

import numpy as np
import pytest
from conftest import HF_DIMER_XYZ
from distributed import Client

import interkit as ik
from interkit.cli.main import main
from interkit.run.dask import DaskExecutor, _scratch_directory, local_cluster
from interkit.run.plan import plan_scan
from interkit.run.store import ResultStore
from interkit.units import HARTREE_TO_KCAL_PER_MOL

HF_DIMER = HF_DIMER_XYZ
#: the executors must agree to this (hartree); needs SCFs converged well below it
TOL_HARTREE = 1e-10


def _spec(factors=(0.95, 1.0, 1.1, 1.2, 1.4, 1.7), level="hf/def2-svp") -> ik.ScanSpec:
    dimer = ik.Dimer.from_xyz_string(HF_DIMER, name="hf-dimer")
    return ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(1, 2), factors=list(factors), levels=[level],
                       scf_threshold_hartree=1e-11)


@pytest.fixture(scope="module")
def client():
    # not the default client: the executor must use the client it is given
    with local_cluster(n_workers=2, threads_per_worker=1) as cluster, Client(cluster, set_as_default=False) as c:
        c.wait_for_workers(2, timeout=120)
        yield c


@pytest.fixture(scope="module")
def serial_scan():
    return ik.run_scan(_spec(), executor="serial", progress=False)


def _assert_same_numbers(ds, ref):
    assert (ds["status"].values == ref["status"].values).all()
    assert (ds["job_key"].values == ref["job_key"].values).all()
    np.testing.assert_allclose(ds["e_total_hartree"].values, ref["e_total_hartree"].values,
                               atol=TOL_HARTREE, rtol=0)
    for name in ("e_int", "e_int_nocp", "bsse"):
        np.testing.assert_allclose(ds[name].values, ref[name].values,
                                   atol=TOL_HARTREE * HARTREE_TO_KCAL_PER_MOL, rtol=0)


def test_local_cluster_listens_on_loopback_only(client):
    assert client.scheduler.address.startswith("tcp://127.0.0.1:")
    workers = client.scheduler_info(n_workers=-1)["workers"]
    assert len(workers) == 2
    for address, info in workers.items():
        assert address.startswith("tcp://127.0.0.1:"), address
        assert info["nanny"].startswith("tcp://127.0.0.1:"), info["nanny"]
    # every listening socket of the scheduler, the nannies (this process) and the workers
    import psutil

    pids = [os.getpid(), *client.run(os.getpid).values()]
    listening = [c.laddr for pid in pids for c in psutil.Process(pid).net_connections(kind="inet")
                 if c.status == psutil.CONN_LISTEN]
    assert len(listening) >= 2 + 2 * 2 and {a.ip for a in listening} == {"127.0.0.1"}, listening
    with pytest.raises(ik.InputError, match="host: '0.0.0.0'"):
        local_cluster(1, host="0.0.0.0")


def test_dask_scan_equals_serial_and_workers_write_the_store(client, serial_scan, tmp_path, monkeypatch):
    spec = _spec()
    store = tmp_path / "store"

    def client_must_not_write(self, key, record, job):
        raise AssertionError("the client wrote a result that a worker should have written")

    monkeypatch.setattr(ResultStore, "put", client_must_not_write)  # this process only
    seen = []
    ds = ik.run_scan(spec, executor=client, cache=store, progress=lambda *a: seen.append(a[:2]))
    monkeypatch.undo()
    _assert_same_numbers(ds, serial_scan)
    n_jobs = len(plan_scan(spec).jobs)
    assert ds.attrs["executor"] == "dask" and ds.attrs["workers"] == 2
    assert ds.attrs["calculations_computed"] == n_jobs
    assert seen == [(i, n_jobs) for i in range(1, n_jobs + 1)]
    reader = ResultStore(store)
    assert sorted(reader.keys()) == sorted(plan_scan(spec).jobs)
    assert all(reader.get(k) is not None for k in reader.keys()) and not reader.damaged
    again = ik.run_scan(spec, executor=DaskExecutor(client), cache=store, progress=False)
    assert again.attrs["calculations_computed"] == 0
    _assert_same_numbers(again, serial_scan)
    # each task ran in a scratch directory of its own, and pyscf's setting is restored
    from pyscf import lib

    tmpdirs = client.run(lambda: lib.param.TMPDIR)
    assert tmpdirs and not any("interkit-task" in d for d in tmpdirs.values()), tmpdirs


def test_worker_killed_mid_scan_is_replaced_and_its_tasks_rerun(client, serial_scan):
    spec = _spec()
    killed = {}
    after_kill = {}  # job-key prefix -> status of results reported after the kill

    def progress(done, total, key, record):
        if killed:
            after_kill[key[:16]] = record["status"]
        if done == 2 and not killed:
            busy = {w: keys for w, keys in client.processing().items() if keys}
            victim = sorted(busy)[0]
            pid = client.run(os.getpid, workers=[victim])[victim]
            killed.update(worker=victim, pid=pid, tasks=list(busy[victim]), done_then=done, total=total)
            os.kill(pid, signal.SIGKILL)

    ds = ik.run_scan(spec, executor=client, progress=progress)
    assert killed and killed["done_then"] < killed["total"], "the kill did not land mid-scan"
    _assert_same_numbers(ds, serial_scan)
    assert (ds["status"] != "failed").all()
    # the calculations that were on the killed worker finished after the kill (so ran
    # again elsewhere) with results (membership in the scan's keys alone is always true)
    rerun = {t.split("-")[-2] for t in killed["tasks"]}
    assert rerun and all(after_kill.get(k) in ("ok", "retried") for k in rerun), (rerun, after_kill)
    # the nanny started a new worker process in place of the killed one
    client.wait_for_workers(2, timeout=120)
    pids = client.run(os.getpid)
    assert killed["pid"] not in pids.values() and len(pids) == 2


def test_cancel_stops_the_dask_scan_and_keeps_finished_results(client):
    spec = _spec(factors=(1.0, 1.1, 1.2, 1.3, 1.5, 1.8, 2.2, 2.6), level="hf/sto-3g")
    cancel = threading.Event()

    def progress(done, total, key, record):
        cancel.set()

    ds = ik.run_scan(spec, executor=client, progress=progress, cancel=cancel)
    computed = (ds["status"] != "failed").values
    assert 0 < int(ds.attrs["calculations_computed"])
    assert not computed.all(), "cancel did not stop the scan"
    details = [str(d) for d, ok in zip(ds["status_detail"].values.ravel(), computed.ravel()) if not ok]
    assert any("cancelled" in d for d in details), details


def test_blas_threads_are_set_on_the_workers(client):
    from pyscf import lib
    from threadpoolctl import threadpool_info

    import interkit.run.dask as kd

    def probe():  # runs in the worker's task thread, where the setting applies
        blas = [p["num_threads"] for p in threadpool_info()  # (a single-threaded build stays at 1)
                if p.get("user_api") == "blas" and p.get("threading_layer") != "disabled"]
        state = getattr(kd._thread_state, "threads", None)
        kd._thread_state.threads = None  # so the next scan's tasks show up, and set again
        return state, lib.num_threads(), blas

    def probe_all():
        return [client.submit(probe, workers=[w], pure=False).result() for w in client.nthreads()]

    probe_all()  # forget what earlier tests set
    for n in (2, 1):
        ik.run_scan(_spec(factors=(1.0,), level="hf/sto-3g"), executor=DaskExecutor(client, blas_threads=n),
                    progress=False, cache=None)   # no store: both runs compute on the workers
        report = probe_all()
        ran = [v for v in report if v[0] is not None]
        assert ran, report
        for threads_set, omp, blas in ran:
            assert threads_set == n and omp == n and blas and set(blas) == {n}, report
    with pytest.raises(ik.InputError, match="blas_threads: 0"):
        DaskExecutor(client, blas_threads=0)


def test_task_scratch_directory_is_private_and_removed():
    from pyscf import lib

    before = lib.param.TMPDIR
    with _scratch_directory("ab" * 32) as path:
        assert lib.param.TMPDIR == path and os.path.isdir(path) and not os.listdir(path)
        tmp = lib.H5TmpFile()  # pyscf puts its temporary files there
        assert os.path.dirname(tmp.filename) == path
    assert lib.param.TMPDIR == before
    del tmp
    gc.collect()
    with _scratch_directory("cd" * 32):
        pass  # the end of a later task removes directories that have emptied
    assert not os.path.exists(path)


def test_cli_scheduler_option(client, tmp_path):
    (tmp_path / "g.xyz").write_text(HF_DIMER)
    spec_file = tmp_path / "spec.toml"
    spec_file.write_text('[system]\ngeometry = "g.xyz"\n[scan]\ncoordinate = "atom-pair"\natoms = [1, 2]\n'
                         'factors = [1.0, 1.3]\n[calculation]\nlevels = ["hf/sto-3g"]\nscf_threshold_hartree = 1e-11\n')
    out = tmp_path / "scan.nc"
    code = main(["scan", str(spec_file), "-o", str(out), "--cache", str(tmp_path / "store"), "--quiet",
                 "--scheduler", client.scheduler.address])
    assert code == 0
    ds = ik.open_scan(out)
    assert ds.attrs["executor"] == "dask"
    ref = ik.run_scan(ik.load_spec_toml(spec_file), executor="serial", progress=False)
    _assert_same_numbers(ds, ref)
    assert len(ResultStore(tmp_path / "store").keys()) == 3 * 2 + 2
