"""Orientations of B spread evenly over all rotations, reproducible from a seed.

Method: three numbers ``u1, u2, u3`` in [0, 1) per sample are mapped to a unit quaternion
by Shoemake's construction (K. Shoemake, "Uniform random rotations", in Graphics Gems
III, ed. D. Kirk, Academic Press, 1992, pp. 124-132)::

    q = (sqrt(1 - u1) sin 2 pi u2, sqrt(1 - u1) cos 2 pi u2, sqrt(u1) sin 2 pi u3, sqrt(u1) cos 2 pi u3)

which is uniform over the rotation group (Haar measure) when the ``u`` are uniform.
``method='sobol'`` (default) takes the ``u`` from a scrambled Sobol' low-discrepancy
sequence (I. M. Sobol', USSR Comput. Math. Math. Phys. 7, 86 (1967); scrambling of
scipy.stats.qmc.Sobol, seeded), which covers the group more evenly than independent
draws for the same count; ``method='random'`` draws them independently from numpy's
PCG64 generator. The quaternions are stored with the Dataset (scalar last: x, y, z, w,
as scipy.spatial.transform.Rotation), so a sample never depends on recomputing them.
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from ..errors import InputError
from .geometry import Dimer
from .grid_axis import GridAxis, _name, with_b_coordinates

SAMPLING_METHODS = ("sobol", "random")


def shoemake_quaternions(u: np.ndarray) -> np.ndarray:
    """Unit quaternions (n, 4), scalar last, from points ``u`` (n, 3) in [0, 1)^3."""
    u = np.asarray(u, dtype=float)
    a, b = np.sqrt(1.0 - u[:, 0]), np.sqrt(u[:, 0])
    t2, t3 = 2 * np.pi * u[:, 1], 2 * np.pi * u[:, 2]
    return np.stack([a * np.sin(t2), a * np.cos(t2), b * np.sin(t3), b * np.cos(t3)], axis=1)


def sample_quaternions(count: int, seed: int, method: str = "sobol") -> np.ndarray:
    """``count`` unit quaternions (scalar last) spread over all rotations (see the module)."""
    if method == "sobol":
        from scipy.stats import qmc

        with warnings.catch_warnings():  # counts other than powers of two are fine here
            warnings.simplefilter("ignore", UserWarning)
            u = qmc.Sobol(d=3, scramble=True, seed=seed).random(count)
    else:
        u = np.random.default_rng(seed).random((count, 3))
    q = shoemake_quaternions(u)
    return q / np.linalg.norm(q, axis=1, keepdims=True)


def quaternion_matrix(q: np.ndarray) -> np.ndarray:
    """Rotation matrix of the unit quaternion ``q = (x, y, z, w)``."""
    x, y, z, w = q
    return np.array([
        [1 - 2 * (y * y + z * z), 2 * (x * y - z * w), 2 * (x * z + y * w)],
        [2 * (x * y + z * w), 1 - 2 * (x * x + z * z), 2 * (y * z - x * w)],
        [2 * (x * z - y * w), 2 * (y * z + x * w), 1 - 2 * (x * x + y * y)],
    ])


class OrientationSample(GridAxis):
    """B turned about its own centre of mass into ``count`` orientations spread evenly over
    all rotations (relative to the geometry the axis is applied to).

    Parameters
    ----------
    count : int
        Number of orientations (1 to 100000).
    seed : int
        Seed of the sequence; the same seed gives the same orientations.
    method : {'sobol', 'random'}
        Scrambled Sobol' points or independent uniform draws, both mapped to quaternions by
        Shoemake's construction (see :mod:`interkit.model.orientation_sampling`).
    name : str
        Dimension name (default ``'orientation'``; values are the sample numbers).
    quaternions : array (count, 4), optional
        The stored quaternions of a saved sample (reading a Dataset back), used instead
        of regenerating them from the seed.
    """

    kind = "sampling"
    units = "1"

    def __init__(self, count: int, seed: int, method: str = "sobol", name: str | None = None,
                 quaternions=None):
        if isinstance(count, bool) or not isinstance(count, (int, np.integer)) or not 1 <= count <= 100000:
            raise InputError(f"sampling count: {count!r} is not a whole number from 1 to 100000")
        if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
            raise InputError(f"sampling seed: {seed!r} is not a non-negative whole number")
        if not isinstance(method, str) or method.strip().lower() not in SAMPLING_METHODS:
            raise InputError(f"sampling method: {method!r} is not one of {', '.join(SAMPLING_METHODS)}")
        self.count, self.seed, self.method = int(count), int(seed), method.strip().lower()
        self.name = _name(name, "orientation")
        self.values = tuple(range(self.count))
        if quaternions is None:
            self.quaternions = sample_quaternions(self.count, self.seed, self.method)
        else:
            q = np.array(quaternions, dtype=float)
            if q.shape != (self.count, 4) or not np.allclose(np.linalg.norm(q, axis=1), 1.0, atol=1e-12):
                raise InputError(f"sampling quaternions: expected {self.count} unit quaternions, got shape {q.shape}")
            self.quaternions = q
        self.quaternions.setflags(write=False)

    def place(self, dimer: Dimer, k: int) -> Dimer:
        rot = quaternion_matrix(self.quaternions[k])
        c = dimer.centre_of_mass("B")
        b = dimer.coordinates[list(dimer.fragment_b)]
        return with_b_coordinates(dimer, (b - c) @ rot.T + c)

    def label(self, k: int) -> str:
        return f"{self.name} = {k}"

    def describe(self) -> str:
        ref = "Shoemake 1992" + (", scrambled Sobol' points" if self.method == "sobol" else ", uniform draws")
        return f"orientation of B about its centre of mass ({ref}, seed {self.seed})"

    def extra_coordinates(self) -> dict:
        return {"quaternion": ((self.name, "quaternion_component"), np.array(self.quaternions),
                               {"units": "1", "long_name": "unit quaternion of B's rotation from the start "
                                "geometry (scalar last: x, y, z, w)"})}

    def to_dict(self) -> dict:
        return {"kind": self.kind, "count": self.count, "seed": self.seed, "method": self.method,
                "name": self.name, "quaternions": [[float(x) for x in q] for q in self.quaternions]}

    def __eq__(self, other):
        return isinstance(other, OrientationSample) and (self.count, self.seed, self.method, self.name) == (
            other.count, other.seed, other.method, other.name) and np.array_equal(self.quaternions, other.quaternions)

    __hash__ = None  # type: ignore[assignment]


def mean_rotation_norm(quaternions: np.ndarray) -> float:
    """Frobenius norm of the mean rotation matrix (0 for a set uniform over all rotations)."""
    mats = np.stack([quaternion_matrix(q) for q in quaternions])
    return float(math.sqrt((mats.mean(axis=0) ** 2).sum()))
