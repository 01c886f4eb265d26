"""Level labels as the trade prints them: ``b3lyp-d3bj/def2-svp`` -> ``B3LYP-D3(BJ)/def2-SVP``.

Datasets, store keys and the CLI's ``--reference`` keep the canonical lower-case labels
(:attr:`interkit.model.levels.LevelOfTheory.label`); :func:`display_label` is for what a
person reads: legends, axis labels, report and CLI tables.
"""

from __future__ import annotations

import re

#: post-hoc dispersion corrections as printed (scheme -> text)
DISPERSION_LABELS = {"d3zero": "D3(0)", "d3bj": "D3(BJ)", "d4": "D4", "d3zero-atm": "D3(0)+ATM",
                     "d3bj-atm": "D3(BJ)+ATM", "d4-atm": "D4+ATM"}
#: methods and functionals whose usual spelling is not simply upper case
_METHOD_TEXT = {
    "hf": "HF", "mp2": "MP2", "scs-mp2": "SCS-MP2", "ccsd(t)": "CCSD(T)", "sapt0": "SAPT0",
    "tpssh": "TPSSh", "revpbe": "revPBE", "revpbe0": "revPBE0", "r2scan": "r²SCAN", "rscan": "rSCAN",
    "m06-l": "M06-L", "mn15-l": "MN15-L", "lc-wpbe": "LC-ωPBE", "lc-wpbeh": "LC-ωPBEh",
    "wpbeh": "ωPBEh", "lda,vwn": "LDA (VWN)", "b97-d": "B97-D", "scan-rvv10": "SCAN-rVV10",
}
#: basis-set families with a fixed spelling
_BASIS_TEXT = {"sto-3g": "STO-3G", "sto-6g": "STO-6G", "minao": "MINAO", "ano-rcc": "ANO-RCC"}
_CC = re.compile(r"^((?:[a-z]+-)*)cc-p(w?)(c?)v(\d|[dtq56])z(.*)$")
_POPLE = re.compile(r"^(\d-\d+\+*)g(.*)$")


def method_text(head: str) -> str:
    """A method or functional name as printed (``wb97x-d`` -> ``ωB97X-D``)."""
    head = head.strip().lower()
    if head in _METHOD_TEXT:
        return _METHOD_TEXT[head]
    if head.startswith("wb97"):
        return "ω" + head[1:].upper()
    return head.upper()


def basis_text(basis: str) -> str:
    """A basis-set name in its usual capitalisation (``aug-cc-pvdz`` -> ``aug-cc-pVDZ``,
    ``def2-svp`` -> ``def2-SVP``, ``6-31g*`` -> ``6-31G*``); an unknown family is left as
    written."""
    b = basis.strip().lower()
    if b in _BASIS_TEXT:
        return _BASIS_TEXT[b]
    if b.startswith(("def2-", "ma-def2-")):
        head, _, tail = b.rpartition("def2-")
        return f"{head}def2-{tail.upper()}"
    m = _CC.match(b)
    if m:
        prefix, w, core, zeta, tail = m.groups()
        return f"{prefix}cc-p{w}{core.upper()}V{zeta.upper()}Z{tail.upper()}"
    m = _POPLE.match(b)
    if m:
        return f"{m.group(1)}G{m.group(2)}"
    return basis


def display_label(level_label: str) -> str:
    """A level label as the trade writes it.

    ``'b3lyp-d3bj/def2-svp'`` -> ``'B3LYP-D3(BJ)/def2-SVP'``, ``'mp2/aug-cc-pvdz (exact
    scf)'`` -> ``'MP2/aug-cc-pVDZ (exact scf)'``: the method or functional as the trade
    spells it, the dispersion correction (D3(0), D3(BJ), D4, +ATM), the basis set in its
    usual capitalisation, settings notes unchanged. Text that is not a ``method/basis``
    label comes back unchanged.
    """
    text = str(level_label)
    if "~" in text or _is_additive(text):
        return _composite_text(text)
    core, notes = text, ""
    if text.endswith(")") and " (" in text:
        core, _, rest = text.rpartition(" (")
        notes = f" ({rest}"
    if core.count("/") != 1:
        return text
    head, basis = core.split("/")
    if not head.strip() or not basis.strip():
        return text
    head = head.strip().lower()
    dispersion = ""
    for scheme in sorted(DISPERSION_LABELS, key=len, reverse=True):
        if head.endswith("-" + scheme):
            dispersion = "-" + DISPERSION_LABELS[scheme]
            head = head[: -len(scheme) - 1]
            break
    return f"{method_text(head)}{dispersion}/{basis_text(basis)}{notes}"


def _is_additive(text: str) -> bool:
    """True for the single-basis composite form ``'mp2/B + ccsd(t)/b'`` (a ``+`` followed
    by ``method/basis``; a ``+`` inside a basis name like ``6-31+g*`` is not one)."""
    return split_correction(text)[1] is not None


def split_correction(text: str) -> tuple[str, str | None]:
    """``text`` split at the ``+`` that starts a ``+ method/basis`` correction:
    ``(base, correction)``, or ``(text, None)`` without one. A ``+`` inside a basis name
    (``6-31+g*``) does not start a correction: the correction's method has no ``+``."""
    for pos in (i for i, ch in enumerate(text) if ch == "+"):
        head, tail = text[:pos], text[pos + 1:]
        if "/" in head and tail.count("/") == 1 and "+" not in tail.partition("/")[0]:
            return head, tail
    return text, None


def _composite_text(text: str) -> str:
    """``'mp2/aug-cc-pvtz~aug-cc-pvqz + ccsd(t)/aug-cc-pvdz'`` ->
    ``'MP2/CBS(aug-cc-pVTZ, aug-cc-pVQZ; X^-3) + ΔCCSD(T)/aug-cc-pVDZ'``,
    ``'mp2/aug-cc-pvtz + ccsd(t)/aug-cc-pvdz'`` -> ``'MP2/aug-cc-pVTZ + ΔCCSD(T)/aug-cc-pVDZ'``."""
    core, notes = text, ""
    if text.endswith(")") and " (" in text:
        core, _, rest = text.rpartition(" (")
        notes = f" ({rest}"
    base, corr = split_correction(core)
    plus = corr is not None
    if not plus and "~" in core:
        base, plus, corr = core.partition("+")
    if base.count("/") != 1 or base.count("~") > 1 or (not plus and "~" not in base):
        return text
    method, _, pair = base.partition("/")
    if "~" in pair:
        small, _, large = (p.strip() for p in pair.partition("~"))
        out = f"{method_text(method)}/CBS({basis_text(small)}, {basis_text(large)}; X^-3)"
    else:
        out = f"{method_text(method)}/{basis_text(pair.strip())}"
    if plus:
        if corr.count("/") != 1:
            return text
        cm, _, cb = (p.strip() for p in corr.partition("/"))
        out += f" + Δ{method_text(cm)}/{basis_text(cb)}"
    return out + notes
