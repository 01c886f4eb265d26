"""Shared fixtures: S22 geometries from ASE, small dimers, temporary stores; the
:func:`require` rule for test prerequisites."""

from __future__ import annotations

import importlib
import os

import numpy as np
import pytest

import interkit as ik


def in_ci() -> bool:
    """True when the environment variable CI is ``true`` (set by ``.ci/run``)."""
    return os.environ.get("CI", "").strip().lower() == "true"


def require(prerequisite, reason: str):
    """Skip the calling test (or module) when a prerequisite is missing; fail under CI.

    Parameters
    ----------
    prerequisite : bool or str
        A condition that must hold, or the name of a module that must import.
    reason : str
        What is missing and how to get it, shown in the skip or failure message.

    Returns
    -------
    module or None
        The imported module when ``prerequisite`` is a module name.

    A missing prerequisite is a local skip but a failure in CI (``CI=true``), so a CI
    run can never pass by skipping what it was meant to check.
    """
    module = None
    if isinstance(prerequisite, str):
        try:
            module = importlib.import_module(prerequisite)
        except ImportError as exc:
            ok, reason = False, f"{reason} ({prerequisite} does not import: {exc})"
        else:
            ok = True
    else:
        ok = bool(prerequisite)
    if not ok:
        if in_ci():
            pytest.fail(f"missing test prerequisite under CI=true: {reason}", pytrace=False)
        pytest.skip(reason, allow_module_level=True)
    return module


def s22_dimer(name: str) -> ik.Dimer:
    """An S22 dimer from ase.data.s22 (Jurečka et al., PCCP 8, 1985 (2006)), split as ASE
    splits it (first n_A atoms are fragment A)."""
    from ase.data import s22

    atoms = s22.create_s22_system(name)
    n_a, _ = s22.get_number_of_dimer_atoms(name)
    return ik.Dimer.from_ase(atoms, fragment_a=range(n_a), name=name)


@pytest.fixture(autouse=True, scope="session")
def _session_default_store(tmp_path_factory):
    """The default store of module- and session-scoped fixtures: a temporary folder."""
    old = os.environ.get("INTERKIT_CACHE")
    os.environ["INTERKIT_CACHE"] = str(tmp_path_factory.mktemp("session-default-store"))
    yield
    if old is None:
        os.environ.pop("INTERKIT_CACHE", None)
    else:
        os.environ["INTERKIT_CACHE"] = old


@pytest.fixture(autouse=True)
def _default_store(_session_default_store, tmp_path_factory, monkeypatch):
    """run_scan keeps a store by default (``$INTERKIT_CACHE``, else ``.interkit-cache`` in
    the current folder): every test gets its own empty default store in a temporary
    folder, so tests neither write into the repository nor see each other's results."""
    monkeypatch.setenv("INTERKIT_CACHE", str(tmp_path_factory.mktemp("default-store")))


@pytest.fixture
def water_dimer() -> ik.Dimer:
    return s22_dimer("Water_dimer")


HF_DIMER_XYZ = """4
HF dimer, test geometry
F   0.000000  0.000000  0.000000
H   0.000000  0.000000  0.920000
F   0.000000  0.000000  2.750000
H   0.850000  0.000000  3.050000
"""


def hf_dimer() -> ik.Dimer:
    """A hydrogen-fluoride dimer built here (not a reference geometry): cheap to compute."""
    return ik.Dimer.from_xyz_string(HF_DIMER_XYZ, name="hf-dimer")


@pytest.fixture
def small_dimer() -> ik.Dimer:
    """The hydrogen-fluoride test dimer of :func:`hf_dimer`."""
    return hf_dimer()


@pytest.fixture
def rng():
    return np.random.default_rng(7)
