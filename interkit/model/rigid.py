"""Rigid-body moves of fragment B: rotation vectors, rotations about B's centre of mass.

A rotation vector ``w`` (radians) turns by ``|w|`` about the axis ``w/|w|``
(right-handed). ``moved_b(dimer, shift, w)`` first turns B about its centre of mass,
then translates it by ``shift`` (angstrom); fragment A never moves.
"""

from __future__ import annotations

import numpy as np

from .geometry import Dimer


def _skew(w: np.ndarray) -> np.ndarray:
    return np.array([[0.0, -w[2], w[1]], [w[2], 0.0, -w[0]], [-w[1], w[0], 0.0]])


def rotation_matrix(w) -> np.ndarray:
    """Rotation matrix of the rotation vector ``w`` (radians), Rodrigues' formula."""
    w = np.asarray(w, dtype=float).reshape(3)
    phi = float(np.linalg.norm(w))
    k = _skew(w)
    if phi < 1e-8:  # series to second order
        return np.eye(3) + k + 0.5 * k @ k
    return np.eye(3) + np.sin(phi) / phi * k + (1.0 - np.cos(phi)) / phi**2 * k @ k


def left_jacobian(w) -> np.ndarray:
    """``J`` with ``R(w + dw) = R(J dw) R(w)`` to first order (the left Jacobian of SO(3)).

    The gradient of an energy in the rotation vector is ``-J.T @ torque`` when the
    torque is taken about the centre the rotation turns about.
    """
    w = np.asarray(w, dtype=float).reshape(3)
    phi = float(np.linalg.norm(w))
    k = _skew(w)
    if phi < 1e-6:
        return np.eye(3) + 0.5 * k + k @ k / 6.0
    return (np.eye(3) + (1.0 - np.cos(phi)) / phi**2 * k
            + (phi - np.sin(phi)) / phi**3 * k @ k)


def moved_b(dimer: Dimer, shift=(0.0, 0.0, 0.0), rotation=(0.0, 0.0, 0.0)) -> Dimer:
    """``dimer`` with fragment B turned by the rotation vector ``rotation`` (radians)
    about its centre of mass, then translated by ``shift`` (angstrom)."""
    coords = np.array(dimer.coordinates, dtype=float)
    idx = list(dimer.fragment_b)
    com = dimer.centre_of_mass("B")
    rot = rotation_matrix(rotation)
    coords[idx] = com + np.asarray(shift, dtype=float) + (coords[idx] - com) @ rot.T
    return dimer.with_coordinates(coords)


def rotation_between(before: np.ndarray, after: np.ndarray) -> np.ndarray:
    """Rotation vector (radians) of the best rigid fit of the centred points ``before``
    onto the centred points ``after`` (Kabsch)."""
    h = before.T @ after
    u, _, vt = np.linalg.svd(h)
    d = np.sign(np.linalg.det(vt.T @ u.T)) or 1.0
    rot = vt.T @ np.diag([1.0, 1.0, d]) @ u.T
    angle = float(np.arccos(np.clip((np.trace(rot) - 1.0) / 2.0, -1.0, 1.0)))
    if angle < 1e-12:
        return np.zeros(3)
    axis = np.array([rot[2, 1] - rot[1, 2], rot[0, 2] - rot[2, 0], rot[1, 0] - rot[0, 1]])
    n = np.linalg.norm(axis)
    if n < 1e-12:  # 180 degrees: the axis is the eigenvector of eigenvalue 1
        vals, vecs = np.linalg.eigh((rot + rot.T) / 2)
        axis = vecs[:, int(np.argmax(vals))]
        n = 1.0
    return angle * axis / n
