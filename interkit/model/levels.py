"""Levels of theory: parsing ``method/basis`` strings and validating them against pyscf.

A level is a method (HF, a DFT functional with an optional post-hoc dispersion
correction, DF-MP2, SCS-MP2 or CCSD(T)) and an orbital basis set.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import asdict, dataclass
from functools import lru_cache

import numpy as np

from ..errors import InputError
from .level_names import DISPERSION_LABELS, display_label, split_correction  # noqa: F401 (display_label: public here)

WAVEFUNCTION_METHODS = ("hf", "mp2", "scs-mp2", "ccsd(t)")
#: post-hoc dispersion corrections: two-body D3 with zero or Becke–Johnson damping, D4;
#: the ``-atm`` variants add the three-body Axilrod–Teller–Muto term
DISPERSION_SCHEMES = ("d3zero", "d3bj", "d4", "d3zero-atm", "d3bj-atm", "d4-atm")
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
        Density-fit the Coulomb and exchange matrices of the SCF (default True). CCSD(T)
        always runs on an SCF with exact integrals.
    frozen_core : bool
        Correlated methods (MP2, SCS-MP2, CCSD(T)) leave the chemical core uncorrelated
        (default True; pyscf's ``chemcore`` counts, ECP cores excluded). None for HF/DFT.
    correlation_fitting : bool
        Density-fit the MP2/SCS-MP2 correlation step (default True); False uses exact
        four-index integrals. Always False for CCSD(T), None for HF/DFT.
    grid_level : int
        DFT integration grid level, 0 (coarse) to 9 (fine), pyscf's radial/angular
        tables (default 3). None for non-DFT levels.
    grid_pruning : str
        Angular pruning of the DFT grid: ``'nwchem'`` (default), ``'sg1'``,
        ``'treutler'`` or ``'none'``. None for non-DFT levels.
    jk_auxbasis : str, optional
        Fitting basis of the SCF's Coulomb and exchange (with ``density_fitting``);
        None: pyscf's choice for ``basis`` (its JK-fitting partner, def2 JK fitting for
        small bases, or an even-tempered set generated from the basis); the name used
        is recorded in the Dataset.
    ri_auxbasis : str, optional
        Fitting basis of a fitted MP2/SCS-MP2 correlation step; None: the SCF's own
        fitting basis when the SCF is fitted (pyscf's behaviour), else pyscf's RI
        basis matching ``basis``.

    Settings that do not apply to the method are stored as None. Non-default values
    appear in :attr:`label`.
    """

    method: str
    basis: str
    functional: str | None = None
    dispersion: str | None = None
    density_fitting: bool = True
    frozen_core: bool | None = True
    correlation_fitting: bool | None = None
    grid_level: int | None = None
    grid_pruning: str | None = None
    jk_auxbasis: str | None = None
    ri_auxbasis: str | None = None

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
            if dispersion is not None and functional in NONLOCAL_FUNCTIONALS:
                raise InputError(f"level dispersion: functional {functional!r} has its own nonlocal (VV10) "
                                 f"correlation; run it without {DISPERSION_LABELS[dispersion]}")
        object.__setattr__(self, "method", method)
        object.__setattr__(self, "functional", functional)
        object.__setattr__(self, "dispersion", dispersion)
        object.__setattr__(self, "density_fitting", _flag(self.density_fitting, "density_fitting", True))
        self._resolve_settings()

    def _resolve_settings(self) -> None:
        """Validate the numerical settings; store None where a setting does not apply."""
        method = self.method
        correlated = method in ("mp2", "scs-mp2", "ccsd(t)")
        frozen = _flag(self.frozen_core, "frozen_core", True) if correlated else None
        if method in ("mp2", "scs-mp2"):
            corr_fit = _flag(self.correlation_fitting, "correlation_fitting", True)
        elif method == "ccsd(t)":
            if _flag(self.correlation_fitting, "correlation_fitting", False):
                raise InputError("level correlation_fitting: True is not available for CCSD(T) "
                                 "(it runs with exact integrals)")
            corr_fit = False
        else:
            corr_fit = None
        grid_level = grid_pruning = None
        if method == "dft":
            grid_level = DEFAULT_GRID_LEVEL if self.grid_level is None else self.grid_level
            if isinstance(grid_level, bool) or not isinstance(grid_level, (int, np.integer)) \
                    or not 0 <= int(grid_level) <= 9:
                raise InputError(f"level grid_level: {self.grid_level!r} is not an integer from 0 to 9")
            grid_level = int(grid_level)
            grid_pruning = DEFAULT_GRID_PRUNING if self.grid_pruning is None else self.grid_pruning
            if not isinstance(grid_pruning, str) or grid_pruning.strip().lower() not in GRID_PRUNINGS:
                raise InputError(f"level grid_pruning: {self.grid_pruning!r} is not one of "
                                 f"{', '.join(GRID_PRUNINGS)}")
            grid_pruning = grid_pruning.strip().lower()
        scf_fitted = self.density_fitting and method != "ccsd(t)"
        jk = _aux_name(self.jk_auxbasis, "jk_auxbasis") if scf_fitted else None
        ri = _aux_name(self.ri_auxbasis, "ri_auxbasis") if corr_fit else None
        for name, value in (("frozen_core", frozen), ("correlation_fitting", corr_fit),
                            ("grid_level", grid_level), ("grid_pruning", grid_pruning),
                            ("jk_auxbasis", jk), ("ri_auxbasis", ri)):
            object.__setattr__(self, name, value)

    @property
    def scf_fitted(self) -> bool:
        """True when the SCF's Coulomb and exchange are density-fitted."""
        return self.density_fitting and self.method != "ccsd(t)"

    def with_exact_integrals(self) -> LevelOfTheory:
        """The same level with exact integrals in the SCF and the correlation step."""
        import dataclasses

        return dataclasses.replace(self, density_fitting=False, jk_auxbasis=None, ri_auxbasis=None,
                                   correlation_fitting=False if self.method != "hf" and
                                   self.method != "dft" else None)

    @property
    def label(self) -> str:
        """Canonical ``method/basis`` string, e.g. ``'b3lyp-d3bj/def2-svp'``."""
        head = self.functional if self.method == "dft" else self.method
        if self.dispersion:
            head = f"{head}-{self.dispersion}"
        notes = [] if self.density_fitting else ["exact scf"]
        if self.frozen_core is False:
            notes.append("all-electron")
        if self.correlation_fitting is False and self.method != "ccsd(t)":
            notes.append("exact correlation")
        if self.grid_level is not None and self.grid_level != DEFAULT_GRID_LEVEL:
            notes.append(f"grid {self.grid_level}")
        if self.grid_pruning is not None and self.grid_pruning != DEFAULT_GRID_PRUNING:
            notes.append(f"pruning {self.grid_pruning}")
        if self.jk_auxbasis:
            notes.append(f"jk-fit {self.jk_auxbasis}")
        if self.ri_auxbasis:
            notes.append(f"ri-fit {self.ri_auxbasis}")
        tail = f" ({', '.join(notes)})" if notes else ""
        return f"{head}/{self.basis}{tail}"

    def settings(self) -> dict:
        """The numerical settings of the level (None where one does not apply)."""
        return {"scf_fitting": self.scf_fitted, "frozen_core": self.frozen_core,
                "correlation_fitting": self.correlation_fitting, "grid_level": self.grid_level,
                "grid_pruning": self.grid_pruning, "jk_auxbasis": self.jk_auxbasis,
                "ri_auxbasis": self.ri_auxbasis}

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


