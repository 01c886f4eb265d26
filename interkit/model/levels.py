"""Levels of theory: parsing ``method/basis`` strings and validating them against pyscf.

A level is a method (HF, a DFT functional with an optional post-hoc dispersion
correction, DF-MP2, SCS-MP2 or CCSD(T)) and an orbital basis set.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import asdict, dataclass
from functools import lru_cache

from ..errors import InputError

WAVEFUNCTION_METHODS = ("hf", "mp2", "scs-mp2", "ccsd(t)")
#: post-hoc dispersion corrections: two-body D3 with zero or Becke–Johnson damping, D4;
#: the ``-atm`` variants add the three-body Axilrod–Teller–Muto term
DISPERSION_SCHEMES = ("d3zero", "d3bj", "d4", "d3zero-atm", "d3bj-atm", "d4-atm")
DISPERSION_LABELS = {"d3zero": "D3(0)", "d3bj": "D3(BJ)", "d4": "D4", "d3zero-atm": "D3(0)+ATM",
                     "d3bj-atm": "D3(BJ)+ATM", "d4-atm": "D4+ATM"}
#: functionals with their own nonlocal (VV10-type) correlation: no post-hoc correction
NONLOCAL_FUNCTIONALS = ("wb97m-v", "wb97x-v", "b97m-v", "vv10", "lc-vv10", "scan-rvv10")

#: SCS-MP2 spin-component scaling factors (Grimme, J. Chem. Phys. 118, 9095 (2003))
SCS_OPPOSITE_SPIN = 6.0 / 5.0
SCS_SAME_SPIN = 1.0 / 3.0


@dataclass(frozen=True)
class LevelOfTheory:
    """One electronic-structure model.

    Parameters
    ----------
    method : str
        ``'hf'``, ``'dft'``, ``'mp2'``, ``'scs-mp2'`` or ``'ccsd(t)'``.
    basis : str
        Orbital basis set name known to pyscf (e.g. ``'def2-svp'``).
    functional : str, optional
        Exchange-correlation functional (libxc/pyscf name) for ``method='dft'``.
    dispersion : str, optional
        Post-hoc dispersion correction for DFT: ``'d3zero'``, ``'d3bj'`` or ``'d4'``,
        optionally with the three-body term (``'d3bj-atm'`` etc.).
    density_fitting : bool
        Density-fit the Coulomb and exchange matrices of the SCF (RI-JK). MP2 always
        uses density fitting with the RI auxiliary basis matching ``basis``.
    """

    method: str
    basis: str
    functional: str | None = None
    dispersion: str | None = None
    density_fitting: bool = True

    def __post_init__(self):
        method = str(self.method).strip().lower()
        basis = str(self.basis).strip().lower()
        if not basis:
            raise InputError(f"level {self.method}/{self.basis}: basis is empty")
        object.__setattr__(self, "basis", basis)
        functional = self.functional.strip().lower() if self.functional else None
        dispersion = self.dispersion.strip().lower() if self.dispersion else None
        if method not in WAVEFUNCTION_METHODS + ("dft",):
            raise InputError(f"level method: {self.method!r} is not one of hf, dft, mp2, scs-mp2, ccsd(t)")
        if method == "dft" and not functional:
            raise InputError("level functional: a DFT level needs a functional")
        if method != "dft" and functional:
            raise InputError(f"level functional: {functional!r} given for non-DFT method {method!r}")
        if dispersion is not None:
            if dispersion not in DISPERSION_SCHEMES:
                raise InputError(
                    f"level dispersion: {dispersion!r} is not one of {', '.join(DISPERSION_SCHEMES)}"
                )
            if method != "dft":
                raise InputError(f"level dispersion: {dispersion!r} applies to DFT levels only, not {method!r}")
        if method == "dft":
            check_functional(functional)
            if dispersion is not None:
                check_dispersion_parameters(functional, dispersion)
        object.__setattr__(self, "method", method)
        object.__setattr__(self, "functional", functional)
        object.__setattr__(self, "dispersion", dispersion)
        object.__setattr__(self, "density_fitting", bool(self.density_fitting))

    @property
    def label(self) -> str:
        """Canonical ``method/basis`` string, e.g. ``'b3lyp-d3bj/def2-svp'``."""
        head = self.functional if self.method == "dft" else self.method
        if self.dispersion:
            head = f"{head}-{self.dispersion}"
        tail = "" if self.density_fitting else " (no-ri)"
        return f"{head}/{self.basis}{tail}"

    @property
    def is_scf_only(self) -> bool:
        """True for HF and DFT (no correlation step)."""
        return self.method in ("hf", "dft")

    def to_dict(self) -> dict:
        """Plain-data description."""
        return asdict(self)

    @classmethod
    def from_dict(cls, data: dict) -> LevelOfTheory:
        """Inverse of :meth:`to_dict`."""
        return cls(**data)


def parse_level(text: str | LevelOfTheory) -> LevelOfTheory:
    """Parse ``'method/basis'`` (e.g. ``'b3lyp-d3bj/def2-svp'``, ``'mp2/aug-cc-pvdz'``).

    A trailing ``' (no-ri)'`` switches off SCF density fitting.
    """
    if isinstance(text, LevelOfTheory):
        return text
    if not isinstance(text, str):
        raise InputError(f"levels: {text!r} is not a 'method/basis' string")
    raw = text.strip()
    density_fitting = True
    if raw.lower().endswith("(no-ri)"):
        density_fitting = False
        raw = raw[: -len("(no-ri)")].strip()
    if raw.count("/") != 1:
        raise InputError(f"levels: {text!r} is not of the form 'method/basis'")
    head, basis = (part.strip() for part in raw.split("/"))
    if not head or not basis:
        raise InputError(f"levels: {text!r} is not of the form 'method/basis'")
    head = head.lower()
    dispersion = None
    for scheme in sorted(DISPERSION_SCHEMES, key=len, reverse=True):
        if head.endswith("-" + scheme):
            dispersion = scheme
            head = head[: -len(scheme) - 1]
            break
    if head in WAVEFUNCTION_METHODS:
        return LevelOfTheory(head, basis, None, dispersion, density_fitting)
    return LevelOfTheory("dft", basis, head, dispersion, density_fitting)


@lru_cache(maxsize=256)
def check_functional(functional: str) -> None:
    """Raise InputError unless pyscf/libxc knows ``functional``."""
    from pyscf.dft import libxc

    try:
        libxc.parse_xc(functional)
    except (KeyError, ValueError, RuntimeError, TypeError):
        raise InputError(f"level functional: {functional!r} is unknown to pyscf/libxc") from None
    if functional.upper() in ("HF",):
        raise InputError("level functional: use method 'hf' for Hartree-Fock")


@lru_cache(maxsize=256)
def check_dispersion_parameters(functional: str, scheme: str) -> None:
    """Raise InputError if the dispersion library has no parameters for the pair."""
    from ..engine.dispersion import dispersion_energy_and_gradient

    if functional in NONLOCAL_FUNCTIONALS:
        raise InputError(f"level dispersion: functional {functional!r} has its own nonlocal (VV10) "
                         f"correlation; run it without {DISPERSION_LABELS[scheme]}")

    try:
        dispersion_energy_and_gradient(("H", "H"), [[0.0, 0.0, 0.0], [0.0, 0.0, 0.74]], functional, scheme)
    except InputError:
        raise
    except Exception:  # library-specific error types
        raise InputError(
            f"level dispersion: {DISPERSION_LABELS[scheme]} has no parameters for functional {functional!r}"
        ) from None


@lru_cache(maxsize=1024)
def _basis_has_element(basis: str, symbol: str) -> bool:
    import warnings

    from pyscf import gto

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            shells = gto.basis.load(basis, symbol)
    except Exception:
        return False
    return bool(shells)


def check_basis(level: LevelOfTheory, symbols: Sequence[str]) -> None:
    """Raise InputError unless the level's basis covers every element in ``symbols``."""
    missing = sorted({s for s in symbols if not _basis_has_element(level.basis, s)})
    if missing and all(not _basis_has_element(level.basis, s) for s in ("H", "C", "O")):
        raise InputError(f"level basis: {level.basis!r} is unknown to pyscf")
    if missing:
        raise InputError(f"level basis: {level.basis!r} has no functions for {', '.join(missing)}")
