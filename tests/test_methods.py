"""The methods paragraph and its references, written from what a Dataset records.

Sources: the settings are those the test puts into the Dataset (spec_json, attrs); the
method -> original-paper assignments are the standard ones (recalled from memory, e.g.
MP2: Møller and Plesset 1934; SCS-MP2: Grimme 2003; CCSD(T): Raghavachari et al. 1989;
D4: Caldeweyher et al. 2019; counterpoise: Boys and Bernardi 1970).
"""

from __future__ import annotations

import json
import re

import pytest
from conftest import hf_dimer

import interkit as ik
from interkit.share import references as refs
from interkit.share.methods import methods_references


@pytest.fixture(scope="module")
def scan():
    spec = ik.ScanSpec(dimer=hf_dimer(), coordinate=ik.AtomPair(1, 2), factors=[1.0, 1.2, 1.5],
                       levels=["hf/sto-3g"])
    return ik.run_scan(spec, executor="serial", cache=None, progress=False)


def _with_spec(ds, **changes):
    spec = json.loads(ds.attrs["spec_json"])
    spec.update(changes)
    out = ds.copy()
    out.attrs = dict(ds.attrs, spec_json=json.dumps(spec))
    return out


def _level(method, basis, functional=None, dispersion=None, **extra):
    return dict(method=method, basis=basis, functional=functional, dispersion=dispersion,
                density_fitting=True, **extra)


def test_paragraph_of_a_real_scan_states_what_the_dataset_records(scan):
    text = ik.methods_text(scan)
    paragraph = text.split("\n\n")[0]
    assert "Hartree–Fock in the STO-3G basis set" in paragraph
    assert "3 points" in paragraph and "distance between atoms 1 and 2" in paragraph
    assert f"PySCF program (version {scan.attrs['pyscf_version']})" in paragraph
    assert f"interkit {scan.attrs['interkit_version']}" in paragraph
    assert "converged to 1e-08 hartree" in paragraph           # spec default scf_threshold_hartree
    assert "Boys–Bernardi counterpoise scheme" in paragraph
    # the SCF fitting basis is not recorded yet: the default is named and marked
    assert "fitting basis" in paragraph and "(default: pyscf's choice for sto-3g" in paragraph
    keys = methods_references(scan)
    assert {"boys1970", "hehre1969", "sun2018", "sun2020"} <= set(keys)
    # citations are numbered in reading order, and every number has its reference line
    numbers = [int(n) for group in re.findall(r"\[([\d, ]+)\]", paragraph) for n in group.split(",")]
    first_seen = list(dict.fromkeys(numbers))
    assert first_seen == list(range(1, len(keys) + 1))
    for n, key in enumerate(keys, start=1):
        assert f"[{n}] " in text and f"BibTeX key {key})" in text


def test_every_method_gets_its_original_papers(scan):
    levels = [_level("mp2", "cc-pvdz"), _level("scs-mp2", "aug-cc-pvdz"), _level("ccsd(t)", "def2-tzvp"),
              _level("dft", "def2-svp", "pbe", "d4"), _level("dft", "def2-svp", "b3lyp")]
    ds = _with_spec(scan, levels=levels, dispersion=["none", "d3bj", "d3zero-atm"])
    text = ik.methods_text(ds)
    keys = set(methods_references(ds))
    assert {"moller1934", "grimme2003", "raghavachari1989", "caldeweyher2019", "becke1993", "lee1988",
            "stephens1994", "grimme2010", "grimme2011", "axilrod1943", "dunning1989", "kendall1992",
            "weigend2005", "weigend2002jk"} <= keys
    # PBE has no entry in our table: named, pointed to libxc, no guessed citation
    assert "the PBE functional (for its original papers see the libxc documentation)" in text
    # correlated levels: frozen core (default) stated; CCSD(T) on a conventional reference
    assert text.count("frozen core orbitals (default") == 3
    assert "For CCSD(T)/def2-TZVP: conventional (not density-fitted) SCF integrals" in text
    assert "MP2 correlation energy density-fitted with the same fitting basis as the SCF" in text
    # SCS-MP2 factors of Grimme, J. Chem. Phys. 118, 9095 (2003): 6/5 and 1/3
    assert "opposite-spin correlation scaled by 1.2, same-spin by 0.3333" in text


def test_a_recorded_setting_replaces_the_default(scan):
    # another branch adds explicit level fields; once recorded, the text takes them
    recorded = _level("mp2", "cc-pvdz", frozen_core="no frozen orbitals (all electrons correlated)",
                      jk_fitting_basis="cc-pvtz-jkfit")
    text = ik.methods_text(_with_spec(scan, levels=[recorded]))
    assert "no frozen orbitals (all electrons correlated) in the correlation treatment" in text
    assert "frozen core orbitals (default" not in text
    assert "density-fitted with the cc-pvtz-jkfit" in text and "(default: pyscf's choice" not in text


def test_decomposition_and_forces_are_described(scan):
    ds = _with_spec(scan, decomposition="sapt0", forces=True)
    ds.attrs.update(decomposition_basis="jun-cc-pvdz",
                    decomposition_jk_fitting_basis="F: aug-cc-pvdz-jkfit; H: cc-pvdz-jkfit",
                    decomposition_ri_fitting_basis="F: aug-cc-pvdz-ri; H: cc-pvdz-ri")
    text = ik.methods_text(ds)
    assert "density-fitted SAPT0" in text and "jun-cc-pVDZ" in text
    assert "F: aug-cc-pvdz-jkfit; H: cc-pvdz-jkfit fitting basis" in text
    assert "(1e-09 hartree for calculations with gradients)" in text   # engine's gradient threshold
    assert {"jeziorski1994", "hohenstein2010", "papajak2011", "weigend2002jk", "weigend2002ri"} \
        <= set(methods_references(ds))


def test_no_counterpoise_is_said(scan):
    ds = scan.copy()
    ds.attrs = dict(scan.attrs, counterpoise="none")
    assert "not counterpoise-corrected" in ik.methods_text(ds)
    assert "boys1970" not in methods_references(ds)


def test_bibtex_has_one_entry_per_cited_key(scan):
    bib = ik.methods_bibtex(scan)
    assert bib.startswith("% Bibliographic details recalled from memory")
    keys = re.findall(r"^@article\{([^,]+),", bib, flags=re.M)
    assert keys == methods_references(scan)
    assert bib.count("{") == bib.count("}")


def test_every_reference_entry_is_complete():
    # structural check of the table (the details themselves are recalled from memory)
    for key, fields in refs.REFERENCES.items():
        assert {"author", "title", "journal", "volume", "pages", "year"} <= set(fields), key
        assert re.fullmatch(r"(19|20)\d\d", fields["year"]), key
        assert key.endswith(fields["year"]) or fields["year"] in key, key


def test_frozen_core_flag_is_described_in_words(tmp_path):
    """The recorded frozen_core flag reads as what it means, never as 'True'/'False'
    (the paragraph is for a paper's methods section)."""
    spec = ik.ScanSpec(dimer=hf_dimer(), coordinate=ik.AtomPair(1, 2), factors=[1.0],
                       levels=["mp2/sto-3g", "mp2/sto-3g (all-electron)"])
    ds = ik.run_scan(spec, executor="serial", cache=None, progress=False)
    text = ik.methods_text(ds)
    assert "True in the correlation" not in text and "False in the correlation" not in text
    assert "frozen core orbitals (pyscf's chemical core" in text
    assert "all electrons correlated (no frozen core) in the correlation treatment" in text