#: DFT grid defaults: level 2 with NWChem-style angular pruning (pyscf's default is 3).
#: Chosen by the measured grid error of counterpoise E_int and forces against level 7
#: (README, "DFT grids"; benchmarks/grid_error.py): level 2 keeps E_int within
#: 0.005 kcal/mol and forces within 0.01 kcal/mol/angstrom, level 1 does not for forces
DEFAULT_GRID_LEVEL = 2
DEFAULT_GRID_PRUNING = "nwchem"
GRID_PRUNINGS = ("nwchem", "sg1", "treutler", "none")
#: level settings that can be given for every level at once (TOML ``[calculation.settings]``)
LEVEL_SETTINGS = ("density_fitting", "frozen_core", "correlation_fitting", "grid_level", "grid_pruning",
                  "jk_auxbasis", "ri_auxbasis")


def _flag(value, name: str, default: bool) -> bool:
    if value is None:
        return default
    if not isinstance(value, (bool, np.bool_)):
        raise InputError(f"level {name}: {value!r} is not true or false")
    return bool(value)


def _aux_name(value, name: str) -> str | None:
    if value is None:
        return None
    if not isinstance(value, str) or not value.strip():
        raise InputError(f"level {name}: {value!r} is not a basis-set name")
    return value.strip().lower()


