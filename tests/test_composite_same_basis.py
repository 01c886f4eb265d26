"""The single-basis composite ``mp2/B + ccsd(t)/b``: MP2 in basis B plus CCSD(T) - MP2 in
a smaller basis b, nothing extrapolated (the additive estimate of CCSD(T)/B used for the
S22 references; Jurečka, Šponer, Černý, Hobza, Phys. Chem. Chem. Phys. 8, 1985 (2006))."""

from __future__ import annotations

import json

import numpy as np
import pytest
from conftest import hf_dimer

import interkit as ik
from interkit.errors import InputError
from interkit.model.composite import CompositeLevel
from interkit.model.level_names import display_label
from interkit.model.levels import LevelOfTheory, default_reference
from interkit.run.plan import plan_scan
from interkit.units import HARTREE_TO_KCAL_PER_MOL

SAME = "mp2/cc-pvdz + ccsd(t)/sto-3g"
#: tight SCF so that the hand calculation and the scan agree to 1e-8 hartree
TIGHT = 1e-12


def _spec(levels, **kw):
    kw.setdefault("factors", [1.0])
    return ik.ScanSpec(dimer=hf_dimer(), levels=levels, scf_threshold_hartree=TIGHT, **kw)


def test_same_basis_composite_parse_label_round_trip():
    comp = ik.parse_level("MP2/cc-pVDZ  +  CCSD(T)/STO-3G")
    assert isinstance(comp, CompositeLevel) and comp.bases == ("cc-pvdz",) and not comp.extrapolates
    assert comp.label == SAME
    assert ik.parse_level(comp.label) == comp
    assert CompositeLevel.from_dict(json.loads(json.dumps(comp.to_dict()))) == comp
    # the trade's spelling: MP2/B + ΔCCSD(T)/b (no CBS, nothing extrapolated)
    assert display_label(comp.label) == "MP2/cc-pVDZ + ΔCCSD(T)/STO-3G"
    assert display_label("mp2/aug-cc-pvtz + ccsd(t)/aug-cc-pvdz") == "MP2/aug-cc-pVTZ + ΔCCSD(T)/aug-cc-pVDZ"
    assert [lv.label for lv in comp.components()] == ["mp2/cc-pvdz", "ccsd(t)/sto-3g"]
    # derived rows: HF at B from the MP2 job, MP2 at b (exact) from the CCSD(T) job
    assert [(lv.label, src.label) for lv, src, _ in comp.derived()] == [
        ("hf/cc-pvdz", "mp2/cc-pvdz"), ("mp2/sto-3g (exact scf, exact correlation)", "ccsd(t)/sto-3g")]
    recipe = comp.recipe()
    assert recipe["extrapolation"] is None and recipe["cardinal_numbers"] is None
    assert "8, 1985 (2006)" in recipe["citation"]
    # any basis for the single base basis (no cardinal-number check), all-electron note
    pople = ik.parse_level("mp2/6-31+g* + ccsd(t)/6-31g (all-electron)")
    assert pople.bases == ("6-31+g*",) and pople.correction_basis == "6-31g" and not pople.frozen_core
    assert pople.label == "mp2/6-31+g* + ccsd(t)/6-31g (all-electron)" and ik.parse_level(pople.label) == pople
    # a '+' inside a basis name still makes a plain level
    assert isinstance(ik.parse_level("mp2/6-31+g*"), LevelOfTheory)
    assert ik.parse_level("hf/6-311++g**").basis == "6-311++g**"
    with pytest.raises(InputError, match="not extrapolated"):
        _ = comp.x_small


