"""Composite levels: a correlation energy extrapolated to the basis-set limit from two
consecutive correlation-consistent bases, plus an optional higher-level correction; or
MP2 in one basis plus a higher-level correction in a smaller one (additive form).

String form (interkit's own): ``"mp2/aug-cc-pvtz~aug-cc-pvqz + ccsd(t)/aug-cc-pvdz"``.
``A~B`` is the pair the correlation energy is extrapolated from (cardinal numbers X and
X+1, Hartree–Fock taken at B); ``+ method/basis`` adds the correction (that method's
correlation energy minus MP2's, both from one SCF in that basis). A trailing
``(all-electron)`` correlates every electron in all components.

``"mp2/aug-cc-pvtz + ccsd(t)/aug-cc-pvdz"`` (one base basis, any basis, correction
required) is the additive estimate of CCSD(T) in the base basis,
E(CCSD(T)/B) ~ E(MP2/B) + [E(CCSD(T)/b) - E(MP2/b)], as used for the S22 reference
interaction energies (Jurečka, Šponer, Černý, Hobza, Phys. Chem. Chem. Phys. 8, 1985
(2006)); nothing is extrapolated.

Every component is an ordinary computed level (a job per role and point); the
combination is made per interaction energy, component by component, so each carries its
own counterpoise correction.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from ..errors import InputError
from .level_names import split_correction
from .levels import LevelOfTheory
from .levels import parse_level as parse_plain_level

#: methods whose correlation energy can be extrapolated, and corrections on top of MP2
BASE_METHODS = ("mp2", "ccsd(t)")
CORRECTION_METHODS = ("ccsd(t)",)
EXTRAPOLATION_CITATION = ("T. Helgaker, W. Klopper, H. Koch, J. Noga, J. Chem. Phys. 106, 9639 (1997): "
                          "two-point X^-3 extrapolation of the correlation energy")
EXTRAPOLATION_FORMULA = "E_corr(CBS) = (Y^3 E_corr(Y) - X^3 E_corr(X)) / (Y^3 - X^3), Y = X + 1"
_CARDINALS = {"d": 2, "t": 3, "q": 4, "5": 5, "6": 6}
_ZETA = {v: k for k, v in _CARDINALS.items()}
#: correlation-consistent families: prefix (aug-, d-aug-, jun-/may-/apr-) + cc-p[c|wc]v + X + z
ADDITIVE_CITATION = ("P. Jurečka, J. Šponer, J. Černý, P. Hobza, Phys. Chem. Chem. Phys. 8, 1985 (2006): "
                     "MP2 interaction energy plus the CCSD(T) - MP2 difference in a smaller basis")
_CC_BASIS = re.compile(r"^((?:d-aug-|aug-|jun-|may-|apr-)?cc-p(?:c|wc)?v)([dtq56])z$")


def _cc_parts(basis: str) -> tuple[str, int] | None:
    m = _CC_BASIS.match(str(basis).strip().lower())
    if not m:
        return None
    return m.group(1), _CARDINALS[m.group(2)]


def cardinal_number(basis: str) -> int:
    """Cardinal number X of a correlation-consistent basis (``cc-pvtz`` -> 3).

    Recognised: ``cc-pvXz``, ``cc-pcvXz``, ``cc-pwcvXz`` with an optional ``aug-``,
    ``d-aug-``, ``jun-``, ``may-`` or ``apr-`` prefix; X in d, t, q, 5, 6 (2 to 6).

    Raises
    ------
    InputError
        For any other basis.
    """
    parts = _cc_parts(basis)
    if parts is None:
        raise InputError(f"composite basis: {basis!r} is not a correlation-consistent (cc-pVXZ-type) basis")
    return parts[1]


def check_consecutive(small: str, large: str, where: str = "composite") -> int:
    """Return X of ``small`` if ``small``/``large`` are consecutive bases of one cc family."""
    xs, xl = cardinal_number(small), cardinal_number(large)
    if _cc_parts(small)[0] != _cc_parts(large)[0]:
        raise InputError(f"level {where}: {small} and {large} are not of the same basis-set family")
    if xl != xs + 1:
        raise InputError(f"level {where}: {small} and {large} are not consecutive (cardinal numbers {xs} and {xl})")
    return xs


def extrapolate_inverse_cube(e_small, e_large, x_small: int):
    """Two-point X^-3 basis-set limit of a correlation energy (hartree, or any unit).

    ``E_inf = (Y^3 E_Y - X^3 E_X) / (Y^3 - X^3)`` with Y = X + 1 (Helgaker, Klopper,
    Koch, Noga, J. Chem. Phys. 106, 9639 (1997)). Works elementwise on arrays; being
    linear, it commutes with the counterpoise combination of energies.

    Parameters
    ----------
    e_small, e_large : float or array
        Correlation energies in the bases of cardinal number X and X + 1.
    x_small : int
        Cardinal number X of the smaller basis.
    """
    x = int(x_small)
    y = x + 1
    return (y ** 3 * e_large - x ** 3 * e_small) / (y ** 3 - x ** 3)


@dataclass(frozen=True)
class CompositeLevel:
    """An extrapolated level, optionally with a higher-level correction, or an MP2 level
    in one basis with a required higher-level correction (not extrapolated).

    Parameters
    ----------
    base_method : {'mp2', 'ccsd(t)'}
        Method whose correlation energy is extrapolated (MP2 for a single basis).
    bases : (str, str) or (str,)
        The consecutive pair, smaller first (e.g. ``('aug-cc-pvtz', 'aug-cc-pvqz')``), or
        one basis (any basis pyscf knows; then ``correction_method`` is required).
    correction_method : {None, 'ccsd(t)'}
        Adds E_corr(method) - E_corr(MP2) in ``correction_basis`` (same SCF); MP2 base only.
    correction_basis : str, optional
        Basis of the correction (any basis pyscf knows; usually smaller).
    frozen_core : bool
        Frozen core in every correlated component (default True).
    """

    base_method: str
    bases: tuple[str, str] | tuple[str]
    correction_method: str | None = None
    correction_basis: str | None = None
    frozen_core: bool = True

    def __post_init__(self):
        method = str(self.base_method).strip().lower()
        if method not in BASE_METHODS:
            raise InputError(f"level composite: method {self.base_method!r} is not one of {', '.join(BASE_METHODS)}")
        if isinstance(self.bases, str) or len(tuple(self.bases)) not in (1, 2) or \
                not all(str(b).strip() for b in self.bases):
            raise InputError(f"level composite: bases {self.bases!r} is not one basis-set name or a pair")
        bases = tuple(str(b).strip().lower() for b in self.bases)
        if len(bases) == 2:
            check_consecutive(*bases, f"{method}/{bases[0]}~{bases[1]}")
        corr = self.correction_method.strip().lower() if self.correction_method else None
        cbasis = self.correction_basis.strip().lower() if self.correction_basis else None
        if corr is not None and corr not in CORRECTION_METHODS:
            raise InputError(f"level composite: correction method {self.correction_method!r} is not one of "
                             f"{', '.join(CORRECTION_METHODS)}")
        if (corr is None) != (cbasis is None):
            raise InputError("level composite: a correction needs both a method and a basis")
        if corr is not None and method != "mp2":
            raise InputError(f"level composite: a {corr} correction applies to an MP2 base, not {method}")
        if len(bases) == 1 and corr is None:
            raise InputError(f"level composite: {method}/{bases[0]} without a correction is a plain level "
                             "(give it as such, or add '+ method/basis')")
        if not isinstance(self.frozen_core, bool):
            raise InputError(f"level composite frozen_core: {self.frozen_core!r} is not true or false")
        object.__setattr__(self, "base_method", method)
        object.__setattr__(self, "bases", bases)
        object.__setattr__(self, "correction_method", corr)
        object.__setattr__(self, "correction_basis", cbasis)

    @property
    def dispersion(self) -> None:
        """No post-hoc dispersion correction (as :attr:`LevelOfTheory.dispersion`)."""
        return None

    @property
    def extrapolates(self) -> bool:
        """True for the two-basis (extrapolated) form, False for the single-basis one."""
        return len(self.bases) == 2

    @property
    def x_small(self) -> int:
        """Cardinal number X of the smaller basis (extrapolated form only)."""
        if not self.extrapolates:
            raise InputError(f"level {self.label!r}: not extrapolated (one base basis), no cardinal number")
        return cardinal_number(self.bases[0])

    @property
    def label(self) -> str:
        """Canonical string form; :func:`parse_composite` reads it back."""
        text = f"{self.base_method}/{'~'.join(self.bases)}"
        if self.correction_method:
            text += f" + {self.correction_method}/{self.correction_basis}"
        return text + ("" if self.frozen_core else " (all-electron)")

    def _level(self, method: str, basis: str, **kw) -> LevelOfTheory:
        return LevelOfTheory(method, basis, frozen_core=self.frozen_core, **kw)

    def extrapolated(self) -> tuple[LevelOfTheory, LevelOfTheory]:
        """The two computed levels whose correlation energies are extrapolated."""
        if not self.extrapolates:
            raise InputError(f"level {self.label!r}: not extrapolated (one base basis)")
        return self._level(self.base_method, self.bases[0]), self._level(self.base_method, self.bases[1])

    def base_levels(self) -> tuple[LevelOfTheory, ...]:
        """The computed base levels: the extrapolated pair, or the single base level."""
        return tuple(self._level(self.base_method, b) for b in self.bases)

    def correction(self) -> LevelOfTheory | None:
        """The computed level of the correction (exact integrals), or None."""
        if not self.correction_method:
            return None
        return self._level(self.correction_method, self.correction_basis)

    def components(self) -> tuple[LevelOfTheory, ...]:
        """Levels computed as jobs: the base level(s), then the correction's level."""
        corr = self.correction()
        return self.base_levels() + ((corr,) if corr is not None else ())

    def derived(self) -> tuple[tuple[LevelOfTheory, LevelOfTheory, str], ...]:
        """Rows derived from the component jobs without a calculation of their own:
        ``(level, source level, record field)``. Hartree–Fock at the larger (or only) base
        basis (the SCF part of that MP2 job) and MP2 in the correction basis (from
        the correction job's own SCF; the field holds its MP2 correlation energy)."""
        large = self.base_levels()[-1]
        hf = LevelOfTheory("hf", large.basis, density_fitting=large.scf_fitted, jk_auxbasis=large.jk_auxbasis)
        out = [(hf, large, "scf_energy_hartree")]
        corr = self.correction()
        if corr is not None:
            mp2 = LevelOfTheory("mp2", corr.basis, density_fitting=False, correlation_fitting=False,
                                frozen_core=self.frozen_core)
            out.append((mp2, corr, "mp2_correlation_energy_hartree"))
        return tuple(out)

    def recipe(self) -> dict:
        """How the composite is made (JSON-safe), for the Dataset's attrs."""
        base = self.base_levels()
        hf = self.derived()[0][0]
        terms = [f"E_int[{hf.label}]",
                 f"CBS(E_int^corr[{base[0].label}], E_int^corr[{base[1].label}])" if self.extrapolates
                 else f"E_int^corr[{base[0].label}]"]
        if self.correction_method:
            terms.append(f"E_int^corr[{self.correction().label}] - E_int^corr[{self.derived()[1][0].label}]")
        return {
            "formula": " + ".join(terms),
            "extrapolation": EXTRAPOLATION_FORMULA if self.extrapolates else None,
            "bases": list(self.bases),
            "cardinal_numbers": [self.x_small, self.x_small + 1] if self.extrapolates else None,
            "base_method": self.base_method,
            "correction": (f"{self.correction_method} - mp2 in {self.correction_basis} (one SCF, exact integrals)"
                           if self.correction_method else None),
            "frozen_core": self.frozen_core,
            "citation": EXTRAPOLATION_CITATION if self.extrapolates else ADDITIVE_CITATION,
            "components": [lv.label for lv in self.components()],
            "derived": [lv.label for lv, _, _ in self.derived()],
        }

    def to_dict(self) -> dict:
        """Plain-data description (``kind = 'composite'``); :meth:`from_dict` inverts it."""
        return {"kind": "composite", "base_method": self.base_method, "bases": list(self.bases),
                "correction_method": self.correction_method, "correction_basis": self.correction_basis,
                "frozen_core": self.frozen_core}

    @classmethod
    def from_dict(cls, data: dict) -> CompositeLevel:
        """Inverse of :meth:`to_dict`."""
        data = {k: v for k, v in data.items() if k != "kind"}
        data["bases"] = tuple(data.get("bases", ()))
        return cls(**data)

    def with_settings(self, settings: dict | None) -> CompositeLevel:
        """This composite with level settings applied: ``frozen_core`` applies to every
        component; DFT grid settings do not apply; fitting settings are refused (the
        components' fitting is fixed by the recipe)."""
        import dataclasses

        out = self
        for key, value in (settings or {}).items():
            if key == "frozen_core":
                if not isinstance(value, bool):
                    raise InputError(f"level frozen_core: {value!r} is not true or false")
                out = dataclasses.replace(out, frozen_core=value)
            elif key in ("grid_level", "grid_pruning") or value is None or \
                    (key in ("density_fitting", "correlation_fitting") and value is True):
                continue  # does not apply, or is what the recipe uses anyway
            else:
                raise InputError(f"level {self.label!r}: setting {key} does not apply to a composite level "
                                 "(its components' integrals are fixed; list them as plain levels instead)")
        return out


