"""Orientation coordinates without calculations: rotations and offsets keep both monomers
rigid and set their values exactly, grids apply the first axis then the second, orientation
samples are reproducible and spread over all rotations, and bad input is one line.

Geometry: the S22 water dimer from ase.data.s22 (Jurečka et al., PCCP 8, 1985 (2006)).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from conftest import s22_dimer

import interkit as ik
from interkit.model.orientation_sampling import quaternion_matrix, shoemake_quaternions

RIGID = 1e-10   # angstrom: the bound on internal distances


def _internal(coords, idx):
    c = np.asarray(coords)[list(idx)]
    return np.linalg.norm(c[:, None] - c[None], axis=-1)


def _assert_rigid(start: ik.Dimer, moved: ik.Dimer):
    # fragment A never moves; both monomers keep every internal distance
    assert np.array_equal(moved.coordinates[list(start.fragment_a)], start.coordinates[list(start.fragment_a)])
    for idx in (start.fragment_a, start.fragment_b):
        assert np.abs(_internal(moved.coordinates, idx) - _internal(start.coordinates, idx)).max() < RIGID


def _signed_angle_deg(v0, v1, n):
    """Angle (degree, right hand about n) that turns v0 into v1, both projected normal to n."""
    p0, p1 = v0 - (v0 @ n) * n, v1 - (v1 @ n) * n
    return np.degrees(np.arctan2(np.cross(p0, p1) @ n, p0 @ p1))


@pytest.fixture
def water():
    return s22_dimer("Water_dimer")


@pytest.mark.parametrize("axis,centre", [((0.3, -0.5, 0.8), "com-b"), ((3, 4), 3), ((1.0, 0.0, 0.0), (1, 3))])
def test_rotation_keeps_monomers_rigid_and_sets_the_angle(water, axis, centre):
    angles = [-40.0, 0.0, 25.0, 90.0]
    grid = ik.OrientationGrid(water, ik.Rotation(axis, angles, centre=centre))
    rot = grid.axes[0]
    n = rot.axis_vector(water)
    pivot = rot.pivot(water)
    b = list(water.fragment_b)
    for angle, moved in zip(angles, grid.dimers()):
        _assert_rigid(water, moved)
        # measured from the geometry: every B atom turned by the angle about the axis through the pivot
        for k in b:
            v0, v1 = water.coordinates[k] - pivot, moved.coordinates[k] - pivot
            assert abs(np.linalg.norm(v1) - np.linalg.norm(v0)) < RIGID
            assert abs(v1 @ n - v0 @ n) < RIGID      # no motion along the axis
            if np.linalg.norm(v0 - (v0 @ n) * n) > 0.1:
                assert _signed_angle_deg(v0, v1, n) == pytest.approx(angle, abs=1e-9)


def test_offset_slides_in_the_plane_and_sets_the_value(water):
    normal, toward = np.array([0.0, 0.0, 1.0]), np.array([1.0, 0.5, 0.3])
    shifts = [-1.0, 0.0, 0.75, 2.0]
    grid = ik.OrientationGrid(water, ik.Offset(normal, shifts, toward))
    u = toward - (toward @ normal) * normal
    u /= np.linalg.norm(u)
    sep0 = water.centre_of_mass("B") - water.centre_of_mass("A")
    for s, moved in zip(shifts, grid.dimers()):
        _assert_rigid(water, moved)
        sep = moved.centre_of_mass("B") - moved.centre_of_mass("A")
        assert sep @ u == pytest.approx(s, abs=1e-12)
        assert sep @ normal == pytest.approx(sep0 @ normal, abs=1e-12)   # stacking distance kept
        # B only translated: every B atom moved by the same vector
        d = moved.coordinates[list(water.fragment_b)] - water.coordinates[list(water.fragment_b)]
        assert np.abs(d - d[0]).max() < 1e-12


def test_grid_applies_first_axis_then_second(water):
    rot = ik.Rotation((0, 0, 1), [0.0, 30.0])
    sep = ik.Separation([2.9, 3.2])
    grid = ik.OrientationGrid(water, [rot, sep])
    assert grid.shape == (2, 2) and grid.names == ("angle", "distance")
    for p, (i, j) in enumerate(np.ndindex(2, 2)):
        expected = sep.place(rot.place(water, i), j)
        assert np.array_equal(grid.dimers()[p].coordinates, expected.coordinates)
        d = grid.dimers()[p]
        assert np.linalg.norm(d.centre_of_mass("B") - d.centre_of_mass("A")) == pytest.approx([2.9, 3.2][j], abs=1e-12)
        _assert_rigid(water, d)
    again = ik.OrientationGrid.from_dict(json.loads(json.dumps(grid.to_dict())))
    assert all(np.array_equal(a.coordinates, b.coordinates) for a, b in zip(again.dimers(), grid.dimers()))


def test_orientation_sample_is_reproducible_and_evenly_spread(water):
    one = ik.OrientationSample(256, seed=11)
    two = ik.OrientationSample(256, seed=11)
    other = ik.OrientationSample(256, seed=12)
    assert np.array_equal(one.quaternions, two.quaternions)
    assert not np.allclose(one.quaternions, other.quaternions)
    assert np.allclose(np.linalg.norm(one.quaternions, axis=1), 1.0, atol=1e-14)
    mats = np.stack([quaternion_matrix(q) for q in one.quaternions])
    # the matrix of a unit quaternion is a proper rotation
    assert np.allclose(np.einsum("nij,nkj->nik", mats, mats), np.eye(3), atol=1e-13)
    assert np.allclose(np.linalg.det(mats), 1.0, atol=1e-13)
    # Haar-uniform rotations (common practice, recalled from memory): E[R] = 0, E[R_ij^2] = 1/3.
    # Independent draws give |mean R|_F ~ sqrt(3/N) = 0.11 for N = 256; Sobol' points do better.
    assert np.sqrt((mats.mean(axis=0) ** 2).sum()) < 0.05
    assert np.abs((mats ** 2).mean(axis=0) - 1 / 3).max() < 0.03
    rand = ik.OrientationSample(4096, seed=3, method="random")
    mats = np.stack([quaternion_matrix(q) for q in rand.quaternions])
    assert np.sqrt((mats.mean(axis=0) ** 2).sum()) < 5 * np.sqrt(3 / 4096)
    # B turned about its own centre of mass, rigidly
    grid = ik.OrientationGrid(water, [ik.Separation([3.0]), ik.OrientationSample(16, seed=5)])
    for d in grid.dimers():
        _assert_rigid(water, d)
        assert np.linalg.norm(d.centre_of_mass("B") - d.centre_of_mass("A")) == pytest.approx(3.0, abs=1e-12)


def test_shoemake_map_is_the_published_formula():
    # Shoemake, Graphics Gems III (1992), p. 129 (recalled from memory): u = (0, 0, 0) -> (0, 1, 0, 0)
    # (x, y, z, w) and u1 = 1, u3 = 1/4 -> w = cos(pi/2) = 0, z = 1
    q = shoemake_quaternions(np.array([[0.0, 0.0, 0.0], [1.0, 0.0, 0.25]]))
    assert np.allclose(q[0], [0.0, 1.0, 0.0, 0.0]) and np.allclose(q[1], [0.0, 0.0, 1.0, 0.0])


BAD = [
    (lambda d: ik.Rotation((0, 0, 0), [10]), "rotation axis: [0, 0, 0] is a zero vector"),
    (lambda d: ik.Rotation((0, 0, 1), []), "rotation angles_deg: no values"),
    (lambda d: ik.Rotation((0, 0, 1), [10, "x"]), "rotation angles_deg[1]"),
    (lambda d: ik.Rotation((0, 0, 1), [0, 360]), "differ by a whole turn"),
    (lambda d: ik.Rotation((2, 2), [10]), "rotation axis: atoms 2 and 2 are the same atom"),
    (lambda d: ik.OrientationGrid(d, ik.Rotation((0, 9), [10])), "rotation axis: atom index 9 is outside 0..5"),
    (lambda d: ik.OrientationGrid(d, ik.Rotation((0, 0, 1), [10], centre=7)), "rotation centre: atom index 7"),
    (lambda d: ik.OrientationGrid(d, ik.Rotation((0, 0, 1), [10], centre=(0, 1))),
     "rotation centre: atoms 0 and 1 are both in fragment A"),
    (lambda d: ik.Rotation((0, 0, 1), [10], centre="middle"), "rotation centre: 'middle'"),
    (lambda d: ik.Offset((0, 0, 1), [0.5], (0, 0, 2)), "offset toward: the direction is parallel"),
    (lambda d: ik.Separation([3.0, -1.0]), "separation distances_angstrom[1]"),
    (lambda d: ik.OrientationSample(0, 1), "sampling count: 0"),
    (lambda d: ik.OrientationSample(8, 1, method="grid"), "sampling method: 'grid'"),
    (lambda d: ik.OrientationGrid(d, [ik.Separation([3.0]), ik.Separation([3.1])]), "both axes are named 'distance'"),
    (lambda d: ik.OrientationGrid(d, [ik.Separation([3.0])] * 3), "axes: 3 axes given"),
    (lambda d: ik.OrientationGrid(d, ik.Separation([1.0])), "below the safe minimum"),
    (lambda d: ik.OrientationGrid(d, ik.Separation([3.0])).scan_spec(distances=[1.0]), "distances: an orientation"),
]


@pytest.mark.parametrize("make,message", BAD, ids=[m for _, m in BAD])
def test_bad_orientation_input_is_one_line(water, make, message):
    with pytest.raises(ik.InputError) as info:
        make(water)
    text = str(info.value)
    assert message in text and "\n" not in text
