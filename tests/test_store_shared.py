"""A result store shared between processes: overlapping scans and concurrent writers
corrupt nothing, a damaged entry is set aside without losing a fresh one, and the
store can be inspected and pruned (least recently used first)."""

from __future__ import annotations

import json
import os
import subprocess
import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pytest
from conftest import HF_DIMER_XYZ

import interkit as ik
from interkit.cli.main import main
from interkit.run import store as store_module
from interkit.run.plan import plan_scan
from interkit.run.store import ResultStore, parse_size

HF_DIMER = HF_DIMER_XYZ

#: a record with every field a stored energy record has (the store sets aside entries
#: that lack one, or whose job description does not hash to their key)
RECORD_FIELDS = ('{"energy_hartree": -1.0, "scf_energy_hartree": -1.0, "correlation_energy_hartree": 0.0, '
                 '"dispersion_energy_hartree": 0.0, "converged": true, "status": "ok", "detail": "", '
                 '"wall_time_s": 0.0}')


def _record(**extra) -> dict:
    return dict(json.loads(RECORD_FIELDS), **extra)


def _job(i, what="stress test") -> tuple[str, dict]:
    """(key, job description) of a made-up job; the key is its description's hash."""
    from interkit.model.job import job_key

    job = {"what": what, "index": i}
    return job_key(job), job


def _spec_toml(factors) -> str:
    return ('[system]\ngeometry = "g.xyz"\n[scan]\ncoordinate = "atom-pair"\natoms = [1, 2]\n'
            f'factors = {list(factors)}\n[calculation]\nlevels = ["hf/def2-svp"]\nscf_threshold_hartree = 1e-10\n')


def _files(store: Path) -> list[Path]:
    return sorted(p for p in (store / "objects").glob("*/*") if p.is_file())


def _check_every_entry(store: Path) -> ResultStore:
    """Every file is a complete entry that passes its checksum."""
    names = [p.name for p in _files(store)]
    assert names and all(n.endswith(".json") and not n.startswith(".") for n in names), names
    reader = ResultStore(store)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # a checksum failure would warn
        for key in reader.keys():
            entry = json.loads(reader.path(key).read_text())
            assert entry["key"] == key
            assert reader.get(key) == entry["record"]
    assert not reader.damaged
    return reader


def test_two_processes_with_overlapping_scans_share_one_store(tmp_path):
    (tmp_path / "g.xyz").write_text(HF_DIMER)
    grids = {"one": (1.0, 1.1, 1.2, 1.3, 1.45), "two": (1.1, 1.2, 1.3, 1.45, 1.7)}
    for name, factors in grids.items():
        (tmp_path / f"{name}.toml").write_text(_spec_toml(factors))
    store = tmp_path / "store"
    env = dict(os.environ, OMP_NUM_THREADS="1")
    procs = {name: subprocess.Popen(
        [sys.executable, "-m", "interkit.cli", "scan", str(tmp_path / f"{name}.toml"), "-o",
         str(tmp_path / f"{name}.nc"), "--cache", str(store), "--serial", "--quiet"],
        env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True) for name in grids}
    for proc in procs.values():
        _, err = proc.communicate(timeout=600)
        assert proc.returncode == 0, err
    reader = _check_every_entry(store)
    specs = {name: ik.load_spec_toml(tmp_path / f"{name}.toml") for name in grids}
    wanted = set(plan_scan(specs["one"]).jobs) | set(plan_scan(specs["two"]).jobs)
    assert set(reader.keys()) == wanted
    shared = set(plan_scan(specs["one"]).jobs) & set(plan_scan(specs["two"]).jobs)
    assert len(shared) == 3 * 4 + 2  # four common points and the two monomers
    for name, spec in specs.items():
        ran = ik.open_scan(tmp_path / f"{name}.nc")
        fresh = ik.run_scan(spec, executor="serial", progress=False)
        assert (ran["status"] == "ok").all() and (ran["job_key"].values == fresh["job_key"].values).all()
        np.testing.assert_allclose(ran["e_total_hartree"].values, fresh["e_total_hartree"].values,
                                   atol=1e-9, rtol=0)


WRITER = """
import json, sys, time
from interkit.model.job import job_key
from interkit.run.store import ResultStore
root, tag, rounds = sys.argv[1], sys.argv[2], int(sys.argv[3])
store = ResultStore(root)
jobs = [{"what": "stress test", "index": i} for i in range(8)]
for r in range(rounds):
    for job in jobs:
        store.put(job_key(job), dict(json.loads(RECORD), writer=tag, round=r, energy_hartree=-1.0 - r * 1e-3,
                                     padding="x" * (200 * (r % 7))), job)
""".replace("RECORD", repr(RECORD_FIELDS))

READER = """
import sys, warnings
from interkit.run.store import ResultStore
warnings.simplefilter("error")
root, rounds = sys.argv[1], int(sys.argv[2])
store = ResultStore(root)
from interkit.model.job import job_key
keys = [job_key({"what": "stress test", "index": i}) for i in range(8)]
seen = 0
for r in range(rounds):
    for k in keys:
        rec = store.get(k)
        if rec is None:
            sys.exit(f"entry {k[:8]} missing or damaged while being rewritten")
        if rec["writer"] not in ("A", "B"):
            sys.exit("foreign record")
        seen += 1
print(seen)
"""


