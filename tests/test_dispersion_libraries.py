"""Post-hoc dispersion against the libraries' own Python APIs (PyPI ``dftd3``, ``dftd4``).

interkit reaches s-dftd3 and dftd4 through pyscf-dispersion's ctypes wrapper; here the
same models are evaluated through the libraries' own Python interfaces
(``dftd3.interface``: Ehlers, Grimme et al.; ``dftd4.interface``: Caldeweyher et al.,
J. Chem. Phys. 150, 154122 (2019)), with the damping parameters they load for the
functional (Grimme et al., J. Chem. Phys. 132, 154104 (2010) for D3(0); Grimme, Ehrlich,
Goerigk, J. Comput. Chem. 32, 1456 (2011) for D3(BJ)).

Library versions: pyscf-dispersion 1.7 bundles s-dftd3 1.7.0 and dftd4 4.3.1 (API
versions read from its shared libraries below); the PyPI packages installed for the
tests are the same versions. Measured differences are at rounding level (at most 2e-19
hartree in the energy and 1.5e-19 hartree/bohr in the gradient, water and HF dimers,
both functionals, all six schemes), so the tolerances are 1e-12
hartree and 1e-12 hartree/bohr. If the versions drift apart, the version test fails
and the tolerances must be re-measured.
"""

from __future__ import annotations

import ctypes
from pathlib import Path

# test extras (pyproject.toml): a missing package is an error, not a skip
import dftd3.interface as dftd3_interface
import dftd4.interface as dftd4_interface
import numpy as np
import pytest
from conftest import hf_dimer, s22_dimer

import interkit as ik
from interkit.engine.dispersion import dispersion_energy_and_gradient

BOHR_PER_ANGSTROM = 1.0 / 0.529177210903  # CODATA 2018
HARTREE_TO_KCAL = 627.509474  # CODATA 2018
FUNCTIONALS = ("b3lyp", "pbe0")
SCHEMES = ("d3zero", "d3bj", "d4", "d3zero-atm", "d3bj-atm", "d4-atm")
Z = {"H": 1, "C": 6, "N": 7, "O": 8, "F": 9, "Cl": 17}


def library_energy_gradient(symbols, coords_angstrom, functional, scheme, charge=0.0):
    """Energy (Eh) and gradient (Eh/bohr) from dftd3/dftd4's own Python interface."""
    numbers = np.array([Z[s] for s in symbols])
    pos = np.asarray(coords_angstrom, dtype=float) * BOHR_PER_ANGSTROM
    base, _, three = scheme.partition("-")
    atm = three == "atm"
    if base == "d4":
        model = dftd4_interface.DispersionModel(numbers, pos, charge=charge)
        param = dftd4_interface.DampingParam(method=functional, atm=atm)
    else:
        model = dftd3_interface.DispersionModel(numbers, pos)
        cls = (dftd3_interface.RationalDampingParam if base == "d3bj"
               else dftd3_interface.ZeroDampingParam)
        param = cls(method=functional, atm=atm)
    res = model.get_dispersion(param, grad=True)
    return float(res["energy"]), np.asarray(res["gradient"])


def bundled_versions() -> tuple[int, int]:
    import pyscf

    libdir = Path(pyscf.__file__).parent / "lib"
    d3 = ctypes.CDLL(str(libdir / "libs-dftd3.so")).dftd3_get_version()
    d4 = ctypes.CDLL(str(libdir / "libdftd4.so")).dftd4_get_version()
    return d3, d4


def test_bundled_and_python_library_versions_match():
    import dftd3.library
    import dftd4.library

    def text(v: int) -> str:  # the C API encodes major*10000 + minor*100 + patch
        return f"{v // 10000}.{v // 100 % 100}.{v % 100}"

    d3, d4 = bundled_versions()
    assert (text(d3), text(d4)) == (dftd3.library.get_api_version(),
                                    dftd4.library.get_api_version())


@pytest.mark.parametrize("functional", FUNCTIONALS)
@pytest.mark.parametrize("scheme", SCHEMES)
@pytest.mark.parametrize("dimer_name", ["water", "hf"])
def test_engine_matches_library_energy_and_gradient(dimer_name, scheme, functional):
    d = s22_dimer("Water_dimer") if dimer_name == "water" else hf_dimer()
    e, g = dispersion_energy_and_gradient(d.symbols, d.coordinates, functional, scheme)
    e_ref, g_ref = library_energy_gradient(d.symbols, d.coordinates, functional, scheme)
    assert e == pytest.approx(e_ref, abs=1e-12)
    np.testing.assert_allclose(g, g_ref, rtol=0, atol=1e-12)


