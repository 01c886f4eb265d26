"""Nothing computed is lost and nothing damaged is used: store reads and writes, progress
callbacks, failed own-basis monomers, late errors (issue 11, items 4, 8, 9, 10)."""

from __future__ import annotations

import errno
import json

import numpy as np
import pytest
from conftest import hf_dimer

import interkit as ik
from interkit.cli import main
from interkit.data.schema import assemble, validate
from interkit.run.plan import plan_scan
from interkit.run.store import ResultStore, _checksum

#: two points of the hydrogen-fluoride test dimer in a minimal basis: 3 * 2 + 2 calculations
N_JOBS = 8


def _spec(**kw) -> ik.ScanSpec:
    return ik.ScanSpec(dimer=hf_dimer(), coordinate=ik.AtomPair(1, 2), factors=[1.0, 1.3],
                       levels=["hf/sto-3g"], scf_threshold_hartree=1e-11, **kw)


@pytest.fixture(scope="module")
def reference():
    """The scan without a store, serial: what every other run here must reproduce."""
    return ik.run_scan(_spec(), executor="serial", progress=False)


def _same(ds, ref):
    # the same calculations give the same numbers (common practice: executors and the
    # store change where a number comes from, never its value); executors start SCFs from
    # different guesses, so they agree to the SCF threshold (1e-11 hartree), not bitwise
    np.testing.assert_allclose(ds["e_total_hartree"].values, ref["e_total_hartree"].values, atol=1e-9, rtol=0)
    for name in ("e_int", "e_int_nocp", "bsse"):
        np.testing.assert_allclose(ds[name].values, ref[name].values, atol=1e-6, rtol=0)
    assert (ds["status"].values == ref["status"].values).all()
    assert (ds["job_key"].values == ref["job_key"].values).all()


def _rewrite(store: ResultStore, key: str, change) -> None:
    """Change an entry and give it a valid checksum again (damage a checksum cannot see)."""
    path = store.path(key)
    entry = json.loads(path.read_text())
    change(entry)
    entry["checksum"] = _checksum({"key": entry["key"], "job": entry["job"], "record": entry["record"]})
    path.write_text(json.dumps(entry))


# -- item 4: damaged entries with a valid checksum ---------------------------------------------

def test_entry_with_foreign_description_or_missing_field_is_damaged_and_recomputed(tmp_path, reference, capsys):
    root = tmp_path / "store"
    ik.run_scan(_spec(), executor="serial", cache=root, progress=False)
    store = ResultStore(root)
    plan = plan_scan(_spec())
    k_dimer, k_other = plan.table[(0, 0)]["dimer"], plan.table[(0, 1)]["dimer"]
    k_mono = plan.table[(0, 0)]["a_dimer_basis"]
    # entry of another calculation filed under this key (e.g. copied by hand): its job
    # description hashes to k_other, and its energy is a plausible, wrong number
    other = json.loads(store.path(k_other).read_text())

    def foreign(entry):
        entry["job"], entry["record"] = other["job"], other["record"]

    _rewrite(store, k_dimer, foreign)
    _rewrite(store, k_mono, lambda e: e["record"].pop("energy_hartree"))
    with pytest.warns(ik.InterkitWarning, match="is damaged") as caught:
        again = ik.run_scan(_spec(), executor="serial", cache=root, progress=False)
    texts = [str(w.message) for w in caught if "damaged" in str(w.message)]
    assert any("does not hash to its key" in t for t in texts) and any("lacks energy_hartree" in t for t in texts)
    assert again.attrs["calculations_computed"] == 2
    _same(again, reference)
    assert ResultStore(root).info().damaged == 2
    assert ResultStore(root).get(k_dimer) is not None  # recomputed and stored again
    assert main(["store", "info", str(root)]) == 0
    assert "damaged, set aside  2" in capsys.readouterr().out


# -- item 8: a store that cannot be written --------------------------------------------------

def _full_disk(self, key, record, job):
    raise OSError(errno.ENOSPC, "No space left on device")


@pytest.mark.parametrize("executor", ["serial", "processes"])
def test_store_write_failure_keeps_results_and_counts_them(tmp_path, reference, monkeypatch, executor):
    # as root, a read-only folder does not stop writes: the write itself fails here (the
    # worker processes are forked and inherit the patch)
    monkeypatch.setattr(ResultStore, "put", _full_disk)
    with pytest.warns(ik.InterkitWarning, match=r"8 calculation\(s\) could not be written.*No space left"):
        ds = ik.run_scan(_spec(), executor=executor, workers=2, cache=tmp_path / "store", progress=False)
    _same(ds, reference)
    assert ds.attrs["calculations_not_stored"] == N_JOBS
    assert ResultStore(tmp_path / "store").keys() == []
    monkeypatch.undo()
    ok = ik.run_scan(_spec(), executor="serial", cache=tmp_path / "store", progress=False)
    assert ok.attrs["calculations_not_stored"] == 0 and ok.attrs["calculations_computed"] == N_JOBS


