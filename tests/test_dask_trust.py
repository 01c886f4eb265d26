"""A Dask cluster that cannot run the scan is a clear error within a bounded wait, and a
store that cannot be written loses nothing with Dask either (issue 11, items 7 and 8)."""

from __future__ import annotations

import errno
import socket
import time

import numpy as np
import pytest
from conftest import hf_dimer
from distributed import Client

import interkit as ik
from interkit.cli import main
from interkit.errors import ClusterError
from interkit.run.dask import DaskExecutor, connect, local_cluster
from interkit.run.store import ResultStore

#: the waits of these tests (s); the errors must come well within WAIT_S + SLACK_S
WAIT_S = 1.0
SLACK_S = 15.0


def _spec() -> ik.ScanSpec:
    return ik.ScanSpec(dimer=hf_dimer(), coordinate=ik.AtomPair(1, 2), factors=[1.0, 1.3],
                       levels=["hf/sto-3g"], scf_threshold_hartree=1e-11)


def _free_port() -> int:
    """A loopback port with nothing listening (bound, then released)."""
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def test_cluster_without_workers_is_an_error_within_the_wait():
    with local_cluster(n_workers=0) as cluster, Client(cluster, set_as_default=False) as client:
        t0 = time.monotonic()
        with pytest.raises(ClusterError, match=r"no worker joined within 1 s") as info:
            ik.run_scan(_spec(), executor=DaskExecutor(client, cluster_wait_s=WAIT_S), progress=False)
        assert time.monotonic() - t0 < WAIT_S + SLACK_S  # before: waited for ever
        assert "\n" not in str(info.value) and "cluster_wait_s" in str(info.value)
    with pytest.raises(ik.InputError, match="cluster_wait_s"):
        DaskExecutor(None, cluster_wait_s=0)


def test_unreachable_scheduler_is_an_error_within_the_wait(tmp_path, capsys):
    address = f"tcp://127.0.0.1:{_free_port()}"
    t0 = time.monotonic()
    with pytest.raises(ClusterError, match="cannot connect"):
        connect(address, timeout=WAIT_S)
    assert time.monotonic() - t0 < WAIT_S + SLACK_S
    (tmp_path / "g.xyz").write_text(hf_dimer().to_xyz_string())
    (tmp_path / "spec.toml").write_text('[system]\ngeometry = "g.xyz"\n[scan]\ncoordinate = "atom-pair"\n'
                                        'atoms = [1, 2]\nfactors = [1.0]\n[calculation]\nlevels = ["hf/sto-3g"]\n')
    out = tmp_path / "scan.nc"
    capsys.readouterr()
    t0 = time.monotonic()
    code = main(["scan", str(tmp_path / "spec.toml"), "-o", str(out), "--quiet", "--cache", str(tmp_path / "s"),
                 "--scheduler", address, "--cluster-wait", str(WAIT_S)])
    assert time.monotonic() - t0 < WAIT_S + SLACK_S
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and "cannot connect" in err[0] and address in err[0]
    assert not out.exists()


def test_dask_store_write_failure_keeps_results_and_counts_them(tmp_path, monkeypatch):
    def full_disk(self, key, record, job):
        raise OSError(errno.ENOSPC, "No space left on device")

    ref = ik.run_scan(_spec(), executor="serial", progress=False)
    # threads instead of processes, so the workers see the patched write
    monkeypatch.setattr(ResultStore, "put", full_disk)
    with local_cluster(n_workers=1, processes=False, protocol="tcp://") as cluster, Client(cluster, set_as_default=False) as client:
        with pytest.warns(ik.InterkitWarning, match=r"8 calculation\(s\) could not be written"):
            ds = ik.run_scan(_spec(), executor=client, cache=tmp_path / "store", progress=False)
    assert ds.attrs["calculations_not_stored"] == 8
    # same calculations, same numbers (to the SCF threshold: other initial guesses)
    np.testing.assert_allclose(ds["e_total_hartree"].values, ref["e_total_hartree"].values, atol=1e-9, rtol=0)
    assert (ds["status"].values == ref["status"].values).all()
    assert ResultStore(tmp_path / "store").keys() == []


def test_workers_gone_mid_scan_give_failed_records_after_the_wait():
    from interkit.run.plan import plan_scan

    plan = plan_scan(_spec())
    chunks = [list(plan.chunks(1)[0])]
    with local_cluster(n_workers=1, processes=False, protocol="tcp://") as cluster, \
            Client(cluster, set_as_default=False) as client:
        executor = DaskExecutor(client, cluster_wait_s=WAIT_S)
        executor.wait_for_workers()
        cluster.scale(0)  # every worker leaves (e.g. the batch jobs ended)
        deadline = time.monotonic() + 30
        while client.nthreads() and time.monotonic() < deadline:
            time.sleep(0.05)
        t0 = time.monotonic()
        records = executor.run(chunks, plan.jobs, None)
        assert time.monotonic() - t0 < WAIT_S + SLACK_S  # before: waited for ever
    assert set(records) == {key for _, key in chunks[0]}
    assert all(r["status"] == "failed" and "no Dask worker" in r["detail"] for r in records.values())