def test_single_basis_without_correction_is_refused():
    # one basis and no correction is just the plain level: refused, one line
    with pytest.raises(InputError, match="mp2/cc-pvdz without a correction is a plain level") as info:
        CompositeLevel("mp2", ("cc-pvdz",))
    assert "\n" not in str(info.value)
    with pytest.raises(InputError, match="plain level"):
        CompositeLevel.from_dict({"kind": "composite", "base_method": "mp2", "bases": ["cc-pvdz"]})
    for text, message in [("ccsd(t)/cc-pvdz + ccsd(t)/sto-3g", "applies to an MP2 base"),
                          ("hf/cc-pvdz + ccsd(t)/sto-3g", "method 'hf'"),
                          ("mp2/cc-pvdz + b3lyp/sto-3g", "correction method 'b3lyp'"),
                          ("mp2/cc-pvdz + ccsd(t)/sto-3g (exact scf)", "note 'exact scf'")]:
        with pytest.raises(InputError, match=message.replace("(", r"\(")):
            ik.parse_level(text)


def test_same_basis_plan_is_exactly_the_component_jobs():
    plan = plan_scan(_spec([SAME], factors=[1.0, 1.3]), check=False)
    plain = plan_scan(_spec(["mp2/cc-pvdz", "ccsd(t)/sto-3g"], factors=[1.0, 1.3]), check=False)
    # per level: 3 counterpoise jobs per point + 2 own-basis monomers (rigid scan)
    assert len(plan.jobs) == 2 * (3 * 2 + 2)
    assert set(plan.jobs) == set(plain.jobs)


def test_same_basis_ranks_after_plain_ccsd_t_as_reference():
    # a CCSD(T) estimate: before MP2, after a direct CCSD(T) (common practice)
    assert default_reference(["hf/cc-pvdz", "mp2/cc-pvdz", SAME]) == SAME
    assert default_reference(["hf/cc-pvdz", SAME, "ccsd(t)/cc-pvdz"]) == "ccsd(t)/cc-pvdz"
    assert default_reference([SAME, "mp2/cc-pvdz~cc-pvtz"]) == "mp2/cc-pvdz~cc-pvtz"


@pytest.fixture(scope="module")
def same_run(tmp_path_factory):
    store = tmp_path_factory.mktemp("same-basis-store")
    spec = _spec(["hf/sto-3g", SAME])
    ds = ik.run_scan(spec, executor="serial", cache=store, progress=False)
    return spec, ds, store


def _by_hand(geom, frag_a, frag_b) -> float:
    """E_int (hartree) by plain pyscf, counterpoise by ghost atoms: HF + DF-MP2 in cc-pVDZ
    (density-fitted SCF, MP2 on its fitting basis), plus CCSD(T) - MP2 on one exact SCF in
    STO-3G; F 1s frozen."""
    from pyscf import cc, gto, mp, scf
    from pyscf.mp import dfmp2

    def mol(basis, real, ghost):
        atoms = [(("ghost-" if i in ghost else "") + s, geom.coordinates[i])
                 for i, s in enumerate(geom.symbols) if i in real or i in ghost]
        return gto.M(atom=atoms, basis=basis, unit="angstrom", verbose=0)

    def mp2_total(real, ghost):
        nfc = sum(1 for i in real if geom.symbols[i] == "F")
        mf = scf.RHF(mol("cc-pvdz", real, ghost)).density_fit()
        mf.conv_tol = TIGHT
        mf.kernel()
        return mf.e_tot + dfmp2.DFMP2(mf, frozen=nfc).kernel()[0]

    def delta(real, ghost):
        nfc = sum(1 for i in real if geom.symbols[i] == "F")
        mf = scf.RHF(mol("sto-3g", real, ghost))
        mf.conv_tol = TIGHT
        mf.kernel()
        e_mp2 = mp.MP2(mf, frozen=nfc).kernel()[0]
        solver = cc.CCSD(mf, frozen=nfc)
        solver.conv_tol = 1e-10
        solver.kernel()
        return solver.e_corr + solver.ccsd_t() - e_mp2

    roles = [(frag_a + frag_b, []), (frag_a, frag_b), (frag_b, frag_a)]

    def cp(f):
        e = [f(r, g) for r, g in roles]
        return e[0] - e[1] - e[2]
    return cp(mp2_total) + cp(delta)


