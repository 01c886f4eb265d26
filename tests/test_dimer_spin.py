"""Spin of a dimer of two open-shell fragments: the dimer multiplicity option, the
broken-symmetry guess, <S^2> in the Dataset and the spin-contamination flag.

The test system is two hydrogen atoms (doublets): the cheapest pair of open-shell
fragments, where the singlet/triplet physics is textbook (H2 dissociation).
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import require

import interkit as ik
from interkit.cli import main
from interkit.run.plan import plan_scan
from interkit.units import ANGSTROM_TO_BOHR

LEVEL = "hf/6-31g"


def _h2(r: float, **kw) -> ik.Dimer:
    return ik.Dimer(("H", "H"), [[0.0, 0.0, 0.0], [0.0, 0.0, r]], (0,), multiplicities=(2, 2), **kw)


def _scan(r: float, level: str = LEVEL, **kw):
    spec = ik.ScanSpec(dimer=_h2(r, **kw), distances=[r], levels=[level])
    return ik.run_scan(spec, progress=False, executor="serial")


def _dimer_energy(ds) -> float:
    return float(ds["e_total_hartree"].sel(role="dimer").values.item())


def test_default_dimer_spin_is_high_spin_and_documented():
    d = _h2(4.0)
    # default: S = S_A + S_B, so two doublets give a triplet (2S = 2); the ghosted
    # monomers keep their own doublet spin
    assert d.dimer_multiplicity is None and d.spin == 2 and not d.broken_symmetry
    plan = plan_scan(ik.ScanSpec(dimer=d, distances=[4.0], levels=[LEVEL]))
    entry = plan.table[(0, 0)]
    assert plan.jobs[entry["dimer"]].spin == 2
    assert plan.jobs[entry["a_dimer_basis"]].spin == 1 and plan.jobs[entry["b_dimer_basis"]].spin == 1
    # documented in the Dimer docstring, the TOML loader and the README
    assert "dimer_multiplicity" in ik.Dimer.__doc__ and "high spin" in ik.Dimer.__doc__
    assert "S = S_A + S_B" in ik.Dimer.__doc__
    assert "dimer_multiplicity" in ik.load_spec_toml.__doc__ and "high spin" in ik.load_spec_toml.__doc__
    from pathlib import Path

    readme = (Path(ik.__file__).parent.parent / "README.md").read_text()
    assert "dimer_multiplicity" in readme and "high spin" in readme


def test_dimer_multiplicity_is_in_the_key_toml_and_spec_json(tmp_path):
    low = ik.ScanSpec(dimer=_h2(4.0, dimer_multiplicity=1), distances=[4.0], levels=[LEVEL])
    high = ik.ScanSpec(dimer=_h2(4.0), distances=[4.0], levels=[LEVEL])
    explicit_high = ik.ScanSpec(dimer=_h2(4.0, dimer_multiplicity=3), distances=[4.0], levels=[LEVEL])
    keys = [plan_scan(s).table[(0, 0)] for s in (low, high, explicit_high)]
    # the dimer spin and the guess recipe change the numbers: a different key
    assert keys[0]["dimer"] != keys[1]["dimer"]
    job = plan_scan(low).jobs[keys[0]["dimer"]]
    assert job.spin == 0 and job.describe()["guess"] and job.describe()["fragment_spins"] == [1, -1]
    # monomers are the same calculations whatever the dimer spin; high spin given
    # explicitly is the default calculation
    assert keys[0]["a_dimer_basis"] == keys[1]["a_dimer_basis"]
    assert keys[2] == keys[1]
    again = ik.ScanSpec.from_json(low.to_json())
    assert again.dimer.dimer_multiplicity == 1
    (tmp_path / "h2.xyz").write_text(_h2(4.0).to_xyz_string())
    (tmp_path / "spec.toml").write_text(
        '[system]\ngeometry = "h2.xyz"\nfragment_a = [0]\nmultiplicities = [2, 2]\ndimer_multiplicity = 1\n'
        '[scan]\ndistances = [4.0]\n[calculation]\nlevels = ["hf/6-31g"]\n')
    spec = ik.load_spec_toml(tmp_path / "spec.toml")
    assert spec.dimer.dimer_multiplicity == 1 and spec.dimer.spin == 0


def test_broken_symmetry_singlet_of_two_distant_doublets():
    triplet, singlet = _scan(5.0), _scan(5.0, dimer_multiplicity=1)
    s2_t = float(triplet["spin_square"].sel(role="dimer").values.item())
    s2_s = float(singlet["spin_square"].sel(role="dimer").values.item())
    # two non-overlapping doublets: <S^2> = 2 for the triplet (S(S+1)), 1 for the
    # broken-symmetry singlet (M(M+1) + 2 S_small; Noodleman 1981, recalled from memory)
    assert s2_t == pytest.approx(2.0, abs=1e-6)
    assert s2_s == pytest.approx(1.0, abs=1e-3)
    # far apart the two states are degenerate (exchange coupling decays exponentially);
    # the variational BS determinant lies at or below the triplet (common practice)
    e_t, e_s = _dimer_energy(triplet), _dimer_energy(singlet)
    assert e_s <= e_t + 1e-9 and e_t - e_s < 1e-5
    assert singlet.attrs["dimer_multiplicity"] == 1 and "broken symmetry" in singlet.attrs["dimer_spin"]
    assert triplet.attrs["dimer_multiplicity"] == 3 and "high spin" in triplet.attrs["dimer_spin"]
    # neither is flagged: both lie within the documented rule
    assert list(triplet["status"].values.ravel()) == ["ok"] == list(singlet["status"].values.ravel())
    # the QCSchema export carries the dimer's multiplicity (monomers their own)
    from interkit.share.export import scan_document

    point = scan_document(singlet)["points"][0]
    assert point["molecule"]["molecular_multiplicity"] == 1
    assert point["counterpoise_molecules"]["a_dimer_basis"]["molecular_multiplicity"] == 2
    assert scan_document(triplet)["points"][0]["molecule"]["molecular_multiplicity"] == 3


def test_broken_symmetry_energy_equals_a_direct_pyscf_uhf():
    from pyscf import gto, scf

    r = 2.5  # overlapping enough that the guess decides the solution
    ds = _scan(r, "hf/6-31g (exact scf)", dimer_multiplicity=1)  # exact integrals, as below
    xyz = ds["coordinates"].values[0] * ANGSTROM_TO_BOHR
    mol = gto.M(atom=[("H", tuple(x)) for x in xyz], unit="Bohr", basis="6-31g", spin=0, verbose=0)
    # broken-symmetry guess written here: each atom's UHF density (alpha electron) on
    # its own basis functions, the second atom's alpha and beta swapped
    dm = np.zeros((2, mol.nao, mol.nao))
    for k, x in enumerate(xyz):
        atom = gto.M(atom=[("H", tuple(x))], unit="Bohr", basis="6-31g", spin=1, verbose=0)
        mf_atom = scf.UHF(atom)
        mf_atom.kernel()
        d = mf_atom.make_rdm1()
        if k == 1:
            d = d[::-1]
        p0, p1 = mol.aoslice_by_atom()[k][2:4]
        dm[:, p0:p1, p0:p1] = d
    mf = scf.UHF(mol)
    mf.conv_tol = 1e-10
    mf.kernel(dm0=dm)
    assert mf.converged
    assert _dimer_energy(ds) == pytest.approx(mf.e_tot, abs=1e-7)
    assert float(ds["spin_square"].sel(role="dimer").values.item()) == pytest.approx(mf.spin_square()[0], abs=1e-4)
    # the guess matters: pyscf's default guess at 2S = 0 stays on the restricted
    # solution, well above the broken-symmetry one at this distance
    plain = scf.UHF(mol)
    plain.kernel()
    assert plain.e_tot > mf.e_tot + 1e-3


@pytest.mark.parametrize("value,expected", [
    (2, "dimer_multiplicity: 2 is impossible for fragments of multiplicities 2 and 2"),
    (5, "dimer_multiplicity: 5 is impossible"),
    (0, "dimer_multiplicity: 0 is impossible"),
    ("one", "dimer_multiplicity: 'one' is not a positive integer"),
    (True, "dimer_multiplicity: True is not a positive integer"),
])
def test_invalid_dimer_multiplicity_is_one_line(value, expected):
    with pytest.raises(ik.InputError) as err:
        _h2(4.0, dimer_multiplicity=value)
    assert str(err.value).startswith(expected) and "\n" not in str(err.value)


def test_intermediate_dimer_spin_is_refused_and_closed_shell_needs_singlet():
    o2 = ik.Dimer(("O", "O", "O", "O"), [[0, 0, 0], [0, 0, 1.21], [3.5, 0, 0], [3.5, 0, 1.21]],
                  (0, 1), multiplicities=(3, 3), dimer_multiplicity=1)
    assert o2.spin == 0 and o2.broken_symmetry
    # two triplets: S = 1 lies between 0 and 2; one determinant cannot give it
    with pytest.raises(ik.NotAvailableError, match=r"^dimer_multiplicity: 3 lies between the lowest \(1\)"):
        ik.Dimer(o2.symbols, o2.coordinates, o2.fragment_a, multiplicities=(3, 3), dimer_multiplicity=3)
    with pytest.raises(ik.InputError, match=r"^dimer_multiplicity: 3 is impossible for fragments of "
                                            r"multiplicities 1 and 1 \(.* allow 1\)$"):
        ik.Dimer(o2.symbols, o2.coordinates, o2.fragment_a, dimer_multiplicity=3)


def test_cli_refuses_a_bad_dimer_multiplicity_with_one_line(tmp_path, capsys):
    (tmp_path / "h2.xyz").write_text(_h2(4.0).to_xyz_string())
    (tmp_path / "spec.toml").write_text(
        '[system]\ngeometry = "h2.xyz"\nfragment_a = [0]\nmultiplicities = [2, 2]\ndimer_multiplicity = 2\n'
        '[scan]\ndistances = [4.0]\n[calculation]\nlevels = ["hf/6-31g"]\n')
    before = set(p.name for p in tmp_path.iterdir())
    code = main(["scan", str(tmp_path / "spec.toml"), "-o", str(tmp_path / "o.nc"), "--cache",
                 str(tmp_path / "store"), "--quiet", "--serial"])
    err = capsys.readouterr().err.strip()
    assert code == 2 and "\n" not in err
    assert err.startswith("interkit: error: dimer_multiplicity: 2 is impossible"), err
    assert set(p.name for p in tmp_path.iterdir()) == before


def test_spin_square_in_the_dataset_round_trips(tmp_path):
    ds = _scan(4.0)
    var = ds["spin_square"]
    assert var.dims == ("level", "distance", "role") and var.attrs["units"] == "1"
    assert "<S^2>" in var.attrs["long_name"]
    # doublet monomers: S(S+1) = 0.75 for UHF of one electron (exact, a single spin orbital)
    for role in ("a_dimer_basis", "b_dimer_basis", "a_own_basis", "b_own_basis"):
        assert float(var.sel(role=role).values.item()) == pytest.approx(0.75, abs=1e-10)
    ik.save_scan(ds, tmp_path / "s.nc")
    back = ik.open_scan(tmp_path / "s.nc")
    np.testing.assert_array_equal(back["spin_square"].values, var.values)
    assert back["spin_square"].attrs["units"] == "1"
    assert ik.spec_of(back).dimer.dimer_multiplicity is None
    # closed-shell scans keep their layout: no spin_square variable
    closed = ik.Dimer(("He", "He"), [[0, 0, 0], [0, 0, 3.0]], (0,))
    ds_closed = ik.run_scan(ik.ScanSpec(dimer=closed, distances=[3.0], levels=["hf/sto-3g"]),
                            progress=False, executor="serial")
    assert "spin_square" not in ds_closed


def test_heavy_spin_contamination_is_flagged_in_status():
    from interkit.data.schema import assemble

    spec = ik.ScanSpec(dimer=_h2(4.0), distances=[4.0], levels=[LEVEL])
    plan = plan_scan(spec)
    entry = plan.table[(0, 0)]

    def rec(s2):
        return {"status": "ok", "energy_hartree": -0.5, "spin_square": s2, "wall_time_s": 0.0}

    # a doublet monomer with <S^2> = 0.9 deviates by 0.15 > 0.1 (the documented
    # common-practice threshold); the triplet dimer at 2.05 is within it
    records = {k: rec(0.75) for k in entry.values()}
    records[entry["dimer"]] = rec(2.05)
    assert str(assemble(plan, records)["status"].values.item()) == "ok"
    records[entry["a_dimer_basis"]] = rec(0.9)
    ds = assemble(plan, records)
    assert str(ds["status"].values.item()) == "spin-contaminated"
    assert "<S^2> = 0.900" in str(ds["status_detail"].values.item())
    assert np.isfinite(ds["e_int"].values).all()  # numbers kept, flagged
    ik.validate(ds)
    # broken symmetry: up to M(M+1) + 2 S_small (+0.1) is expected; above it is flagged
    low = ik.ScanSpec(dimer=_h2(4.0, dimer_multiplicity=1), distances=[4.0], levels=[LEVEL])
    plan = plan_scan(low)
    entry = plan.table[(0, 0)]
    records = {k: rec(0.75) for k in entry.values()}
    records[entry["dimer"]] = rec(1.0)
    assert str(assemble(plan, records)["status"].values.item()) == "ok"
    records[entry["dimer"]] = rec(0.3)  # magnetic orbitals overlapping: expected, not flagged
    assert str(assemble(plan, records)["status"].values.item()) == "ok"
    records[entry["dimer"]] = rec(1.2)
    assert str(assemble(plan, records)["status"].values.item()) == "spin-contaminated"
    # a stored record without <S^2> cannot be vouched for: flagged, never silent
    del records[entry["dimer"]]["spin_square"]
    ds = assemble(plan, records)
    assert str(ds["status"].values.item()) == "spin-contaminated"
    assert "not recorded" in str(ds["status_detail"].values.item())


def test_launcher_has_a_dimer_multiplicity_field():
    W = require("interkit.widgets", "the notebook layer needs ipywidgets (pip install -e .[test])")
    launcher = W.ScanLauncher(executor="serial")
    launcher.mults[0].value, launcher.mults[1].value = 2, 2
    launcher.load_xyz_text(_h2(4.0).to_xyz_string(), "h2")
    assert launcher.dimer.dimer_multiplicity is None and "high spin" in launcher.dimer_info.value
    launcher.dimer_mult.value = "1"
    assert launcher.dimer.dimer_multiplicity == 1 and "broken symmetry" in launcher.dimer_info.value
    assert launcher.build_spec().dimer.dimer_multiplicity == 1
    launcher.dimer_mult.value = "2"
    assert "interkit-error" in launcher.message.value and "dimer_multiplicity: 2 is impossible" in launcher.message.value


def test_broken_symmetry_flips_the_fragment_with_fewer_unpaired_electrons():
    # H (doublet) + O (triplet): lowest spin S = 1/2 needs H's spin flipped (M_S >= 0)
    def dimer(m):
        return ik.Dimer(("H", "O"), [[0, 0, 0], [0, 0, 5.0]], (0,), multiplicities=(2, 3), dimer_multiplicity=m)

    spec = ik.ScanSpec(dimer=dimer(2), distances=[5.0], levels=[LEVEL])
    job = plan_scan(spec).jobs[plan_scan(spec).table[(0, 0)]["dimer"]]
    assert job.spin == 1 and job.fragment_spins == (-1, 2)
    low = ik.run_scan(spec, progress=False, executor="serial")
    high = ik.run_scan(ik.ScanSpec(dimer=dimer(None), distances=[5.0], levels=[LEVEL]),
                       progress=False, executor="serial")
    s2 = float(low["spin_square"].sel(role="dimer").values.item())
    s2_o = float(low["spin_square"].sel(role="b_own_basis").values.item())
    # non-overlapping fragments: M(M+1) + 2 S_small = 0.75 + 1 (Noodleman 1981, recalled
    # from memory), plus the O atom's own small contamination (its <S^2> - 2)
    assert s2 == pytest.approx(1.75 + (s2_o - 2.0), abs=1e-3)
    # the quartet at S(S+1) = 3.75 with the same O contamination, degenerate at 5 Å
    assert float(high["spin_square"].sel(role="dimer").values.item()) == pytest.approx(3.75 + (s2_o - 2.0), abs=1e-3)
    assert abs(_dimer_energy(low) - _dimer_energy(high)) < 1e-5
    assert "spin of A flipped" in low.attrs["dimer_spin"]
