"""Rigid-body optimisation of a dimer: the counterpoise-corrected minimum of B relative to A.

Fragment A stays fixed; B moves rigidly in six coordinates, three translations (Å) and
a rotation vector (rad) about B's centre of mass. The gradient is minus the net force
on B and minus the torque on B about its centre of mass, from a ``forces=True`` scan of
one geometry: every evaluation runs through :func:`interkit.run_scan`, so it is kept in
the result store and a killed optimisation, started again with the same arguments,
repeats the same steps from the store without computing them again.

Method: quasi-Newton (BFGS update of a model Hessian) with a trust radius, in the
coordinates ``q = (t, w L)``: ``t`` the translation of B (Å), ``w`` the rotation vector
of B about its starting centre of mass (rad), ``L`` the root-mean-square distance of
B's atoms from its centre of mass (at least 0.5 Å), so a rotation moves atoms about as
far as a translation of the same length. The gradient in ``w`` is ``-J(w)^T tau`` with
``J`` the left Jacobian of the rotation vector (:func:`interkit.model.rigid.left_jacobian`).
The model Hessian (:func:`model_hessian`) has a spring along every A-B contact,
weighted towards the closest; after the first step it is scaled down to the curvature
measured along that step (``s.y / s.H.s``, cf. Nocedal & Wright, Numerical Optimization,
2nd ed., sec. 6.1) when that is softer, never up (a first step down a repulsive wall
would stiffen the soft turning modes too). A step is accepted when the energy does not rise by more than
``ENERGY_NOISE_KCAL_PER_MOL``.

Converged when, at an accepted geometry, the net force on B is shorter than
``force_tol`` (default 0.02 kcal/mol/Å, 1.7e-5 hartree/bohr), the torque shorter than
``torque_tol`` (default 0.02 kcal/mol per radian) and the quasi-Newton model predicts
that the next step would lower the energy by less than ``energy_tol`` (default 1e-4
kcal/mol): the predicted energy change of the step not taken.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass

import numpy as np
import xarray as xr

from ..data.rigid_trajectory import build_trajectory
from ..errors import InputError, NotAvailableError
from ..model.coordinates import Frames
from ..model.geometry import Dimer
from ..model.job import force_method
from ..model.levels import LevelOfTheory, parse_level
from ..model.rigid import left_jacobian, moved_b
from ..model.spec import DEFAULT_SCF_THRESHOLD_HARTREE, ScanSpec
from ..version import __version__
from .scan import run_scan
from .store import DEFAULT_STORE

DEFAULT_ENERGY_TOL_KCAL_PER_MOL = 1e-4
DEFAULT_FORCE_TOL_KCAL_PER_MOL_PER_ANGSTROM = 0.02
DEFAULT_TORQUE_TOL_KCAL_PER_MOL = 0.02
#: model force constant of the first step (kcal/mol/Å² in the scaled coordinates)
MODEL_FORCE_CONSTANT = 10.0
#: decay length of the contact weights of the model Hessian (Å)
CONTACT_DECAY_ANGSTROM = 0.5
#: an energy rise below this (kcal/mol) is numerical noise: the step is accepted
ENERGY_NOISE_KCAL_PER_MOL = 1e-6
DEFAULT_TRUST_RADIUS_ANGSTROM = 0.3
MAX_TRUST_RADIUS_ANGSTROM = 0.5
MIN_TRUST_RADIUS_ANGSTROM = 1e-4


@dataclass
class Evaluation:
    """Energy and gradient of one geometry (kcal/mol; kcal/mol/Å; kcal/mol per rad)."""

    e_int: float
    force: np.ndarray
    torque: np.ndarray
    computed: int
    from_store: int


class RigidBodyEnergy:
    """Counterpoise-corrected E_int, net force and torque on B of one geometry, through
    the normal job machinery (one ``forces=True`` scan of one frame per call).

    ``evaluations`` counts the calls, ``computed`` the calculations that ran (not read
    from the store).
    """

    def __init__(self, level: str | LevelOfTheory, cache=DEFAULT_STORE, executor="serial",
                 workers: int | None = None, scf_threshold_hartree: float = DEFAULT_SCF_THRESHOLD_HARTREE):
        self.level = parse_level(level)
        if force_method(self.level) == "numerical":
            raise NotAvailableError(f"level: {self.level.label!r} has no analytic gradient here; the rigid-body "
                                    "optimiser needs forces and torques (HF, DFT or MP2 levels)")
        self.cache, self.executor, self.workers = cache, executor, workers
        self.scf_threshold_hartree = scf_threshold_hartree
        self.evaluations = 0
        self.computed = 0

    def __call__(self, dimer: Dimer) -> Evaluation:
        spec = ScanSpec(dimer=dimer, coordinate=Frames([dimer]), levels=[self.level], forces=True,
                        counterpoise=True, scf_threshold_hartree=self.scf_threshold_hartree,
                        name=dimer.name)
        ds = run_scan(spec, executor=self.executor, cache=self.cache, progress=False, workers=self.workers)
        self.evaluations += 1
        self.computed += int(ds.attrs["calculations_computed"])
        if not bool(ds["converged"].values[0, 0]):
            from ..errors import ConvergenceError

            raise ConvergenceError(f"optimisation: the calculation at step {self.evaluations - 1} failed "
                                   f"({str(ds['status'].values[0, 0])}); the steps so far are in the store")
        return Evaluation(float(ds["e_int"].values[0, 0]),
                          np.array(ds["fragment_force"].values[0, 0, 1], dtype=float),
                          np.array(ds["fragment_torque"].values[0, 0, 1], dtype=float),
                          int(ds.attrs["calculations_computed"]), int(ds.attrs["calculations_from_store"]))


@dataclass
class RigidBodyOptimum:
    """Result of :func:`optimise_dimer`.

    Attributes
    ----------
    dimer : Dimer
        The last accepted geometry (the optimum when ``converged``).
    e_int_kcal_per_mol : float
        Its counterpoise-corrected interaction energy.
    converged : bool
        All three thresholds met.
    evaluations : int
        Geometries whose energy and forces were evaluated (rejected trial steps included).
    trajectory : xarray.Dataset
        Every evaluation (see :mod:`interkit.data.rigid_trajectory`).
    """

    dimer: Dimer
    e_int_kcal_per_mol: float
    converged: bool
    evaluations: int
    trajectory: xr.Dataset


def rotation_length(dimer: Dimer) -> float:
    """``L`` (Å): root-mean-square distance of B's atoms from its centre of mass, at least 0.5."""
    idx = list(dimer.fragment_b)
    arm = dimer.coordinates[idx] - dimer.centre_of_mass("B")
    return max(0.5, float(np.sqrt((arm**2).sum(axis=1).mean())))