def test_same_basis_e_int_equals_plain_pyscf_by_hand(same_run, tmp_path):
    spec, ds, _ = same_run
    d = spec.points[0].dimer
    row = ds.sel(level=SAME).isel(distance=0)
    assert str(row["status"].values) == "ok"
    e_hand = _by_hand(d, list(d.fragment_a), list(d.fragment_b))
    assert float(row["e_int"]) / HARTREE_TO_KCAL_PER_MOL == pytest.approx(e_hand, abs=1e-8)
    # no second basis: no basis-set uncertainty (definition)
    assert np.isnan(float(row["e_int_basis_uncertainty"]))
    labels = [str(x) for x in ds["level"].values]
    assert labels == ["hf/sto-3g", "mp2/cc-pvdz", "ccsd(t)/sto-3g", "hf/cc-pvdz",
                      "mp2/sto-3g (exact scf, exact correlation)", SAME]
    assert list(ds["level_kind"].values) == ["requested"] + ["component"] * 4 + ["composite"]
    # the composite is the sum of its rows (definition of the additive form)
    e = ds["e_int"]
    np.testing.assert_allclose(e.sel(level=SAME).values,
                               (e.sel(level="mp2/cc-pvdz") + e.sel(level="ccsd(t)/sto-3g")
                                - e.sel(level="mp2/sto-3g (exact scf, exact correlation)")).values, atol=1e-9)
    recipe = json.loads(ds.attrs["composite_recipe_json"])[SAME]
    assert recipe["bases"] == ["cc-pvdz"] and recipe["extrapolation"] is None
    from interkit.share.methods import methods_references

    text = ik.methods_text(ds)
    assert "jurecka2006" in methods_references(ds) and "helgaker1997" not in methods_references(ds)
    assert f"composite level {SAME}" in text and "no extrapolation" in text
    ik.validate(ds)
    ik.save_scan(ds, tmp_path / "s.nc")
    back = ik.open_scan(tmp_path / "s.nc")
    assert ik.spec_of(back).requested_levels == spec.requested_levels


def test_same_basis_toml_cli_and_launcher(same_run, tmp_path, capsys):
    from interkit.cli.main import main

    spec, _, store = same_run
    toml = tmp_path / "spec.toml"
    toml.write_text(spec.to_toml())
    assert ik.load_spec_toml(toml).requested_levels == ("hf/sto-3g", SAME)
    back = ik.ScanSpec.from_json(spec.to_json())
    assert back.requested_levels == spec.requested_levels and back.composites == spec.composites
    out = tmp_path / "scan.nc"
    assert main(["scan", str(toml), "-o", str(out), "--serial", "--quiet", "--cache", str(store)]) == 0
    assert SAME in [str(x) for x in ik.open_scan(out)["level"].values]
    capsys.readouterr()
    bad = tmp_path / "bad.toml"
    bad.write_text(toml.read_text().replace(SAME, "ccsd(t)/cc-pvdz + ccsd(t)/sto-3g"))
    assert main(["scan", str(bad), "-o", str(tmp_path / "bad.nc"), "--serial", "--quiet"]) == 2
    lines = [ln for ln in capsys.readouterr().err.splitlines() if ln.strip()]
    assert len(lines) == 1 and "applies to an MP2 base" in lines[0]
    assert not (tmp_path / "bad.nc").exists()
    from conftest import require

    W = require("interkit.widgets", "the notebook layer needs ipywidgets (pip install -e .[test])")
    launcher = W.ScanLauncher(executor="serial")
    launcher.load_xyz_text(hf_dimer().to_xyz_string(), "hf-dimer")
    launcher.levels.value = f"hf/sto-3g, {SAME}"
    assert launcher.build_spec().requested_levels == ("hf/sto-3g", SAME)
