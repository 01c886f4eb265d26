"""Post-hoc dispersion corrections D3(0), D3(BJ) and D4 through pyscf-dispersion.

The corrections depend on the nuclear positions only, so they are evaluated on the real
(non-ghost) atoms of a calculation and added to its SCF energy; the density is unchanged.
"""

from __future__ import annotations

from collections.abc import Sequence
from functools import lru_cache

import numpy as np

from ..errors import InputError, NotAvailableError
from ..units import ANGSTROM_TO_BOHR


def dispersion_energy_and_gradient(
    symbols: Sequence[str], coords_angstrom, functional: str, scheme: str, charge: int = 0
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
    scheme : {'d3zero', 'd3bj', 'd4', 'd3zero-atm', 'd3bj-atm', 'd4-atm'}
        ``-atm`` adds the three-body Axilrod–Teller–Muto term.
    charge : int
        Net charge of these atoms: D4's reference polarisabilities depend on the atomic
        partial charges, which follow the total charge (D3 ignores it).
    """
    from pyscf import gto

    if len(symbols) == 0:
        return 0.0, np.zeros((0, 3))
    coords = np.asarray(coords_angstrom, dtype=float)
    mol = gto.Mole()
    mol.atom = [(s, tuple(x)) for s, x in zip(symbols, coords * ANGSTROM_TO_BOHR)]
    mol.unit = "Bohr"
    mol.basis = {s: [[0, [1.0, 1.0]]] for s in set(symbols)}  # placeholder: only nuclei matter
    mol.charge = int(charge)
    mol.spin = None
    mol.verbose = 0
    mol.build(parse_arg=False)
    base, _, three_body = scheme.partition("-")
    atm = three_body == "atm"
    if three_body not in ("", "atm"):
        base = ""
    if base in ("d3zero", "d3bj"):
        from pyscf.dispersion import dftd3

        model = dftd3.DFTD3Dispersion(mol, functional, version=base, atm=atm)
    elif base == "d4":
        from pyscf.dispersion import dftd4

        model = dftd4.DFTD4Dispersion(mol, functional, atm=atm)
    else:
        raise InputError(f"dispersion: {scheme!r} is not one of d3zero, d3bj, d4 (optionally with -atm)")
    result = model.get_dispersion(grad=True)
    return float(np.asarray(result["energy"])), np.asarray(result["gradient"], dtype=float)


@lru_cache(maxsize=256)
def check_dispersion_parameters(functional: str, scheme: str) -> None:
    """Raise InputError if the dispersion library has no parameters for the pair.

    Raises
    ------
    InputError
        The functional has its own nonlocal correlation, or the library has no damping
        parameters for it.
    NotAvailableError
        The dispersion library (pyscf-dispersion) is not installed: that is not a
        missing parameter set, and says so.
    """
    from ..model.levels import DISPERSION_LABELS, NONLOCAL_FUNCTIONALS

    if functional in NONLOCAL_FUNCTIONALS:
        raise InputError(f"level dispersion: functional {functional!r} has its own nonlocal (VV10) "
                         f"correlation; run it without {DISPERSION_LABELS[scheme]}")
    try:
        import pyscf.dispersion  # noqa: F401
    except ImportError:
        raise NotAvailableError(f"level dispersion: {DISPERSION_LABELS[scheme]} needs the pyscf-dispersion "
                                "package, which is not installed (pip install pyscf-dispersion)") from None
    try:
        dispersion_energy_and_gradient(("H", "H"), [[0.0, 0.0, 0.0], [0.0, 0.0, 0.74]], functional, scheme)
    except InputError:
        raise
    except Exception:  # the libraries raise their own error types for unknown functionals
        raise InputError(
            f"level dispersion: {DISPERSION_LABELS[scheme]} has no parameters for functional {functional!r}"
        ) from None


def scheme_unavailable_reason(functional: str, scheme: str) -> str:
    """Why ``scheme`` cannot correct ``functional`` ('' when it can)."""
    try:
        check_dispersion_parameters(functional, scheme)
    except InputError as exc:
        return str(exc).removeprefix("level dispersion: ")
    return ""


def dispersion_terms(jobs, schemes: Sequence[str], with_gradient: bool = False) -> dict:
    """Post-hoc dispersion energies of DFT calculations, for several schemes at once.

    The corrections depend on the real atoms' positions only (ghost atoms carry no
    nucleus), so they are evaluated after the SCF, which all schemes share.

    Parameters
    ----------
    jobs : iterable of Job
        Calculations; non-DFT jobs are skipped.
    schemes : sequence of str
        Scheme names (``'none'`` is skipped).
    with_gradient : bool
        Also return the gradient, one row per atom of the job (ghost rows zero).

    Returns
    -------
    dict
        ``(job key, scheme) -> {'energy_hartree': float, 'gradient_hartree_per_bohr':
        list or None}``; pairs a scheme cannot serve are absent (see
        :func:`scheme_unavailable_reason`).
    """
    out: dict = {}
    usable: dict = {}
    for job in jobs:
        if job.level.method != "dft":
            continue
        real = job.real_atoms
        symbols = [job.symbols[i] for i in real]
        coords = [job.coordinates[i] for i in real]
        for scheme in schemes:
            if scheme == "none":
                continue
            pair = (job.level.functional, scheme)
            if pair not in usable:
                usable[pair] = not scheme_unavailable_reason(*pair)
            if not usable[pair]:
                continue
            energy, grad = dispersion_energy_and_gradient(symbols, coords, job.level.functional, scheme,
                                                          charge=job.charge)
            full = None
            if with_gradient:
                full = np.zeros((len(job.symbols), 3))
                full[real] = grad
                full = full.tolist()
            out[(job.key, scheme)] = {"energy_hartree": energy, "gradient_hartree_per_bohr": full}
    return out
