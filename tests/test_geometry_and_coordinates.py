"""Geometry reading, fragment detection and the scan coordinates' displacement rules."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import s22_dimer

import interkit as ik


def test_xyz_single_and_multi_frame(tmp_path, small_dimer):
    path = tmp_path / "two.xyz"
    moved = small_dimer.translated_b([0, 0, 0.5])
    path.write_text(small_dimer.to_xyz_string("frame 0") + moved.to_xyz_string("frame 1"))
    d0 = ik.Dimer.from_xyz(path)
    d1 = ik.Dimer.from_xyz(path, frame=1)
    assert d0.fragment_a == (0, 1) and d0.fragment_b == (2, 3)
    assert np.allclose(d1.coordinates[2:] - d0.coordinates[2:], [0, 0, 0.5])
    frames = ik.Dimer.frames_from_xyz(path)
    assert len(frames) == 2 and frames[1] == d1


def test_automatic_split_matches_ase_monomer_split():
    # ase.data.s22 records how many atoms belong to each monomer (S22 set, Jurečka 2006)
    from ase.data import s22

    for name in ("Water_dimer", "Ammonia_dimer", "Methane_dimer", "Benzene-water_complex"):
        atoms = s22.create_s22_system(name)
        n_a, n_b = s22.get_number_of_dimer_atoms(name)
        d = ik.Dimer.from_ase(atoms)
        sizes = sorted([len(d.fragment_a), len(d.fragment_b)])
        assert sizes == sorted([n_a, n_b]), name


def test_ase_roundtrip(water_dimer):
    atoms = water_dimer.to_ase()
    back = ik.Dimer.from_ase(atoms, fragment_a=water_dimer.fragment_a)
    assert back == water_dimer


def test_atom_pair_factor_scan_scales_contact_exactly_and_moves_only_b(water_dimer):
    # the H-bond contact of the S22 water dimer: donor H (atom 1... find it) to acceptor O
    d = water_dimer
    dist = d.intermolecular_distances()
    ia, jb = np.unravel_index(np.argmin(dist), dist.shape)
    i, j = d.fragment_a[ia], d.fragment_b[jb]
    factors = [0.8, 0.9, 1.0, 1.25, 1.5, 2.0]
    spec = ik.ScanSpec(dimer=d, coordinate=ik.AtomPair(i, j), factors=factors, levels=["hf/sto-3g"])
    r0 = np.linalg.norm(d.coordinates[j] - d.coordinates[i])
    a, b = list(d.fragment_a), list(d.fragment_b)
    for p, f in zip(spec.points, sorted(factors)):
        c = p.dimer.coordinates
        assert abs(np.linalg.norm(c[j] - c[i]) - f * r0) < 1e-10
        assert np.array_equal(c[a], d.coordinates[a])  # A does not move
        shift = c[b] - d.coordinates[b]
        assert np.allclose(shift, shift[0], atol=1e-12)  # B moves rigidly
        # internal distances of B unchanged
        assert np.allclose(np.linalg.norm(c[b][:, None] - c[b][None], axis=-1),
                           np.linalg.norm(d.coordinates[b][:, None] - d.coordinates[b][None], axis=-1), atol=1e-12)
        # the shift lies along the i->j contact vector
        u = (d.coordinates[j] - d.coordinates[i]) / r0
        assert np.allclose(shift[0], (f - 1.0) * r0 * u, atol=1e-12)


def test_centre_of_mass_and_vector_distances(water_dimer):
    spec = ik.ScanSpec(dimer=water_dimer, coordinate=ik.CentreOfMass(), distances=[3.0, 3.5, 4.0],
                       levels=["hf/sto-3g"])
    for p in spec.points:
        com = p.dimer.centre_of_mass("B") - p.dimer.centre_of_mass("A")
        assert np.linalg.norm(com) == pytest.approx(p.distance, abs=1e-10)
    sep = water_dimer.centre_of_mass("B") - water_dimer.centre_of_mass("A")
    direction = sep / np.linalg.norm(sep) + np.array([0.0, 0.3, 0.0])
    v = ik.Vector(tuple(direction))
    unit = direction / np.linalg.norm(direction)
    start = v.value(water_dimer)
    assert start == pytest.approx(sep @ unit)
    spec = ik.ScanSpec(dimer=water_dimer, coordinate=v, factors=[1.0, 1.5], levels=["hf/sto-3g"])
    moved = spec.points[1].dimer.coordinates - water_dimer.coordinates
    assert np.allclose(moved[list(water_dimer.fragment_b)], 0.5 * start * unit, atol=1e-12)
    assert np.allclose(moved[list(water_dimer.fragment_a)], 0.0)


def test_frames_use_given_geometries_sorted_by_value():
    from ase.data import s22

    names = [f"Water_dimer_{f}" for f in ("2.0", "0.9", "1.0")]
    ref = s22_dimer("Water_dimer")
    frames = ik.Frames([s22.create_s22_system(n).positions for n in names])
    spec = ik.ScanSpec(dimer=ref, coordinate=frames, levels=["hf/sto-3g"])
    values = [p.distance for p in spec.points]
    assert values == sorted(values)
    assert np.array_equal(spec.points[-1].dimer.coordinates, s22.create_s22_system(names[0]).positions)


def test_spec_json_roundtrip(water_dimer):
    spec = ik.ScanSpec(dimer=water_dimer, coordinate=ik.AtomPair(1, 3), factors=[0.9, 1.0],
                       levels=["hf/sto-3g", "b3lyp-d3bj/def2-svp"], name="w")
    again = ik.ScanSpec.from_json(spec.to_json())
    assert again.to_dict() == spec.to_dict()
