"""Shared fixtures: S22 geometries from ASE, small dimers, temporary stores."""

from __future__ import annotations

import os

import numpy as np
import pytest

import interkit as ik


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
