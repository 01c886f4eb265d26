"""Paths the other test files leave out: Frames scans from TOML and from an XYZ path
(explicit values, non-rigid frames, saved, reopened and verified); cancelling and a dying
worker in the process executor; Dask tasks that raise and their retries; an error in the
launcher's background run; save/open round trips of every kind of Dataset; the report's
point-status section; ``interkit demo``.

Every scan here is HF/STO-3G on the hydrogen-fluoride test dimer of conftest (or smaller):
the checks are about bookkeeping, so the cheapest level that gives real numbers will do.
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
import threading
import time

import numpy as np
import pytest
import xarray as xr
from conftest import hf_dimer, require

import interkit as ik
import interkit.engine.energy as energy
from interkit.data.schema import assemble
from interkit.model.job import failed_record
from interkit.run.plan import plan_scan

LEVEL = "hf/sto-3g"


# ---------------------------------------------------------------------- Frames
def _non_rigid_frames() -> list[np.ndarray]:
    """Three geometries of the HF dimer: B moved away AND its own bond stretched or
    compressed, so the monomers differ from frame to frame (not a rigid scan)."""
    base = np.array(hf_dimer().coordinates)
    out = []
    for shift, stretch in [(0.0, 0.0), (0.35, 0.04), (0.8, -0.03)]:
        c = base.copy()
        c[2:] += [0.0, 0.0, shift]
        bond = (c[3] - c[2]) / np.linalg.norm(c[3] - c[2])
        c[3] += stretch * bond
        out.append(c)
    return out


def _write_frames(path, frames) -> None:
    symbols = hf_dimer().symbols
    text = ""
    for k, c in enumerate(frames):
        text += f"{len(symbols)}\nframe {k}\n" + "".join(
            f"{s} {x:.8f} {y:.8f} {z:.8f}\n" for s, (x, y, z) in zip(symbols, c))
    path.write_text(text)


def _single_point(coords) -> tuple[float, float]:
    """(e_int, e_int_nocp) of the same geometry as its own one-point scan (factor 1 of
    the centre-of-mass coordinate is the input geometry)."""
    spec = ik.ScanSpec(dimer=hf_dimer().with_coordinates(coords), factors=[1.0], levels=[LEVEL])
    ds = ik.run_scan(spec, executor="serial", progress=False)
    return float(ds["e_int"].values[0, 0]), float(ds["e_int_nocp"].values[0, 0])


def test_frames_from_toml_with_explicit_values_saved_reopened_and_verified(tmp_path):
    frames = _non_rigid_frames()
    (tmp_path / "dimer.xyz").write_text(hf_dimer().to_xyz_string())
    _write_frames(tmp_path / "frames.xyz", frames)
    values = [2.0, 2.4, 2.9]
    (tmp_path / "spec.toml").write_text(
        '[system]\ngeometry = "dimer.xyz"\nfragment_a = [0, 1]\n'
        f'[scan]\ncoordinate = "frames"\nframes = "frames.xyz"\nvalues = {values}\n'
        f'[calculation]\nlevels = ["{LEVEL}"]\n')
    spec = ik.load_spec_toml(tmp_path / "spec.toml")
    assert isinstance(spec.coordinate, ik.Frames)
    ds = ik.run_scan(spec, executor="serial", progress=False)
    assert list(ds["distance"].values) == values  # the explicit values, not measured ones
    np.testing.assert_allclose(ds["coordinates"].values, np.array(frames), atol=1e-8)
    # each frame is its own geometry: the same numbers as a one-point scan of it
    # (source: the single-point scans; a mix-up of frames, or a rigid-scan shortcut that
    # reuses the first frame's own-basis monomers in the uncorrected energy, would
    # differ, since B's bond changes)
    # Tolerance 1e-5 kcal/mol: the frames start their SCFs from the previous frame's
    # density, the single points from pyscf's guess; both converge to 1e-8 hartree, which
    # leaves E_int within ~1e-6 kcal/mol here (measured 1.2e-7), far below what a frame
    # mix-up changes (B's bond length differs between the frames).
    for k, c in enumerate(frames):
        e_int, e_nocp = _single_point(c)
        assert float(ds["e_int"].values[0, k]) == pytest.approx(e_int, abs=1e-5)
        assert float(ds["e_int_nocp"].values[0, k]) == pytest.approx(e_nocp, abs=1e-5)
    path = tmp_path / "frames.nc"
    ik.save_scan(ds, path)
    xr.testing.assert_identical(ik.open_scan(path), ds)
    table = ik.verify_scan(path, sample=3, executor="serial", progress=False)
    assert table.passed and len(table.indices) == 3


def test_frames_from_an_xyz_path_measured_by_an_atom_pair(tmp_path):
    frames = _non_rigid_frames()
    _write_frames(tmp_path / "frames.xyz", frames)
    spec = ik.ScanSpec(dimer=hf_dimer(), coordinate=ik.Frames(tmp_path / "frames.xyz", ik.AtomPair(1, 2)),
                       levels=[LEVEL])
    ds = ik.run_scan(spec, executor="serial", progress=False)
    # measured values: the H1...F2 distance of each frame (numpy norm, here)
    measured = [float(np.linalg.norm(c[1] - c[2])) for c in frames]
    np.testing.assert_allclose(ds["distance"].values, measured, atol=1e-10)
    assert (ds["status"] == "ok").all()
    # rigid scans share own-basis monomers; frames compute them per point
    assert np.ptp(ds["e_total_hartree"].sel(role="b_own_basis").values) > 1e-4
    path = tmp_path / "frames.nc"
    ik.save_scan(ds, path)
    assert ik.verify_scan(path, sample=2, executor="serial", progress=False).passed


# ---------------------------------------------------------------------- process executor
def _spec(n_points: int = 6) -> ik.ScanSpec:
    factors = list(np.round(np.linspace(0.95, 1.8, n_points), 3))
    return ik.ScanSpec(dimer=hf_dimer(), coordinate=ik.AtomPair(1, 2), factors=factors, levels=[LEVEL])


def test_cancel_in_the_process_executor_keeps_finished_points(monkeypatch):
    real = energy.run_energy_job

    def slow(job, guess=None):  # slow enough that cancel lands mid-scan (forked workers inherit it)
        time.sleep(0.4)
        return real(job, guess)

    monkeypatch.setattr(energy, "run_energy_job", slow)
    cancel = threading.Event()
    seen = []

    def progress(done, total, key, record):
        seen.append(key)
        cancel.set()

    spec = _spec(6)
    n_jobs = len(plan_scan(spec).jobs)
    ds = ik.run_scan(spec, executor="processes", workers=2, progress=progress, cancel=cancel)
    assert ds.attrs["executor"] == "processes"
    status = list(ds["status"].values[0])
    detail = list(ds["status_detail"].values[0])
    assert 1 <= len(seen) < n_jobs
    assert "failed" in status
    assert all("cancelled" in d for s, d in zip(status, detail) if s == "failed")
    ok = ds["status"].values[0] == "ok"
    assert np.isnan(ds["e_int"].values[0][~ok]).all() and np.isfinite(ds["e_int"].values[0][ok]).all()


def test_a_dying_worker_fails_its_points_and_keeps_the_rest(monkeypatch, tmp_path):
    spec = _spec(6)
    plan = plan_scan(spec)
    chunks = plan.chunks(2)  # what run_scan gives two workers for one level
    assert len(chunks) == 2
    first_chunk = {key for _, key in chunks[0]}
    doomed = chunks[1][-1][1]   # the last calculation of the second worker
    go = tmp_path / "first-chunk-done"
    real = energy.run_energy_job
    parent = os.getpid()

    def dies_in_a_worker(job, guess=None):
        if job.key == doomed and os.getpid() != parent:
            deadline = time.time() + 120
            while not go.exists() and time.time() < deadline:  # let the other worker finish
                time.sleep(0.05)
            os._exit(3)
        return real(job, guess)

    monkeypatch.setattr(energy, "run_energy_job", dies_in_a_worker)
    finished = set()

    def progress(done, total, key, record):
        finished.add(key)
        if first_chunk <= finished:
            go.touch()

    ds = ik.run_scan(spec, executor="processes", workers=2, progress=progress)
    status = list(ds["status"].values[0])
    detail = list(ds["status_detail"].values[0])
    # the point of the lost calculation is failed and says why; every other point is intact
    assert status[-1] == "failed" and "worker process failed" in detail[-1], detail[-1]
    assert status[:-1] == ["ok"] * 5
    ref = ik.run_scan(spec, executor="serial", progress=False)
    np.testing.assert_allclose(ds["e_int"].values[0, :-1], ref["e_int"].values[0, :-1], atol=1e-8)
    assert np.isnan(ds["e_int"].values[0, -1])


# ---------------------------------------------------------------------- Dask
@pytest.fixture
def in_process_client():
    """A LocalCluster of one in-process worker thread (so monkeypatches reach it)."""
    Client = require("distributed", "the Dask executor needs distributed (pip install -e .[dask])").Client

    from interkit.run.dask import local_cluster

    with local_cluster(n_workers=1, processes=False, protocol="tcp://") as cluster, Client(cluster, set_as_default=False) as c:
        yield c


def test_dask_tasks_that_raise_are_retried_and_then_reported(monkeypatch, in_process_client):
    from interkit.run.dask import DaskExecutor

    spec = _spec(3)
    plan = plan_scan(spec)
    always = plan.table[(0, 2)]["dimer"]  # the dimer of the last point raises every time
    calls: dict[str, int] = {}
    real = energy.run_energy_job

    def flaky(job, guess=None):
        calls[job.key] = calls.get(job.key, 0) + 1
        if job.key == always or calls[job.key] == 1:
            raise RuntimeError(f"flaky task {job.key[:8]}")  # escapes the engine's own handler
        return real(job, guess)

    monkeypatch.setattr(energy, "run_energy_job", flaky)
    ds = ik.run_scan(spec, executor=DaskExecutor(in_process_client, retries=2), progress=False)
    # every task failed once and was run again; the always-failing one 1 + 2 retries times
    assert calls[always] == 3
    assert all(n == 2 for k, n in calls.items() if k != always), calls
    assert set(calls) == set(plan.jobs)
    status = list(ds["status"].values[0])
    assert status[:2] == ["ok", "ok"] and status[2] == "failed"
    assert "flaky task" in str(ds["status_detail"].values[0, 2])
    monkeypatch.undo()
    ref = ik.run_scan(spec, executor="serial", progress=False)
    np.testing.assert_allclose(ds["e_int"].values[0, :2], ref["e_int"].values[0, :2], atol=1e-8)


# ---------------------------------------------------------------------- launcher
def test_an_error_in_the_launchers_background_run_is_shown(monkeypatch):
    W = require("interkit.widgets", "the notebook layer needs ipywidgets (pip install -e .[test])")
    from interkit.widgets import runner

    def broken_run_scan(*args, **kwargs):
        raise RuntimeError("the disk vanished")

    monkeypatch.setattr(runner, "run_scan", broken_run_scan)
    escaped = []
    monkeypatch.setattr(threading, "excepthook", lambda a: escaped.append(a.exc_value))
    launcher = W.ScanLauncher(executor="serial")
    launcher.load_xyz_text(hf_dimer().to_xyz_string(), "hf-dimer")
    launcher.grid.value = "1.0, 1.3"
    launcher.levels.value = LEVEL
    launcher.workers.value = 1
    scan = launcher.run()
    assert scan is not None and launcher.wait(timeout=60)
    assert escaped == []
    assert scan.error == "RuntimeError: the disk vanished"
    assert "the disk vanished" in launcher.message.value and "interkit-error" in launcher.message.value
    assert launcher.progress_label.value == "stopped by an error"
    assert launcher.progress.bar_style == "danger"
    assert launcher.result is None and not launcher.run_button.disabled


# ---------------------------------------------------------------------- round trips
def _round_trip(ds, tmp_path, name):
    path = tmp_path / f"{name}.nc"
    ik.save_scan(ds, path)
    back = ik.open_scan(path)
    xr.testing.assert_identical(back, ds)
    return back


def test_round_trip_with_the_dispersion_dimension(tmp_path):
    spec = ik.ScanSpec(dimer=hf_dimer(), factors=[1.0], levels=["b3lyp/sto-3g"], dispersion=["none", "d3bj", "d4"])
    ds = ik.run_scan(spec, executor="serial", progress=False)
    assert ds.sizes["dispersion"] == 3
    _round_trip(ds, tmp_path, "dispersion")


def test_round_trip_with_sapt0(tmp_path):
    spec = ik.ScanSpec(dimer=hf_dimer(), factors=[1.0, 1.4], levels=[LEVEL], decomposition="sapt0",
                       decomposition_basis="sto-3g")
    ds = ik.run_scan(spec, executor="serial", progress=False)
    assert "e_elst" in ds and np.isfinite(ds["e_elst"].values).all()
    _round_trip(ds, tmp_path, "sapt0")


def test_round_trip_of_an_open_shell_scan(tmp_path):
    xyz = "3\nH + HF\nH 0 0 0\nF 0 0 2.3\nH 0 0 3.22\n"
    d = ik.Dimer.from_xyz_string(xyz, fragment_a=[0], multiplicities=(2, 1))
    ds = ik.run_scan(ik.ScanSpec(dimer=d, factors=[1.0, 1.2], levels=[LEVEL], forces=True),
                     executor="serial", progress=False)
    assert np.isfinite(ds["spin_square"].sel(role="dimer").values).all()
    _round_trip(ds, tmp_path, "open-shell")


def test_round_trip_of_a_frames_scan(tmp_path):
    spec = ik.ScanSpec(dimer=hf_dimer(), coordinate=ik.Frames(_non_rigid_frames(), values=[2.0, 2.4, 2.9]),
                       levels=[LEVEL])
    ds = ik.run_scan(spec, executor="serial", progress=False)
    back = _round_trip(ds, tmp_path, "frames")
    assert isinstance(ik.spec_of(back).coordinate, ik.Frames)


# ---------------------------------------------------------------------- report
def test_report_point_status_lists_failed_and_retried_points(tmp_path):
    spec = _spec(3)
    plan = plan_scan(spec)
    records = {}
    for key, job in plan.jobs.items():
        # synthetic records: monomers -100 hartree, dimers 1 millihartree below their sum
        e = -200.001 if not any(job.ghost) and len(job.symbols) == 4 else -100.0
        records[key] = {**ik_record(e), "role": "synthetic"}
    retried, failed = plan.table[(0, 0)]["dimer"], plan.table[(0, 2)]["a_dimer_basis"]
    records[retried].update(status="retried", detail="level shift and damping")
    records[failed] = failed_record("SCF did not converge (a synthetic failure)")
    ds = assemble(plan, records)
    assert list(ds["status"].values[0]) == ["retried", "ok", "failed"]
    path = tmp_path / "report.html"
    ik.write_report(ds, path)
    html = path.read_text()
    section = html[html.index("<h2>Point status</h2>"):]
    section = section[:section.index("</table>")]
    rows = re.findall(r"<tr>(.*?)</tr>", section, flags=re.S)[1:]  # after the header row
    cells = [re.findall(r"<td[^>]*>(.*?)</td>", r, flags=re.S) for r in rows]
    assert len(cells) == 2, cells  # the ok point is not listed
    by_status = {c[2]: c for c in cells}
    assert set(by_status) == {"retried", "failed"}
    assert "level shift and damping" in by_status["retried"][3]
    assert "synthetic failure" in by_status["failed"][3]
    d = ds["distance"].values
    assert float(by_status["retried"][1]) == pytest.approx(d[0], abs=1e-3)
    assert float(by_status["failed"][1]) == pytest.approx(d[2], abs=1e-3)


def ik_record(e_hartree: float) -> dict:
    return failed_record("", energy_hartree=e_hartree, scf_energy_hartree=e_hartree,
                                converged=True, status="ok", nao=4)


# ---------------------------------------------------------------------- interkit demo
def test_demo_command_in_process_with_a_cheap_spec(monkeypatch, tmp_path, capsys):
    import importlib

    cli = importlib.import_module("interkit.cli.main")
    monkeypatch.setattr(cli, "DEMO_LEVELS", (LEVEL,))
    monkeypatch.setattr(cli, "DEMO_FACTORS", (0.95, 1.1, 1.5))
    out = tmp_path / "demo"
    assert cli.main(["demo", "-o", str(out), "--serial"]) == 0
    text = capsys.readouterr().out
    assert (out / "curve.png").read_bytes()[:4] == b"\x89PNG"
    ds = ik.open_scan(out / "scan.nc")
    assert [str(x) for x in ds["level"].values] == [LEVEL] and ds.sizes["distance"] == 3
    assert (ds["status"] == "ok").all()
    assert "wrote" in text and str(out / "scan.nc") in text
    # the demo stores its calculations: a second run computes nothing
    assert cli.main(["demo", "-o", str(out / "again"), "--serial", "--cache", str(out / "cache")]) == 0
    assert ik.open_scan(out / "again" / "scan.nc").attrs["calculations_computed"] == 0


@pytest.mark.slow
def test_demo_command_for_real(tmp_path):
    out = tmp_path / "demo"
    env = dict(os.environ, OMP_NUM_THREADS="1")
    proc = subprocess.run([sys.executable, "-m", "interkit.cli", "demo", "-o", str(out), "--quiet"],
                          capture_output=True, text=True, env=env, timeout=1800)
    assert proc.returncode == 0, proc.stderr[-2000:]
    ds = ik.open_scan(out / "scan.nc")
    assert (ds["status"] != "failed").all()
    # the demo's hydrogen bond is bound at both levels, the minimum inside the grid
    # (common practice: water-methanol binds by about 5 kcal/mol)
    e = ds["e_int"].values
    assert (e.min(axis=1) < -2.0).all() and (np.argmin(e, axis=1) > 0).all()
    assert (out / "curve.png").exists()
    # the report and `interkit compare` pick the same reference and print the same
    # statistics for the demo scan (one rule, one table)
    from test_statistics_table import _compare_rows, _report_rows

    from interkit.cli.main import main

    cmp = subprocess.run([sys.executable, "-m", "interkit.cli", "compare", str(out / "scan.nc")],
                         capture_output=True, text=True, env=env, timeout=600)
    assert cmp.returncode == 0, cmp.stderr
    assert main(["report", str(out / "scan.nc"), "-o", str(tmp_path / "report.html")]) == 0
    ref_cli, rows_cli = _compare_rows(cmp.stdout)
    ref_html, rows_html = _report_rows((tmp_path / "report.html").read_text(encoding="utf-8"))
    assert ref_cli == ref_html and rows_cli == rows_html and rows_cli