def test_three_body_term_is_switched_by_the_atm_suffix():
    """-atm adds the Axilrod–Teller–Muto term (s9 = 1), its absence means s9 = 0: the
    difference equals the library's own ATM-on minus ATM-off, and is not zero."""
    d = s22_dimer("Water_dimer")
    for base in ("d3bj", "d4"):
        on = dispersion_energy_and_gradient(d.symbols, d.coordinates, "b3lyp", base + "-atm")[0]
        off = dispersion_energy_and_gradient(d.symbols, d.coordinates, "b3lyp", base)[0]
        lib_on = library_energy_gradient(d.symbols, d.coordinates, "b3lyp", base + "-atm")[0]
        lib_off = library_energy_gradient(d.symbols, d.coordinates, "b3lyp", base)[0]
        assert abs(on - off) > 1e-9  # about 4e-8 Eh for the water dimer
        assert on - off == pytest.approx(lib_on - lib_off, abs=1e-13)


def _dispersion_interaction_kcal(d: ik.Dimer, scheme: str, charges=(0, 0)) -> float:
    """E_disp(AB) - E_disp(A) - E_disp(B) from the library (ghost atoms have no nuclei,
    so the dimer-basis monomers carry the monomer's dispersion energy)."""
    coords = np.asarray(d.coordinates)
    ea = library_energy_gradient([d.symbols[i] for i in d.fragment_a], coords[list(d.fragment_a)],
                                 "b3lyp", scheme, charges[0])[0]
    eb = library_energy_gradient([d.symbols[i] for i in d.fragment_b], coords[list(d.fragment_b)],
                                 "b3lyp", scheme, charges[1])[0]
    eab = library_energy_gradient(d.symbols, coords, "b3lyp", scheme, sum(charges))[0]
    return (eab - ea - eb) * HARTREE_TO_KCAL


def test_scan_dispersion_part_equals_library_interaction():
    d = hf_dimer()
    schemes = ["none", "d3zero", "d3bj", "d4-atm"]
    spec = ik.ScanSpec(dimer=d, coordinate=ik.AtomPair(1, 2), factors=[1.0],
                       levels=["b3lyp/sto-3g"], dispersion=schemes)
    ds = ik.run_scan(spec, progress=False, executor="serial")
    moved = ik.Dimer(d.symbols, ds["coordinates"].values[0], d.fragment_a)
    for scheme in schemes[1:]:
        got = float(ds["e_disp_corr"].sel(dispersion=scheme).values[0, 0])
        assert got == pytest.approx(_dispersion_interaction_kcal(moved, scheme), abs=1e-9), scheme
        total = ds["e_int"].sel(dispersion=scheme).values[0, 0]
        bare = ds["e_int"].sel(dispersion="none").values[0, 0]
        assert total - bare == pytest.approx(got, abs=1e-9)


FLUORIDE_HF = """3
fluoride and hydrogen fluoride, test geometry
F   0.000000  0.000000  0.000000
F   0.000000  0.000000  2.300000
H   0.000000  0.000000  1.350000
"""


def test_d4_of_an_ionic_dimer_uses_the_fragment_charges():
    """D4 depends on the total charge (Caldeweyher et al. 2019, EEQ partial charges);
    an anion-molecule dimer must be evaluated with charge -1 on the anion."""
    d = ik.Dimer.from_xyz_string(FLUORIDE_HF, fragment_a=[0], charges=(-1, 0))
    spec = ik.ScanSpec(dimer=d, coordinate=ik.AtomPair(0, 2), factors=[1.0],
                       levels=["b3lyp/sto-3g"], dispersion=["d4"])
    ds = ik.run_scan(spec, progress=False, executor="serial")
    got = float(ds["e_disp_corr"].sel(dispersion="d4").values[0, 0])
    want = _dispersion_interaction_kcal(d, "d4", charges=(-1, 0))
    neutral = _dispersion_interaction_kcal(d, "d4")
    # measured: -0.411 kcal/mol with the charges, -0.246 kcal/mol for the neutral system
    assert abs(want - neutral) > 1e-2
    assert got == pytest.approx(want, abs=1e-9)