def model_hessian(dimer: Dimer, length: float) -> np.ndarray:
    """Model Hessian (kcal/mol/Å², scaled coordinates) of the first step: a spring of
    weight ``exp(-(r - r_min) / CONTACT_DECAY_ANGSTROM)`` along every A-B atom pair
    (``r_min`` the closest contact), projected on B's rigid-body coordinates, scaled to
    ``MODEL_FORCE_CONSTANT``, plus a tenth of that on the diagonal (sliding, turning)."""
    a, b = list(dimer.fragment_a), list(dimer.fragment_b)
    xa, xb = dimer.coordinates[a], dimer.coordinates[b]
    arm = xb - dimer.centre_of_mass("B")
    diff = xb[None, :, :] - xa[:, None, :]
    r = np.linalg.norm(diff, axis=2)
    w = np.exp(-(r - r.min()) / CONTACT_DECAY_ANGSTROM)
    u = diff / r[..., None]
    rows = np.concatenate([u, np.cross(np.broadcast_to(arm, u.shape), u) / length], axis=2).reshape(-1, 6)
    h = (rows * w.reshape(-1, 1)).T @ rows / w.sum()
    return MODEL_FORCE_CONSTANT * (h + 0.1 * np.eye(6))


def _trust_step(g: np.ndarray, h: np.ndarray, radius: float) -> np.ndarray:
    """Minimiser of ``g.p + p.H.p/2`` with ``|p| <= radius`` (H symmetric positive definite)."""
    vals, vecs = np.linalg.eigh(h)
    gt = vecs.T @ g
    p = -gt / vals
    if np.linalg.norm(p) <= radius:
        return vecs @ p
    lo, hi = 0.0, np.linalg.norm(g) / radius + abs(vals.min())
    for _ in range(100):  # |p(lam)| falls monotonically with lam
        lam = 0.5 * (lo + hi)
        if np.linalg.norm(gt / (vals + lam)) > radius:
            lo = lam
        else:
            hi = lam
    return vecs @ (-gt / (vals + hi))


