"""run_scan and the launcher keep a result store by default; cache=None keeps none.

Reason (issue 13, item 1): a dead kernel must not lose a long run, so the default keeps
work, with the same folder rule as the command line (``.interkit-cache`` in the current
folder, or ``$INTERKIT_CACHE``).
"""

from __future__ import annotations

import os

import pytest
from conftest import hf_dimer, require

import interkit as ik


def _spec() -> ik.ScanSpec:
    return ik.ScanSpec(dimer=hf_dimer(), distances=[2.8, 3.4], levels=["hf/sto-3g"])


def _entries(folder) -> int:
    from interkit.run.store import ResultStore

    return len(ResultStore(folder, create=False).keys())


def test_run_scan_keeps_a_store_in_the_current_folder_by_default(tmp_path, monkeypatch):
    monkeypatch.delenv("INTERKIT_CACHE", raising=False)
    monkeypatch.chdir(tmp_path)
    first = ik.run_scan(_spec(), executor="serial", progress=False)
    folder = tmp_path / ".interkit-cache"
    n_jobs = first.attrs["calculations_computed"]
    assert n_jobs == 2 * 3 + 2    # 2 points x (dimer + 2 ghosted monomers) + 2 own-basis monomers
    assert _entries(folder) == n_jobs
    again = ik.run_scan(_spec(), executor="serial", progress=False)   # the "restarted kernel"
    assert again.attrs["calculations_computed"] == 0
    assert again.attrs["calculations_from_store"] == n_jobs
    assert float(abs(again["e_int"] - first["e_int"]).max()) == 0.0


def test_environment_variable_names_the_default_store(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    monkeypatch.setenv("INTERKIT_CACHE", str(tmp_path / "elsewhere"))
    from interkit.run.store import default_store_folder

    assert default_store_folder() == str(tmp_path / "elsewhere")
    ik.run_scan(_spec(), executor="serial", progress=False)
    assert _entries(tmp_path / "elsewhere") == 8
    assert not (tmp_path / ".interkit-cache").exists()


def test_cache_none_keeps_no_store(tmp_path, monkeypatch):
    monkeypatch.delenv("INTERKIT_CACHE", raising=False)
    monkeypatch.chdir(tmp_path)
    ik.run_scan(_spec(), executor="serial", progress=False, cache=None)
    again = ik.run_scan(_spec(), executor="serial", progress=False, cache=None)
    assert again.attrs["calculations_computed"] == 8
    assert os.listdir(tmp_path) == []


def test_cache_of_another_type_is_refused():
    with pytest.raises(ik.InputError, match="cache"):
        ik.run_scan(_spec(), executor="serial", progress=False, cache=3)


def test_launcher_and_background_scan_use_the_default_store(tmp_path, monkeypatch):
    require("ipywidgets", "the notebook layer needs ipywidgets (pip install -e .[test])")
    from interkit.widgets.launcher import ScanLauncher
    from interkit.widgets.runner import BackgroundScan

    monkeypatch.setenv("INTERKIT_CACHE", str(tmp_path / "store"))
    assert ScanLauncher(executor="serial").cache.value == str(tmp_path / "store")
    assert ScanLauncher(executor="serial", cache=None).cache.value == ""
    scan = BackgroundScan(_spec(), executor="serial").start()
    scan.wait()
    assert scan.error is None
    assert _entries(tmp_path / "store") == 8
    assert len(BackgroundScan(_spec(), executor="serial").records) == 8    # found in the store before running


def test_the_command_line_follows_the_same_folder_rule(tmp_path, monkeypatch):
    from interkit.cli.main import _build_parser

    argv = ["scan", "spec.toml", "-o", "scan.nc"]
    monkeypatch.delenv("INTERKIT_CACHE", raising=False)
    assert _build_parser().parse_args(argv).cache == ".interkit-cache"
    monkeypatch.setenv("INTERKIT_CACHE", str(tmp_path / "shared"))
    assert _build_parser().parse_args(argv).cache == str(tmp_path / "shared")
