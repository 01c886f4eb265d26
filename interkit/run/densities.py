"""Deformation density of one scan point, from the stored counterpoise calculations.

Which calculations: at point K of level L, the dimer and the two ghosted monomers
(roles ``dimer``, ``a_dimer_basis``, ``b_dimer_basis``), found by the store keys the
Dataset records (``job_key``). Their SCF density matrices are in the store entries
when the scan ran with ``keep_densities=True`` and a cache. Nothing reruns a scan:
:func:`load_point_densities` says so when the matrices are absent, and
:func:`compute_point_densities` runs the three calculations of that one point.

For correlated levels (MP2, CCSD(T)) the densities are those of the SCF reference.
"""

from __future__ import annotations

import dataclasses
import os
from dataclasses import dataclass

import numpy as np
import xarray as xr

from ..data.schema import spec_of
from ..engine import density as dens
from ..errors import InputError, InterkitError, StoreError
from ..model.job import CP_ROLES, Job
from ..units import ANGSTROM_TO_BOHR
from .store import ResultStore

#: names of the volumes: the three densities and their difference
VOLUME_NAMES = ("dimer", "a_dimer_basis", "b_dimer_basis", "deformation")
VOLUME_LABELS = {"dimer": "dimer density ρ_AB", "a_dimer_basis": "A density ρ_A (dimer basis)",
                 "b_dimer_basis": "B density ρ_B (dimer basis)",
                 "deformation": "deformation density Δρ = ρ_AB − ρ_A − ρ_B"}


class DensitiesNotStoredError(InterkitError, LookupError):
    """The store holds no density matrices for the requested point."""


@dataclass
class PointDensities:
    """The three counterpoise density matrices of one scan point (dimer AO basis).

    Attributes
    ----------
    point : int
        Scan point (0-based, as in the Dataset).
    level : str
    distance_angstrom : float
    mol : pyscf.gto.Mole
        The dimer (every atom real); its AO basis is the basis of every matrix.
    matrices : dict
        Role -> spin-summed AO density matrix (electrons).
    anchors_angstrom : array (2, 3)
        End points of the scan coordinate; the contact runs from the first to the second.
    """

    point: int
    level: str
    distance_angstrom: float
    mol: object
    matrices: dict
    anchors_angstrom: np.ndarray

    @property
    def deformation_matrix(self) -> np.ndarray:
        """D_AB − D_A − D_B (all in the dimer basis)."""
        m = self.matrices
        return m["dimer"] - m["a_dimer_basis"] - m["b_dimer_basis"]

    @property
    def direction(self) -> np.ndarray:
        """Unit vector of the scan direction (from the anchor in A to the one in B)."""
        d = self.anchors_angstrom[1] - self.anchors_angstrom[0]
        return d / np.linalg.norm(d)

    def box(self, spacing_bohr: float = 0.3, margin_bohr: float = 4.0) -> dict:
        """Grid box (bohr) around the dimer, first axis along the scan direction."""
        return dens.contact_box(self.mol.atom_coords(), self.direction, spacing_bohr, margin_bohr)

    def volumes(self, box: dict, names=VOLUME_NAMES) -> dict[str, np.ndarray]:
        """Name -> density on ``box`` (electrons/bohr³); see :data:`VOLUME_NAMES`."""
        mats = [self.deformation_matrix if n == "deformation" else self.matrices[n] for n in names]
        return dict(zip(names, dens.densities_on_box(self.mol, mats, box)))

    def electron_counts(self, grid_level: int = 3) -> dict[str, float]:
        """Integral over all space of each volume (electrons), on a DFT grid."""
        mats = [self.matrices[n] for n in CP_ROLES] + [self.deformation_matrix]
        return dict(zip(VOLUME_NAMES, dens.electron_counts(self.mol, mats, grid_level)))

    def profile(self, spacing_bohr: float = 0.15, margin_bohr: float = 4.0) -> tuple[np.ndarray, np.ndarray]:
        """Δρ integrated over planes perpendicular to the scan direction.

        Returns
        -------
        position_angstrom : array
            Position along the contact, from the scan's anchor in A (angstrom).
        electrons_per_angstrom : array
            Charge gained (> 0) or lost (< 0) per angstrom of the contact.
        """
        box = self.box(spacing_bohr, margin_bohr)
        values = dens.densities_on_box(self.mol, [self.deformation_matrix], box)[0]
        return dens.plane_profile(values, box, self.anchors_angstrom[0] * ANGSTROM_TO_BOHR)


def _level(ds: xr.Dataset, level: str | None) -> str:
    levels = [str(x) for x in ds["level"].values]
    if level is None:
        if len(levels) == 1:
            return levels[0]
        raise InputError(f"level: the scan has {len(levels)} levels ({', '.join(levels)}); name one")
    if level not in levels:
        raise InputError(f"level: {level!r} is not in the scan (levels: {', '.join(levels)})")
    return level