def computed_levels(plain, composites) -> tuple[LevelOfTheory, ...]:
    """The levels a scan computes: ``plain`` in order, then every composite's components
    not already present (by label)."""
    out = list(plain)
    seen = {lv.label for lv in out}
    for comp in composites:
        for lv in comp.components():
            if lv.label not in seen:
                seen.add(lv.label)
                out.append(lv)
    return tuple(out)


def is_composite_text(text) -> bool:
    """True when ``text`` is a string in a composite form: it contains ``~``, or a
    ``method/basis`` followed by a ``+ method/basis`` correction."""
    return isinstance(text, str) and ("~" in text or split_correction(text)[1] is not None)


def parse_composite(text: str) -> CompositeLevel:
    """Read the string form (see the module docstring) into a :class:`CompositeLevel`."""
    raw = str(text).strip()
    frozen = True
    if raw.endswith(")") and " (" in raw:
        raw, _, note = raw[:-1].rpartition(" (")
        if note.strip().lower() != "all-electron":
            raise InputError(f"levels: {text!r}: note {note.strip()!r} is not 'all-electron' "
                             "(the only note a composite level takes)")
        frozen = False
    base, corr = split_correction(raw)
    plus = corr is not None
    if not plus and "~" in raw:  # '+' without a 'method/basis' after it
        base, plus, corr = raw.partition("+")
    corr = corr or ""
    if plus and not corr.strip():
        raise InputError(f"levels: {text!r}: nothing after '+' (expected '+ method/basis')")
    if base.count("~") > 1 or corr.count("~") or base.count("/") != 1 or (not plus and "~" not in base):
        raise InputError(f"levels: {text!r} is not of the form 'method/basisX~basisY [+ method/basis]' "
                         "or 'mp2/basis + method/basis'")
    method, _, pair = base.partition("/")
    bases = tuple(p.strip() for p in pair.split("~"))
    if not method.strip() or not all(bases):
        raise InputError(f"levels: {text!r} is not of the form 'method/basisX~basisY [+ method/basis]' "
                         "or 'mp2/basis + method/basis'")
    cmethod = cbasis = None
    if plus:
        if corr.count("/") != 1:
            raise InputError(f"levels: {text!r}: the correction {corr.strip()!r} is not 'method/basis'")
        cmethod, _, cbasis = (p.strip() for p in corr.partition("/"))
        if not cmethod or not cbasis:
            raise InputError(f"levels: {text!r}: the correction {corr.strip()!r} is not 'method/basis'")
    return CompositeLevel(method.strip(), bases, cmethod, cbasis, frozen)


def parse_level(text, **settings) -> LevelOfTheory | CompositeLevel:
    """Parse a level string: a composite (``'mp2/cc-pvdz~cc-pvtz + ccsd(t)/cc-pvdz'``,
    ``'mp2/cc-pvtz + ccsd(t)/cc-pvdz'``) into a :class:`CompositeLevel`, anything else as
    :func:`interkit.model.levels.parse_level` does."""
    if isinstance(text, CompositeLevel):
        return text.with_settings(settings) if settings else text
    if is_composite_text(text):
        return parse_composite(text).with_settings(settings)
    return parse_plain_level(text, **settings)


def apply_any_settings(level, settings: dict | None):
    """:func:`interkit.model.levels.apply_settings` for plain and composite levels."""
    from .levels import apply_settings

    if isinstance(level, CompositeLevel):
        return level.with_settings(settings)
    return apply_settings(level, settings)


def zeta_letter(x: int) -> str:
    """Letter of a cardinal number in basis names (3 -> 't')."""
    return _ZETA[int(x)]