def apply_settings(level: LevelOfTheory, settings: dict | None) -> LevelOfTheory:
    """``level`` with the given settings (keys of ``LEVEL_SETTINGS``) replaced; settings
    that do not apply to the level's method are ignored."""
    import dataclasses

    if not settings:
        return level
    for key, value in settings.items():
        if key not in LEVEL_SETTINGS:
            raise InputError(f"level setting {key!r} is not recognised (allowed: {', '.join(LEVEL_SETTINGS)})")
        _check_setting(key, value)
    if level.method == "ccsd(t)":  # always exact integrals (and so labelled)
        settings = {k: v for k, v in settings.items() if k != "correlation_fitting"}
    return dataclasses.replace(level, **settings)


def _check_setting(name: str, value) -> None:
    """Validate one setting's value whatever the method (so a bad value given for every
    level is refused even where it does not apply)."""
    if name in ("density_fitting", "frozen_core", "correlation_fitting"):
        _flag(value, name, True)
    elif name in ("jk_auxbasis", "ri_auxbasis"):
        _aux_name(value, name)
    elif name == "grid_level":
        LevelOfTheory("dft", "sto-3g", "lda,vwn", grid_level=value)
    elif name == "grid_pruning":
        LevelOfTheory("dft", "sto-3g", "lda,vwn", grid_pruning=value)


#: label notes of the settings that take no value, and the setting each one sets
_FLAG_NOTES = {"exact scf": ("density_fitting", False), "exact correlation": ("correlation_fitting", False),
               "all-electron": ("frozen_core", False)}
#: label notes that carry a value: note word -> setting
_VALUE_NOTES = {"grid": "grid_level", "pruning": "grid_pruning", "jk-fit": "jk_auxbasis", "ri-fit": "ri_auxbasis"}


def _settings_from_notes(notes: str, text: str) -> dict:
    out = {}
    for note in (n.strip().lower() for n in notes.split(",")):
        word, _, value = note.partition(" ")
        if note in _FLAG_NOTES:
            key, val = _FLAG_NOTES[note]
        elif word in _VALUE_NOTES and value.strip():
            key, val = _VALUE_NOTES[word], value.strip()
            if key == "grid_level":
                try:
                    val = int(val)
                except ValueError:
                    raise InputError(f"levels: {text!r}: grid {val!r} is not a whole number") from None
        else:
            raise InputError(f"levels: {text!r}: note {note!r} is not one of "
                             f"{', '.join(list(_FLAG_NOTES) + [w + ' ...' for w in _VALUE_NOTES])}")
        out[key] = val
    return out


