"""Post-hoc dispersion corrections D3(0), D3(BJ) and D4 through pyscf-dispersion.

The corrections depend on the nuclear positions only, so they are evaluated on the real
(non-ghost) atoms of a calculation and added to its SCF energy; the density is unchanged.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from ..errors import InputError
from ..units import ANGSTROM_TO_BOHR


def dispersion_energy_and_gradient(
    symbols: Sequence[str], coords_angstrom, functional: str, scheme: str
) -> tuple[float, np.ndarray]:
    """Dispersion energy (hartree) and its nuclear gradient (hartree/bohr).

    Parameters
    ----------
    symbols : sequence of str
        Element symbols of the real atoms.
    coords_angstrom : array-like, shape (n, 3)
        Positions in angstrom.
    functional : str
        Functional whose damping parameters are used.
    scheme : {'d3zero', 'd3bj', 'd4'}
    """
    from pyscf import gto

    if len(symbols) == 0:
        return 0.0, np.zeros((0, 3))
    coords = np.asarray(coords_angstrom, dtype=float)
    mol = gto.Mole()
    mol.atom = [(s, tuple(x)) for s, x in zip(symbols, coords * ANGSTROM_TO_BOHR)]
    mol.unit = "Bohr"
    mol.basis = {s: [[0, [1.0, 1.0]]] for s in set(symbols)}  # placeholder: only nuclei matter
    mol.spin = None
    mol.verbose = 0
    mol.build(parse_arg=False)
    if scheme in ("d3zero", "d3bj"):
        from pyscf.dispersion import dftd3

        model = dftd3.DFTD3Dispersion(mol, functional, version=scheme, atm=False)
    elif scheme == "d4":
        from pyscf.dispersion import dftd4

        model = dftd4.DFTD4Dispersion(mol, functional, atm=False)
    else:
        raise InputError(f"dispersion: {scheme!r} is not one of d3zero, d3bj, d4")
    result = model.get_dispersion(grad=True)
    return float(np.asarray(result["energy"])), np.asarray(result["gradient"], dtype=float)