def test_cli_says_how_many_results_were_not_stored(tmp_path, monkeypatch, capsys):
    (tmp_path / "g.xyz").write_text(hf_dimer().to_xyz_string())
    (tmp_path / "spec.toml").write_text('[system]\ngeometry = "g.xyz"\n[scan]\ncoordinate = "atom-pair"\n'
                                        'atoms = [1, 2]\nfactors = [1.0, 1.3]\n[calculation]\n'
                                        'levels = ["hf/sto-3g"]\n')
    monkeypatch.setattr(ResultStore, "put", _full_disk)
    out = tmp_path / "scan.nc"
    with pytest.warns(ik.InterkitWarning):
        code = main(["scan", str(tmp_path / "spec.toml"), "-o", str(out), "--serial", "--quiet",
                            "--cache", str(tmp_path / "store")])
    assert code == 0 and out.exists()
    err = [line for line in capsys.readouterr().err.splitlines() if "could not be written" in line]
    assert len(err) == 1 and f"{N_JOBS} calculation(s)" in err[0]
    assert "Traceback" not in err[0]
    assert ik.open_scan(out).attrs["calculations_not_stored"] == N_JOBS


# -- item 9: a failed own-basis monomer -----------------------------------------------------

def _fail_job(monkeypatch, key):
    from interkit.engine import energy

    real = energy.run_energy_job

    def run(job, guess=None):
        record, density = real(job, guess)
        if job.key == key:  # as an SCF that did not converge reports itself
            record.update(status="failed", converged=False, energy_hartree=float("nan"),
                          detail="SCF did not converge (injected)")
            density = None
        return record, density

    monkeypatch.setattr(energy, "run_energy_job", run)


def test_failed_own_basis_monomer_costs_only_uncorrected_energy_and_bsse(monkeypatch, reference):
    key = plan_scan(_spec()).table[(0, 0)]["a_own_basis"]  # shared by both points (rigid scan)
    _fail_job(monkeypatch, key)
    ds = ik.run_scan(_spec(), executor="serial", progress=False)
    # e_int = E(AB) - E(A in AB basis) - E(B in AB basis) (Boys-Bernardi): no own-basis term
    np.testing.assert_allclose(ds["e_int"].values, reference["e_int"].values, atol=1e-9, rtol=0)
    assert np.isfinite(ds["e_int"].values).all()
    assert np.isnan(ds["e_int_nocp"].values).all() and np.isnan(ds["bsse"].values).all()
    assert (ds["status"].values == "ok").all() and ds["converged"].values.all()
    for text in ds["status_detail"].values.ravel():
        assert "A in own basis: SCF did not converge (injected)" in str(text)
        assert "e_int_nocp and bsse not available" in str(text)
    validate(ds)


def test_without_counterpoise_a_failed_own_basis_monomer_fails_the_point(monkeypatch):
    spec = _spec(counterpoise=False)
    _fail_job(monkeypatch, plan_scan(spec).table[(0, 0)]["a_own_basis"])
    ds = ik.run_scan(spec, executor="serial", progress=False)
    # the uncorrected energy is then the only number of a point, and it needs the monomer
    assert (ds["status"].values == "failed").all()
    assert np.isnan(ds["e_int_nocp"].values).all()


# -- item 10: a progress callback that raises -------------------------------------------------

@pytest.mark.parametrize("executor", ["serial", "processes"])
def test_progress_callback_error_is_reported_once_and_the_scan_completes(executor, reference):
    calls = []

    def redraw(done, total, key, record):  # e.g. a widget whose output area was closed
        calls.append(done)
        raise RuntimeError("widget is gone")

    with pytest.warns(ik.InterkitWarning) as caught:
        ds = ik.run_scan(_spec(), executor=executor, workers=2, progress=redraw)
    reported = [w for w in caught if "progress" in str(w.message)]
    assert len(reported) == 1 and "RuntimeError: widget is gone" in str(reported[0].message)
    assert len(calls) == N_JOBS  # later updates are still attempted
    _same(ds, reference)


# -- late errors: records survive an error after the calculations -------------------------------

def test_error_after_the_calculations_carries_the_records(monkeypatch, reference):
    import interkit.run.scan as run_module

    def broken(*args, **kwargs):
        raise RuntimeError("assembly failed")

    monkeypatch.setattr(run_module, "assemble", broken)
    with pytest.raises(RuntimeError, match="assembly failed") as info:
        ik.run_scan(_spec(), executor="serial", progress=False)
    records = info.value.records
    assert len(records) == N_JOBS
    monkeypatch.undo()
    _same(assemble(plan_scan(_spec()), records), reference)