def parse_level(text: str | LevelOfTheory, **settings) -> LevelOfTheory:
    """Parse ``'method/basis'`` (e.g. ``'b3lyp-d3bj/def2-svp'``, ``'mp2/aug-cc-pvdz'``).

    A label as :attr:`LevelOfTheory.label` writes it reads back to the same level: the
    notes in parentheses after the basis set the non-default settings, separated by
    commas: ``exact scf`` (no SCF density fitting), ``exact correlation``,
    ``all-electron``, ``grid N``, ``pruning NAME``, ``jk-fit BASIS``, ``ri-fit BASIS``;
    e.g. ``'mp2/def2-svp (exact scf, all-electron)'``. Keyword arguments set the same
    settings (``frozen_core=False``, ``grid_level=4``, ...; see :class:`LevelOfTheory`).
    """
    if settings:
        return apply_settings(parse_level(text), settings)
    if isinstance(text, str) and text.strip().endswith(")") and " (" in text:
        head, _, notes = text.strip()[:-1].rpartition(" (")
        return apply_settings(parse_level(head), _settings_from_notes(notes, text))
    if isinstance(text, LevelOfTheory):
        return text
    if not isinstance(text, str):
        raise InputError(f"levels: {text!r} is not a 'method/basis' string")
    raw = text.strip()
    density_fitting = True
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
    for s in sorted(set(symbols)):
        if basis_ecp(level.basis, s) is None and _valence_only(level.basis, s):
            raise InputError(f"level basis: {level.basis!r} is a valence basis for {s} but pyscf has "
                             f"no effective core potential of it for {s}")
    for name in ("jk_auxbasis", "ri_auxbasis"):
        aux = getattr(level, name)
        if aux is None:
            continue
        lacking = sorted({s for s in symbols if not _basis_has_element(aux, s)})
        if lacking:
            raise InputError(f"level {name}: {aux!r} has no functions for {', '.join(lacking)}")


def _quiet(call, *args):
    """Run a pyscf basis-library call without its prints and warnings."""
    import contextlib
    import io
    import warnings

    with warnings.catch_warnings(), contextlib.redirect_stdout(io.StringIO()), \
            contextlib.redirect_stderr(io.StringIO()):
        warnings.simplefilter("ignore")
        return call(*args)


@lru_cache(maxsize=1024)
def basis_ecp(basis: str, symbol: str) -> str | None:
    """Name of the effective core potential the definition of ``basis`` carries for
    ``symbol`` in pyscf's library (the basis name itself), or None if it carries none."""
    from pyscf import gto

    try:
        ecp = _quiet(gto.basis.load_ecp, basis, symbol)
    except Exception:  # pyscf raises several types for "no ECP here"
        return None
    return basis if ecp and ecp[0] > 0 else None


def ecp_assignment(basis: str, symbols: Sequence[str]) -> dict[str, str]:
    """ECP of every element in ``symbols`` (real atoms) whose basis definition carries one."""
    out = {}
    for s in sorted(set(symbols)):
        name = basis_ecp(basis, s)
        if name:
            out[s] = name
    return out


@lru_cache(maxsize=1024)
def _valence_only(basis: str, symbol: str) -> bool:
    """True when ``basis`` has fewer contracted functions of some angular momentum than
    the neutral atom has occupied shells of it: the basis was made for an ECP core."""
    from pyscf import gto
    from pyscf.data import elements

    shells = _quiet(gto.basis.load, basis, symbol)
    counts = [0, 0, 0, 0]
    for sh in shells:
        ang = sh[0]
        prims = [p for p in sh[1:] if isinstance(p, (list, tuple))]
        if ang < 4 and prims:
            counts[ang] += len(prims[0]) - 1
    config = elements.CONFIGURATION[elements.charge(symbol)]
    capacity = (2, 6, 10, 14)
    return any(counts[ang] < -(-config[ang] // capacity[ang]) for ang in range(4))


#: preferred references, most accurate first (common practice)
REFERENCE_PREFERENCE = ("ccsd(t)", "mp2", "scs-mp2")


def default_reference(labels: list[str]) -> str:
    """The most accurate wavefunction level among ``labels`` (else the first label): the
    one rule by which reports, ``interkit compare`` and the comparison widget pick a
    reference curve when none is named. Composite (basis-set limit) levels come first; a
    single-basis composite ``mp2/B + ccsd(t)/b`` ranks as its correction's method, after
    the plain levels of that method."""
    for label in labels:
        if "~" in label:
            return label
    corrections = {label: split_correction(label)[1] for label in labels}
    for method in REFERENCE_PREFERENCE:
        for label in labels:
            if corrections[label] is None and label.split("/")[0] == method:
                return label
        for label in labels:
            if corrections[label] is not None and corrections[label].split("/")[0].strip() == method:
                return label
    return labels[0]
