"""A missing test prerequisite skips locally and fails in CI (``CI=true``), so a CI run
cannot pass by skipping what it was meant to check (tests/conftest.py: require)."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from _pytest.outcomes import Failed, Skipped
from conftest import require

ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.parametrize("prerequisite", [False, "interkit_no_such_module"], ids=["condition", "module"])
def test_missing_prerequisite_skips_locally_and_fails_in_ci(monkeypatch, prerequisite):
    monkeypatch.delenv("CI", raising=False)
    with pytest.raises(Skipped, match="Chromium is missing"):
        require(prerequisite, "Chromium is missing")
    monkeypatch.setenv("CI", "true")
    with pytest.raises(Failed, match="missing test prerequisite under CI=true: Chromium is missing"):
        require(prerequisite, "Chromium is missing")


def test_present_prerequisite_passes_and_returns_the_module(monkeypatch):
    monkeypatch.setenv("CI", "true")
    assert require(True, "always there") is None
    assert require("json", "the standard library").dumps([1]) == "[1]"


def test_ci_script_sets_ci_before_running_the_tests():
    script = (ROOT / ".ci" / "run").read_text()
    export = re.search(r"^export CI=true$", script, flags=re.M)
    run = re.search(r"^make test$", script, flags=re.M)
    assert export and run and export.start() < run.start()


def test_no_test_skips_on_a_missing_prerequisite_by_itself():
    """Every skip on a missing prerequisite goes through require (grep of the test files)."""
    offenders = []
    for path in sorted((ROOT / "tests").rglob("*.py")):
        if path.name in ("conftest.py", "test_prerequisites.py"):
            continue
        for n, line in enumerate(path.read_text().splitlines(), 1):
            if re.search(r"pytest\.(skip|importorskip)\(|mark\.skipif", line):
                offenders.append(f"{path.relative_to(ROOT)}:{n}: {line.strip()}")
    assert offenders == [], offenders