def test_concurrent_writers_of_the_same_keys_never_show_a_partial_entry(tmp_path):
    store = tmp_path / "store"
    seed = ResultStore(store)
    for i in range(8):
        key, job = _job(i)
        seed.put(key, _record(writer="A", round=-1), job)
    procs = [subprocess.Popen([sys.executable, "-c", WRITER, str(store), tag, "60"]) for tag in ("A", "B")]
    readers = [subprocess.Popen([sys.executable, "-c", READER, str(store), "150"],
                                stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True) for _ in range(2)]
    for p in procs:
        assert p.wait(timeout=300) == 0
    for p in readers:
        out, err = p.communicate(timeout=300)
        assert p.returncode == 0, err
        assert int(out) == 150 * 8
    _check_every_entry(store)
    assert len(ResultStore(store).keys()) == 8


def test_a_fresh_entry_written_while_a_damaged_one_is_read_is_kept(tmp_path, monkeypatch):
    store = ResultStore(tmp_path / "store")
    key, job = _job(0, "race")
    record = _record(energy_hartree=-1.5)
    store.put(key, record, job)
    path = store.path(key)
    path.write_text(path.read_text()[:50])  # damaged on disk
    real_loads = json.loads
    other = ResultStore(tmp_path / "store")  # another process, in effect

    def loads_then_someone_writes(text, *args, **kwargs):
        # between this reader's read and its check, a writer renames a fresh entry in
        other.put(key, record, job)
        return real_loads(text, *args, **kwargs)

    monkeypatch.setattr(store_module.json, "loads", loads_then_someone_writes)
    assert store.get(key) is None  # this read saw the damaged file
    monkeypatch.undo()
    assert ResultStore(tmp_path / "store").get(key) == record, "the fresh entry was moved aside"
    assert [p.name for p in _files(tmp_path / "store")] == [f"{key}.json"]
    # without a concurrent writer the damaged file itself is set aside, once
    path.write_text(path.read_text()[:50])
    with pytest.warns(ik.InterkitWarning, match="failed its checksum"):
        assert store.get(key) is None
    assert [p.suffix for p in _files(tmp_path / "store")] == [".damaged"]


def test_entries_get_the_permissions_the_umask_allows(tmp_path):
    old = os.umask(0o002)  # group-shared store
    try:
        ResultStore(tmp_path / "store").put("ef" * 32, {"x": 1}, {"y": 2})
    finally:
        os.umask(old)
    entry = ResultStore(tmp_path / "store").path("ef" * 32)
    assert entry.stat().st_mode & 0o777 == 0o664
    assert entry.parent.stat().st_mode & 0o777 == 0o775


def _populate(root: Path, n: int) -> tuple[ResultStore, list[str]]:
    store = ResultStore(root)
    jobs = [_job(i, "prune") for i in range(n)]
    keys = [k for k, _ in jobs]
    base = time.time() - 10 * 86400
    for i, (key, job) in enumerate(jobs):
        store.put(key, _record(energy_hartree=-float(i)), job)
        os.utime(store.path(key), (base + 3600 * i, base + 3600 * i))  # written an hour apart
    return store, keys


def test_info_and_prune_drop_least_recently_used_entries_first(tmp_path):
    store, keys = _populate(tmp_path / "store", 10)
    assert store.get(keys[0]) is not None  # the oldest entry is used now
    damaged = store.path(keys[5]).with_name("x.123.damaged")
    damaged.write_text("{broken")
    stale = store.path(keys[6]).with_name(f".{keys[6]}.1.ab.partial")
    stale.write_text("{half")
    os.utime(stale, (time.time() - 7200, time.time() - 7200))
    busy = store.path(keys[7]).with_name(f".{keys[7]}.2.cd.partial")  # a writer at work
    busy.write_text("{half")
    sizes = {k: store.path(k).stat().st_size for k in keys}
    info = store.info()
    assert info.entries == 10 and info.damaged == 1 and info.partial == 2
    assert info.entry_bytes == sum(sizes.values())
    assert info.total_bytes == sum(p.stat().st_size for p in _files(tmp_path / "store"))
    assert info.most_recent_use > info.least_recent_use
    assert abs(info.most_recent_use.timestamp() - time.time()) < 600
    assert abs(info.least_recent_use.timestamp() - store.path(keys[1]).stat().st_mtime) < 1
    limit = sum(sizes[k] for k in keys[6:]) + sizes[keys[0]] + busy.stat().st_size
    result = store.prune(limit)
    left = set(store.keys())
    assert left == {keys[0], *keys[6:]}, "not least recently used first"
    assert result.removed_entries == 5 and result.removed_damaged == 1 and result.removed_partial == 1
    assert not damaged.exists() and not stale.exists() and busy.exists()
    assert result.remaining_bytes == sum(p.stat().st_size for p in _files(tmp_path / "store")) <= limit
    assert store.prune(limit).removed_entries == 0
    assert store.prune(0).remaining_entries == 0 and store.keys() == []


def test_store_commands(tmp_path, capsys):
    store, keys = _populate(tmp_path / "store", 6)
    assert main(["store", "info", str(tmp_path / "store")]) == 0
    out = capsys.readouterr().out
    assert "entries             6 (" in out and "damaged, set aside  0" in out
    one = store.path(keys[0]).stat().st_size
    assert main(["store", "prune", str(tmp_path / "store"), "--max-size", f"{3 * one + 10}B"]) == 0
    out = capsys.readouterr().out
    assert "removed 3 least recently used entries" in out
    assert store.keys() == sorted(keys[3:])


@pytest.mark.parametrize("text,expected", [("500MB", 500 * 10**6), ("2GB", 2 * 10**9), ("1GiB", 2**30),
                                           ("1.5 kB", 1500), ("4096", 4096), ("10mib", 10 * 2**20)])
def test_parse_size(text, expected):
    assert parse_size(text) == expected


@pytest.mark.parametrize("text", ["", "MB", "-5MB", "10XB", "1e3", "five"])
def test_parse_size_refuses(text):
    with pytest.raises(ik.InputError, match="is not a size"):
        parse_size(text, "--max-size")
