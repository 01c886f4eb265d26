"""refine_minimum on the S22x5 water-dimer curve: R_min between the grid points next to
the published minimum, and agreement with a dense direct scan.

Geometries: ase.data.s22 create_s22_system('Water_dimer', dist=f) at the S22x5 factors
0.9/1.0/1.2/1.5/2.0 (Gráfová et al., JCTC 6, 2365 (2010): the CCSD(T) minimum of the
curve is at factor 1.0, so it lies between the 0.9 and 1.2 frames). ASE moves B along
+x, so the scan value is the x projection of the centre-of-mass separation
(``measure=Vector((1, 0, 0))``) and the dense scan is an independent ``Vector`` scan of
the factor-1.0 geometry.
"""

from __future__ import annotations

import numpy as np
import pytest

import interkit as ik
from interkit.analysis.minima import find_minimum
from interkit.analysis.refine import refine_minimum

FACTORS = (0.9, 1.0, 1.2, 1.5, 2.0)


def _frames():
    from ase.data import s22

    dimers = [ik.Dimer.from_ase(s22.create_s22_system("Water_dimer", dist=f), fragment_a=[0, 1, 2],
                                name="water dimer S22x5") for f in FACTORS]
    return dimers[1], ik.Frames(dimers, measure=ik.Vector((1.0, 0.0, 0.0)))


def _grid_scan(level, forces, store):
    template, coord = _frames()
    spec = ik.ScanSpec(dimer=template, coordinate=coord, levels=[level], forces=forces)
    return template, ik.run_scan(spec, executor="serial", cache=store, progress=False)


def _dense_minimum(template, level, centre, store):
    # dense direct scan, 0.01 Å apart over +-0.1 Å around the refined value; the natural
    # spline through it resolves the minimum far below 0.001 Å (common practice)
    grid = list(np.round(centre + np.arange(-0.1, 0.1001, 0.01), 5))
    spec = ik.ScanSpec(dimer=template, coordinate=ik.Vector((1.0, 0.0, 0.0)), distances=grid, levels=[level])
    ds = ik.run_scan(spec, executor="serial", cache=store, progress=False)
    return find_minimum(ds["distance"].values, ds["e_int"].values[0])


def test_refine_with_forces_lands_between_the_neighbours_of_the_published_minimum(tmp_path):
    template, ds = _grid_scan("hf/sto-3g", True, tmp_path / "store")
    r = ds["distance"].values
    res = refine_minimum(ds, cache=tmp_path / "store")
    assert r[0] < res.r_min_angstrom < r[2]            # between factors 0.9 and 1.2
    assert len(res.points["distance"]) <= 6             # "a few extra points"
    # the force at the last point is ~zero; the refined minimum is below every grid point
    assert abs(float(res.points["force_along"][-1])) < 0.01
    assert res.e_min_kcal_per_mol < np.nanmin(ds["e_int"].values)
    # every extra point is in the store: a second refinement computes nothing
    again = refine_minimum(ds, cache=tmp_path / "store")
    assert again.r_min_angstrom == res.r_min_angstrom


def test_refine_refuses_a_minimum_at_the_edge():
    template, coord = _frames()
    spec = ik.ScanSpec(dimer=template, coordinate=ik.Vector((1.0, 0.0, 0.0)),
                       distances=[3.6, 3.9, 4.2, 4.5], levels=["hf/sto-3g"])
    ds = ik.run_scan(spec, executor="serial", cache=None, progress=False)
    with pytest.raises(ik.InputError, match="edge of the grid"):
        refine_minimum(ds, cache=None)


@pytest.mark.slow
@pytest.mark.parametrize("forces", [True, False])
def test_refined_minimum_agrees_with_a_dense_scan(tmp_path, forces):
    level = "hf/def2-svp"
    template, ds = _grid_scan(level, forces, tmp_path / "store")
    r = ds["distance"].values
    res = refine_minimum(ds, cache=tmp_path / "store")
    assert r[0] < res.r_min_angstrom < r[2]
    dense = _dense_minimum(template, level, res.r_min_angstrom, tmp_path / "store")
    assert res.r_min_angstrom == pytest.approx(dense.r_min_angstrom, abs=1e-3)
    assert res.e_min_kcal_per_mol == pytest.approx(dense.e_min_kcal_per_mol, abs=1e-3)