def _positive(value, name: str) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        x = float("nan")
    if isinstance(value, bool) or not np.isfinite(x) or x <= 0:
        raise InputError(f"{name}: {value!r} is not a positive number")
    return x


def optimise_dimer(dimer: Dimer, level: str | LevelOfTheory, *, max_steps: int = 60,
                   energy_tol_kcal_per_mol: float = DEFAULT_ENERGY_TOL_KCAL_PER_MOL,
                   force_tol_kcal_per_mol_per_angstrom: float = DEFAULT_FORCE_TOL_KCAL_PER_MOL_PER_ANGSTROM,
                   torque_tol_kcal_per_mol: float = DEFAULT_TORQUE_TOL_KCAL_PER_MOL,
                   trust_radius_angstrom: float = DEFAULT_TRUST_RADIUS_ANGSTROM,
                   cache: str | os.PathLike | None = DEFAULT_STORE, executor="serial",
                   workers: int | None = None,
                   scf_threshold_hartree: float = DEFAULT_SCF_THRESHOLD_HARTREE,
                   energy: RigidBodyEnergy | None = None) -> RigidBodyOptimum:
    """Counterpoise-corrected rigid-body minimum of B relative to A at ``level``.

    Parameters
    ----------
    dimer : Dimer
        Start geometry; A stays fixed, both monomers stay rigid.
    level : str or LevelOfTheory
        A level with analytic forces (HF, DFT with or without dispersion, MP2).
    max_steps : int
        At most this many evaluations; then the result has ``converged=False``.
    energy_tol_kcal_per_mol, force_tol_kcal_per_mol_per_angstrom, torque_tol_kcal_per_mol : float
        Convergence thresholds (see the module text): predicted energy change of the
        next step (kcal/mol), length of the net force on B (kcal/mol/Å), length of
        the torque on B about its centre of mass (kcal/mol per radian).
    trust_radius_angstrom : float
        First trust radius (Å; rotations scaled by :func:`rotation_length`).
    cache, executor, workers, scf_threshold_hartree
        As in :func:`interkit.run_scan`, for every evaluation.
    energy : RigidBodyEnergy, optional
        A prepared energy function (its counters keep running); else one is made.

    Returns
    -------
    RigidBodyOptimum

    Raises
    ------
    Exception
        An error or interrupt during the run carries the steps so far as
        ``exc.trajectory`` (besides the copies in the store).
    """
    if not isinstance(dimer, Dimer):
        raise InputError(f"dimer: expected an interkit.Dimer, got {type(dimer).__name__}")
    if isinstance(max_steps, bool) or not isinstance(max_steps, (int, np.integer)) or max_steps < 1:
        raise InputError(f"max_steps: {max_steps!r} is not a positive integer")
    e_tol = _positive(energy_tol_kcal_per_mol, "energy_tol_kcal_per_mol")
    f_tol = _positive(force_tol_kcal_per_mol_per_angstrom, "force_tol_kcal_per_mol_per_angstrom")
    t_tol = _positive(torque_tol_kcal_per_mol, "torque_tol_kcal_per_mol")
    radius = _positive(trust_radius_angstrom, "trust_radius_angstrom")
    fn = energy or RigidBodyEnergy(level, cache, executor, workers, scf_threshold_hartree)
    length = rotation_length(dimer)
    steps: list[dict] = []

    def evaluate(q: np.ndarray, accepted: bool) -> tuple[Evaluation, np.ndarray]:
        d = moved_b(dimer, q[:3], q[3:] / length)
        ev = fn(d)
        steps.append({"e_int": ev.e_int, "force": ev.force, "torque": ev.torque, "accepted": accepted,
                      "trust_radius": radius, "coordinates": np.array(d.coordinates)})
        return ev, np.concatenate([-ev.force, -left_jacobian(q[3:] / length).T @ ev.torque / length])

    def attrs(converged: bool) -> dict:
        return {
            "title": f"rigid-body optimisation: {dimer.name}",
            "level": fn.level.label,
            "level_settings_json": json.dumps(fn.level.settings(), sort_keys=True, default=str),
            "counterpoise": "Boys-Bernardi",
            "method": "quasi-Newton (BFGS) with a trust radius in B's translation and rotation about its "
                      "centre of mass; monomers rigid, A fixed",
            "converged": converged,
            "evaluations": len(steps),
            "calculations_computed": fn.computed,
            "energy_tol_kcal_per_mol": e_tol,
            "force_tol_kcal_per_mol_per_angstrom": f_tol,
            "torque_tol_kcal_per_mol": t_tol,
            "rotation_length_angstrom": length,
            "scf_threshold_hartree": float(fn.scf_threshold_hartree),
            "interkit_version": __version__,
        }

    try:
        q = np.zeros(6)
        ev, g = evaluate(q, True)
        h = model_hessian(dimer, length)
        updated = False
        converged = False
        while True:
            p = _trust_step(g, h, radius)
            predicted = float(g @ p + 0.5 * p @ h @ p)
            if (np.linalg.norm(ev.force) <= f_tol and np.linalg.norm(ev.torque) <= t_tol
                    and -predicted <= e_tol):
                converged = True
                break
            if len(steps) >= max_steps or radius < MIN_TRUST_RADIUS_ANGSTROM:
                break
            try:
                from ..model.spec import check_contacts

                check_contacts(moved_b(dimer, (q + p)[:3], (q + p)[3:] / length), "optimisation step")
            except InputError:  # too close: a shorter step instead
                radius = 0.25 * float(np.linalg.norm(p))
                continue
            ev_new, g_new = evaluate(q + p, False)
            actual = ev_new.e_int - ev.e_int
            ratio = actual / predicted if predicted < 0 else -1.0
            step_len = float(np.linalg.norm(p))
            if ratio < 0.25:
                radius = 0.25 * step_len
            elif ratio > 0.75 and step_len > 0.8 * radius:
                radius = min(2.0 * radius, MAX_TRUST_RADIUS_ANGSTROM)
            accept = actual <= ENERGY_NOISE_KCAL_PER_MOL
            s, y = p, g_new - g   # from the old point to the trial point, accepted or not
            sy = float(s @ y)
            if sy > 1e-12 * float(np.linalg.norm(s) * np.linalg.norm(y)):  # keeps H positive definite
                if not updated:  # the model's scale, fitted to the curvature along the first step
                    fac = sy / float(s @ h @ s)
                    h = h * min(fac, 1.0)
                    updated = True
                hs = h @ s
                h = h + np.outer(y, y) / sy - np.outer(hs, hs) / float(s @ hs)
            if accept:
                steps[-1]["accepted"] = True
                q, ev, g = q + p, ev_new, g_new
    except BaseException as exc:  # the steps so far are in the store, and on the exception
        if steps:
            try:
                exc.trajectory = build_trajectory(steps, dimer, attrs(False))
            except Exception:
                pass
        raise
    traj = build_trajectory(steps, dimer, attrs(converged))
    return RigidBodyOptimum(moved_b(dimer, q[:3], q[3:] / length), ev.e_int, converged, len(steps), traj)
