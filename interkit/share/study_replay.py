"""Replay a saved study: recompute sampled points of every system, or the whole study.

The same provenance as a scan, node by node: each system's node is a scan Dataset with
its spec and store keys, so :func:`verify_study` runs :func:`interkit.verify_scan` on
every node, and :func:`rerun_study` runs the saved study again (one executor call, see
:func:`interkit.run_study`) and compares every node as :func:`interkit.rerun_scan` does.
"""

from __future__ import annotations

import os
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import xarray as xr

from ..data.study_tree import open_study, study_of, system_datasets, validate_study
from ..errors import InputError
from .compare import DeviationTable, compare_datasets
from .provenance import key_agreement
from .replay import verify_scan


@dataclass
class StudyCheck:
    """The deviation tables of every system of a study (``verify`` or ``rerun``).

    Attributes
    ----------
    what : str
        ``'verify'`` or ``'rerun'``.
    tables : dict
        System name -> :class:`~interkit.share.compare.DeviationTable`.
    """

    what: str
    tables: dict[str, DeviationTable] = field(default_factory=dict)

    @property
    def passed(self) -> bool:
        """True when every variable of every system lies within its tolerance."""
        return bool(self.tables) and all(t.passed for t in self.tables.values())

    @property
    def failed_systems(self) -> list[str]:
        return [name for name, t in self.tables.items() if not t.passed]

    def __str__(self) -> str:
        out = []
        for name, table in self.tables.items():
            out.append(f"== system {name}")
            out.append(str(table))
        verdict = (f"{self.what} of the study: every system within its tolerances" if self.passed else
                   f"{self.what} of the study: outside tolerance in {', '.join(self.failed_systems) or 'no system'}")
        return "\n".join(out + [verdict])


def _load(tree_or_path) -> tuple[xr.DataTree, str | None]:
    if isinstance(tree_or_path, xr.DataTree):
        validate_study(tree_or_path)
        return tree_or_path, None
    if isinstance(tree_or_path, (str, os.PathLike)):
        return open_study(tree_or_path), os.fspath(tree_or_path)
    raise InputError(f"study: expected an xarray.DataTree or the path of a .nc file, got {type(tree_or_path).__name__}")


def verify_study(tree_or_path, sample: int = 1, seed: int = 0, executor="processes", workers: int | None = None,
                 progress=False, log: Callable[[str], None] | None = None) -> StudyCheck:
    """Recompute ``sample`` points of every system from scratch (no store) and compare.

    Parameters as in :func:`interkit.verify_scan`, applied to each system's node.
    """
    tree, _ = _load(tree_or_path)
    check = StudyCheck("verify")
    for name, ds in system_datasets(tree).items():
        if log is not None:
            log(f"system {name}:")
        check.tables[name] = verify_scan(ds, sample=sample, seed=seed, executor=executor, workers=workers,
                                         progress=progress, log=log)
    return check


def rerun_study(tree_or_path, cache: str | os.PathLike | None = None, executor="processes",
                workers: int | None = None, progress=True,
                log: Callable[[str], None] | None = None) -> tuple[xr.DataTree, StudyCheck]:
    """Run a saved study again (store entries reused) and compare every system's numbers.

    Returns
    -------
    (xarray.DataTree, StudyCheck)
        The new study and one deviation table per system, in the variables' units.
    """
    from ..run.plan import plan_scan
    from ..run.study import run_study

    saved, path = _load(tree_or_path)
    study = study_of(saved)
    fresh = run_study(study, executor=executor, cache=cache, progress=progress, workers=workers)
    if log is not None:
        log(f"rerun of {path or 'the study'}: {fresh.attrs.get('calculations_from_store', 0)} calculations "
            f"from the store, {fresh.attrs.get('calculations_computed', 0)} computed")
    old, new = system_datasets(saved), system_datasets(fresh)
    check = StudyCheck("rerun")
    for name, ds in old.items():
        if name not in new:
            continue
        n = int(ds.sizes["distance"])
        table = DeviationTable(compare_datasets(ds, new[name]), "rerun", np.arange(n),
                               np.asarray(ds["distance"].values, dtype=float),
                               key_agreement(ds, plan_scan(study.spec(name), check=False)),
                               str(ds.attrs.get("pyscf_version", "")), new[name])
        check.tables[name] = table
    return fresh, check