def point_jobs(ds: xr.Dataset, point: int, level: str | None = None) -> dict[str, Job]:
    """The counterpoise calculations (role -> Job) of scan point ``point`` at ``level``."""
    from .plan import plan_scan

    n = int(ds.sizes["distance"])
    if isinstance(point, bool) or not isinstance(point, (int, np.integer)) or not 0 <= int(point) < n:
        raise InputError(f"point: {point!r} is not a point of the scan (0..{n - 1}, numbered from 0)")
    level = _level(ds, level)
    spec = spec_of(ds)
    if not spec.counterpoise:
        raise InputError("point: the scan has no counterpoise calculations (counterpoise=False), "
                         "so there are no dimer-basis monomer densities")
    plan = plan_scan(spec, check=False)
    li = [str(x) for x in ds["level"].values].index(level)   # the Dataset keeps the spec's order
    entry = plan.table[(li, int(point))]
    jobs = {role: plan.jobs[entry[role]] for role in CP_ROLES}
    if "job_key" in ds.variables:   # the Dataset's own keys win: they name what was computed
        saved = ds["job_key"].sel(level=level).isel(distance=int(point))
        for role in CP_ROLES:
            key = str(saved.sel(role=role).values)
            if key and key != jobs[role].key:
                raise InputError(f"point: the calculation {role} of point {point} does not rebuild to its "
                                 "recorded store key (other interkit or pyscf version?)")
    return jobs


def _assemble(ds, point, level, jobs, matrices) -> PointDensities:
    from ..engine.molecule import build_molecule

    mol = build_molecule(jobs["dimer"])
    if "anchors" in ds.variables:
        anchors = np.asarray(ds["anchors"].values[int(point)], dtype=float)
    else:   # the fragments' centroids
        xyz = np.asarray(ds["coordinates"].values[int(point)], dtype=float)
        frag = np.asarray(ds["fragment"].values).astype(str)
        anchors = np.array([xyz[frag == "A"].mean(axis=0), xyz[frag == "B"].mean(axis=0)])
    return PointDensities(int(point), level, float(ds["distance"].values[int(point)]), mol,
                          {r: dens.total_density_matrix(m) for r, m in matrices.items()}, anchors)


def load_point_densities(ds: xr.Dataset, point: int, level: str | None = None,
                         cache: str | os.PathLike | None = None) -> PointDensities:
    """The stored density matrices of one point; nothing is computed.

    Raises
    ------
    DensitiesNotStoredError
        When the store lacks them; the message names :func:`compute_point_densities`,
        which runs the three calculations of that point only.
    """
    level = _level(ds, level)
    jobs = point_jobs(ds, point, level)
    hint = (f"compute them for this point only (3 calculations) with "
            f"interkit.compute_point_densities(ds, {int(point)}, level={level!r}, cache=...), or run "
            "the scan with keep_densities=True and a cache")
    if cache is None:
        raise DensitiesNotStoredError(f"cache: no store given, so no stored densities of point {point}; {hint}")
    try:
        store = ResultStore(cache, create=False)
    except StoreError as exc:  # no store there: nothing was stored
        raise DensitiesNotStoredError(f"cache: {exc}; no stored densities of point {point}; {hint}") from None
    matrices = {}
    for role, job in jobs.items():
        record = store.get(job.key)
        if record is None or "density_matrix" not in record:
            raise DensitiesNotStoredError(f"point {point}: the store {os.fspath(cache)!r} has no density "
                                          f"matrix for {role}; {hint}")
        matrices[role] = dens.decode_matrix(record["density_matrix"])
    return _assemble(ds, point, level, jobs, matrices)


def compute_point_densities(ds: xr.Dataset, point: int, level: str | None = None,
                            cache: str | os.PathLike | None = None) -> PointDensities:
    """Run the three counterpoise calculations of one point (only those whose density is
    not stored) and return their density matrices.

    With a ``cache``, each density matrix is added to its store entry: an existing
    entry keeps its recorded numbers and gains the ``density_matrix`` field; a missing
    entry is written whole. Size: nao² × 8 bytes per calculation (× 4/3 as base64).
    """
    from ..engine.energy import run_energy_job

    level = _level(ds, level)
    jobs = point_jobs(ds, point, level)
    store = ResultStore(cache) if cache is not None else None
    matrices = {}
    for role, job in jobs.items():
        stored = store.get(job.key) if store is not None else None
        if stored is not None and "density_matrix" in stored:
            matrices[role] = dens.decode_matrix(stored["density_matrix"])
            continue
        record, _ = run_energy_job(dataclasses.replace(job, keep_density=True))
        if record["status"] == "failed":
            raise InterkitError(f"point {point}: the {role} calculation failed ({record['detail']})")
        matrices[role] = dens.decode_matrix(record["density_matrix"])
        if store is not None:
            if stored is not None:   # the recorded numbers stay as they were
                record = dict(stored, density_matrix=record["density_matrix"])
            store.put(job.key, dict(record, role=role), job.describe())
    return _assemble(ds, point, level, jobs, matrices)
