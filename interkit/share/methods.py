"""A methods paragraph for a paper, written from what a scan Dataset records.

:func:`methods_text` describes the scan (system, coordinate, points), every level of
theory (method, functional, dispersion correction, orbital and fitting basis sets,
integration grid, frozen core, SCF threshold), the counterpoise scheme, the forces and
the SAPT0 decomposition with its bases, and the program versions, with numbered
citations and a reference list; :func:`methods_bibtex` gives the same references as
BibTeX (see :mod:`interkit.share.references`: the entries are recalled from memory and
must be checked).

Settings the Dataset records (``spec_json``, the version attributes, the decomposition
bases) are written as recorded. A setting it does not record is described by interkit's
documented default and marked "(default)"; :data:`RECORDED_FIELDS` names the level or
spec fields that, once a Dataset records them, replace the default.
"""

from __future__ import annotations

import json

import numpy as np
import xarray as xr

from . import references as refs

#: setting -> names of the level (or spec) field that records it; a recorded value
#: replaces the default text of :func:`_default`
RECORDED_FIELDS = {
    "frozen_core": ("frozen_core",),
    "grid": ("grid", "grid_level"),
    "jk_fitting_basis": ("jk_fitting_basis", "jk_auxbasis", "auxbasis"),
    "ri_fitting_basis": ("ri_fitting_basis", "ri_auxbasis"),
}
METHOD_NAMES = {"hf": "Hartree–Fock", "mp2": "MP2", "scs-mp2": "SCS-MP2", "ccsd(t)": "CCSD(T)"}
DISPERSION_NAMES = {"d3zero": "D3 dispersion correction with zero damping, D3(0)",
                    "d3bj": "D3 dispersion correction with Becke–Johnson damping, D3(BJ)",
                    "d4": "D4 dispersion correction"}
BASIS_NAMES = {"def2-svp": "def2-SVP", "def2-tzvp": "def2-TZVP", "def2-tzvpp": "def2-TZVPP",
               "def2-qzvp": "def2-QZVP", "def2-svpd": "def2-SVPD", "def2-tzvpd": "def2-TZVPD",
               "sto-3g": "STO-3G"}


class _Citations:
    """Citations numbered in order of first appearance in the finished text."""

    MARK = "\x00"

    def __init__(self):
        self.keys: list[str] = []

    def cite(self, keys) -> str:
        keys = [k for k in keys]
        return f" {self.MARK}{','.join(keys)}{self.MARK}" if keys else ""

    def finish(self, text: str) -> str:
        """Replace the markers of :meth:`cite` by ``[n, m]`` (numbers in reading order)."""
        parts = text.split(self.MARK)
        for i in range(1, len(parts), 2):
            nums = []
            for key in parts[i].split(","):
                if key not in self.keys:
                    self.keys.append(key)
                nums.append(self.keys.index(key) + 1)
            parts[i] = "[" + ", ".join(str(n) for n in sorted(set(nums))) + "]"
        return "".join(parts)


def _formula(symbols: list[str]) -> str:
    """Hill-order formula (C, H, then alphabetical; alphabetical without carbon)."""
    counts = {s: symbols.count(s) for s in sorted(set(symbols))}
    order = (["C", "H"] if "C" in counts else []) + [s for s in counts if "C" not in counts or s not in ("C", "H")]
    return "".join(f"{s}{counts[s] if counts[s] > 1 else ''}" for s in order)


def _basis_name(basis: str) -> str:
    if basis in BASIS_NAMES:
        return BASIS_NAMES[basis]
    if "cc-p" in basis:
        head, _, tail = basis.partition("cc-p")
        return f"{head}cc-p{tail.upper()}"
    return basis


def _libxc_ids(functional: str) -> str:
    """`` (functional id 402)``: libxc's numbers for the functional, as pyscf parses it."""
    try:
        from pyscf.dft import libxc

        ids = [str(i) for i, _ in libxc.parse_xc(functional)[1]]
    except Exception:  # an unknown name: say nothing rather than guess
        return ""
    return f" (libxc functional id{'s' if len(ids) > 1 else ''} {', '.join(ids)})" if ids else ""


def _recorded(level: dict, spec: dict, setting: str):
    for name in RECORDED_FIELDS[setting]:
        for source in (level, spec):
            if source.get(name) is not None:
                return source[name]
    return None


def _pyscf_fitting_names(basis: str, symbols: list[str], mp2fit: bool) -> str:
    """The fitting basis pyscf picks by default for ``basis`` (names per element)."""
    from pyscf import df, gto

    elements = sorted(set(symbols))
    try:
        mol = gto.M(atom=[(s, (0.0, 0.0, 2.0 * k)) for k, s in enumerate(elements)], basis=basis,
                    spin=None, verbose=0)
        aux = df.make_auxbasis(mol, mp2fit=mp2fit)
    except Exception:  # pyscf raises several types for unknown bases
        return "pyscf's default fitting basis"
    names = {s: aux[s] if isinstance(aux, dict) and isinstance(aux.get(s), str) else "even-tempered"
             for s in elements}
    if len(set(names.values())) == 1:
        return next(iter(names.values()))
    return "; ".join(f"{s}: {n}" for s, n in names.items())


def _fit_refs(names: str) -> list[str]:
    out = []
    for part in names.split(";"):
        for key in refs.fitting_references(part.split(":")[-1].split()[0] if part.strip() else ""):
            if key not in out:
                out.append(key)
    return out


def _cited(text: str, cite: _Citations) -> str:
    """``text`` with the citation of its fitting-basis names before any parenthesis."""
    head, sep, tail = text.partition(" (")
    return head + cite.cite(_fit_refs(head)) + sep + tail


def _level_label(level: dict) -> str:
    head = level["functional"].upper() if level["method"] == "dft" else METHOD_NAMES[level["method"]]
    if level.get("dispersion"):
        from ..model.levels import DISPERSION_LABELS

        head += "-" + DISPERSION_LABELS[level["dispersion"]]
    return f"{head}/{_basis_name(level['basis'])}"


def _default(setting: str, level: dict, symbols: list[str], pyscf_note: str) -> str:
    """interkit's documented default of ``setting`` for ``level`` (text)."""
    if setting == "grid":
        from ..model.levels import DEFAULT_GRID_LEVEL

        return (f"exchange-correlation integrals on pyscf's integration grid (default: grid level {DEFAULT_GRID_LEVEL}, "
                "Treutler–Ahlrichs radial and Lebedev angular grids, Becke partitioning, NWChem pruning, "
                "no density-based screening of grid points)")
    if setting == "frozen_core":
        return "frozen core orbitals (default: pyscf's chemical core, e.g. the 1s shell of C, N, O and F)"
    names = _pyscf_fitting_names(level["basis"], symbols, setting == "ri_fitting_basis")
    return f"{names} fitting basis (default: pyscf's choice for {level['basis']}{pyscf_note})"


def _setting(setting: str, level: dict, spec: dict, symbols: list[str], pyscf_note: str) -> str:
    value = _recorded(level, spec, setting)
    if setting == "frozen_core" and isinstance(value, bool):  # a flag, not a name to print
        return ("frozen core orbitals (pyscf's chemical core, e.g. the 1s shell of C, N, O and F)" if value
                else "all electrons correlated (no frozen core)")
    return str(value) if value is not None else _default(setting, level, symbols, pyscf_note)


def _level_sentence(level: dict, spec: dict, symbols: list[str], schemes, cite: _Citations,
                    pyscf_note: str) -> tuple[str, str]:
    """(method and basis phrase, sentence of its numerical settings)."""
    method, basis = level["method"], level["basis"]
    if method == "dft":
        fn = level["functional"]
        known = refs.FUNCTIONAL_REFERENCES.get(fn)
        head = f"the {fn.upper()} functional" + (cite.cite(known) if known else
                                                 " (for its original papers see the libxc documentation)")
        head += f" as defined in libxc{_libxc_ids(fn)}" + cite.cite(["lehtola2018"])
    else:
        head = METHOD_NAMES[method] + cite.cite(refs.METHOD_REFERENCES.get(method, ()))
        if method == "scs-mp2":
            from ..model.levels import SCS_OPPOSITE_SPIN, SCS_SAME_SPIN

            head += (f" (opposite-spin correlation scaled by {SCS_OPPOSITE_SPIN:.4g}, same-spin by "
                     f"{SCS_SAME_SPIN:.4g})")
    disp = [level["dispersion"]] if level.get("dispersion") else [s for s in (schemes or []) if s != "none"]
    if method == "dft" and disp:
        from ..model.levels import DISPERSION_LABELS

        parts = []
        for s in disp:
            base, atm = s.removesuffix("-atm"), s.endswith("-atm")
            name = DISPERSION_NAMES[base] if len(disp) == 1 else DISPERSION_LABELS[base]
            text = name + cite.cite(refs.DISPERSION_REFERENCES[base])
            if atm:
                text += " with the three-body Axilrod–Teller–Muto term" + cite.cite(refs.ATM_REFERENCES)
            parts.append(text)
        if len(parts) == 1:
            head += " with the " + parts[0]
        else:
            head += " with each of the dispersion corrections " + ", ".join(parts[:-1]) + " and " + parts[-1]
        if not level.get("dispersion") and "none" in (schemes or []):
            head += ", and without one,"
    bref = refs.basis_references(basis)
    text = f"{head} in the {_basis_name(basis)} basis set" + (cite.cite(bref) if bref else
                                                               " (cite the basis set's original publication)")
    details = []
    fitted = level.get("density_fitting", True) and method != "ccsd(t)"
    if fitted:
        jk = _setting("jk_fitting_basis", level, spec, symbols, pyscf_note)
        details.append("Coulomb and exchange integrals density-fitted with the " + _cited(jk, cite))
    else:
        details.append("conventional (not density-fitted) SCF integrals")
    if method in ("mp2", "scs-mp2"):
        if fitted:
            details.append("the MP2 correlation energy density-fitted with the same fitting basis as the SCF")
        else:
            ri = _setting("ri_fitting_basis", level, spec, symbols, pyscf_note)
            details.append("the MP2 correlation energy density-fitted with the " + _cited(ri, cite))
    if method in ("mp2", "scs-mp2", "ccsd(t)"):
        details.append(_setting("frozen_core", level, spec, symbols, pyscf_note) + " in the correlation treatment")
    if method == "dft":
        details.append(_setting("grid", level, spec, symbols, pyscf_note))
    label = _level_label(level)
    return text, f"For {label}: " + "; ".join(details) + "."


def _versions(ds: xr.Dataset, uses_dispersion: bool) -> str:
    parts = [f"interkit {ds.attrs.get('interkit_version', '?')}", f"PySCF {ds.attrs.get('pyscf_version', '?')}"]
    if uses_dispersion:
        for attr, name in (("pyscf_dispersion_version", "pyscf-dispersion"), ("dftd3_version", "dftd3"),
                           ("dftd4_version", "dftd4")):
            value = str(ds.attrs.get(attr, "not installed"))
            if value != "not installed":
                parts.append(f"{name} {value}")
    parts += [f"NumPy {ds.attrs.get('numpy_version', '?')}", f"xarray {ds.attrs.get('xarray_version', '?')}"]
    return ", ".join(parts)


def _open(ds):
    if isinstance(ds, xr.Dataset):
        return ds
    from ..data.schema import open_scan

    return open_scan(ds)


def _paragraph(ds: xr.Dataset) -> tuple[str, _Citations]:
    import pyscf

    from ..engine.energy import GRADIENT_CONV_TOL_HARTREE

    spec = json.loads(ds.attrs["spec_json"])
    cite = _Citations()
    symbols = [str(s) for s in ds["symbol"].values]
    recorded_pyscf = str(ds.attrs.get("pyscf_version", "?"))
    pyscf_note = "" if recorded_pyscf == pyscf.__version__ else \
        f"; name as given by pyscf {pyscf.__version__}, the scan ran pyscf {recorded_pyscf}"
    r = np.asarray(ds["distance"].values, dtype=float)
    name = spec.get("name") or ds.attrs.get("title", "")
    charges, mults = json.loads(ds.attrs.get("charges", "[0, 0]")), json.loads(ds.attrs.get("multiplicities", "[1, 1]"))
    frag = np.asarray(ds["fragment"].values).astype(str)
    formulas = [_formula([s for s, f in zip(symbols, frag) if f == x]) for x in "AB"]
    sys_text = f"the {formulas[0]}···{formulas[1]} dimer ({name})"
    if any(charges) or any(m != 1 for m in mults):
        sys_text += (f" (fragment charges {charges[0]} and {charges[1]}, multiplicities {mults[0]} and "
                     f"{mults[1]}; open shells unrestricted)")
    out = [f"Interaction energies of {sys_text} were computed at {r.size} points along the "
           f"{ds.attrs.get('scan_coordinate', 'scan coordinate')}, from {r.min():.3f} to {r.max():.3f} Å, "
           f"with interkit {ds.attrs.get('interkit_version', '?')} and the PySCF program (version "
           f"{recorded_pyscf}){cite.cite(refs.PROGRAM_REFERENCES)}."]
    schemes = spec.get("dispersion")
    levels = [_level_sentence(lv, spec, symbols, schemes, cite, pyscf_note) for lv in spec["levels"]]
    out.append(("The level of theory was " if len(levels) == 1 else "The levels of theory were ")
               + "; ".join(head for head, _ in levels) + ".")
    out += [details for _, details in levels]
    out += _composite_sentences(ds, cite)
    tol = float(spec.get("scf_threshold_hartree", 1e-8))
    tol_text = f"SCF energies were converged to {tol:.0e} hartree"
    if spec.get("forces"):
        tol_text += f" ({min(tol, GRADIENT_CONV_TOL_HARTREE):.0e} hartree for calculations with gradients)"
    out.append(tol_text + ".")
    if ds.attrs.get("counterpoise", "none") != "none":
        out.append("All interaction energies are corrected for the basis set superposition error by the "
                   "Boys–Bernardi counterpoise scheme" + cite.cite(refs.COUNTERPOISE_REFERENCES)
                   + ": at every geometry each monomer was computed in the full dimer basis (ghost atoms), "
                   "the geometries of the monomers being those in the dimer.")
    else:
        out.append("The interaction energies are not counterpoise-corrected.")
    if spec.get("forces") and "force_method" in ds.variables:
        how = "; ".join(f"{lv}: {m}" for lv, m in zip(ds["level"].values, ds["force_method"].values))
        out.append("Counterpoise-corrected forces were computed at every point (" + how + ").")
    if spec.get("decomposition") == "sapt0":
        basis = ds.attrs.get("decomposition_basis", spec.get("decomposition_basis", ""))
        jk = str(ds.attrs.get("decomposition_jk_fitting_basis", ""))
        ri = str(ds.attrs.get("decomposition_ri_fitting_basis", ""))
        bref = refs.basis_references(basis)
        text = ("The interaction was decomposed into electrostatics, exchange, induction (including δHF) "
                "and dispersion by closed-shell density-fitted SAPT0" + cite.cite(refs.SAPT0_REFERENCES)
                + f" in the dimer-centred {_basis_name(basis)} basis set" + cite.cite(bref)
                + f", with the {jk} fitting basis for the Coulomb, exchange and induction terms"
                + cite.cite(_fit_refs(jk)) + f" and the {ri} fitting basis for the dispersion terms"
                + cite.cite(_fit_refs(ri)) + " (SCF converged to 1e-10 hartree)")
        if "e_ssapt0" in ds.variables:
            text += "; the sSAPT0 total scales the exchange-induction and exchange-dispersion terms" \
                    + cite.cite(refs.SSAPT0_REFERENCES)
        out.append(text + ".")
    uses_disp = bool(schemes) or any(lv.get("dispersion") for lv in spec["levels"])
    out.append(f"Versions: {_versions(ds, uses_disp)}; energies converted with {ds.attrs.get('codata', 'CODATA 2018')} "
               "constants.")
    return cite.finish(" ".join(out)), cite


def _composite_sentences(ds, cite: _Citations) -> list[str]:
    """One sentence per composite level (from the Dataset's ``composite_recipe_json``)."""
    try:
        recipes = json.loads(ds.attrs.get("composite_recipe_json", "") or "{}")
    except ValueError:
        return []
    out = []
    for label, r in recipes.items():
        head = (f"The composite level {label} combines, per interaction energy and each term counterpoise-"
                f"corrected in its own basis, {r['formula']}")
        if r.get("cardinal_numbers"):
            out.append(head + f", with the two-point X^-3 extrapolation of the correlation energy (X = "
                       f"{r['cardinal_numbers'][0]}, {r['cardinal_numbers'][1]})"
                       + cite.cite(refs.EXTRAPOLATION_REFERENCES) + ".")
        else:  # one base basis: the additive estimate, nothing extrapolated
            out.append(head + ", an additive estimate of the correction's method in the base basis (no "
                       "extrapolation)" + cite.cite(refs.ADDITIVE_REFERENCES) + ".")
    return out


def methods_text(ds) -> str:
    """The methods paragraph of a scan, with numbered citations and the reference list.

    Parameters
    ----------
    ds : xarray.Dataset or path-like
        A scan Dataset or its ``.nc`` file.

    Returns
    -------
    str
        The paragraph, a blank line, and ``[n] citation (BibTeX key)`` lines. Settings
        the Dataset does not record are described by interkit's defaults, marked
        "(default)".
    """
    text, cite = _paragraph(_open(ds))
    lines = [text, "", "References (recalled from memory; check before use):"]
    lines += [f"[{n}] {refs.short_citation(k)} (BibTeX key {k})" for n, k in enumerate(cite.keys, start=1)]
    return "\n".join(lines) + "\n"


def methods_references(ds) -> list[str]:
    """BibTeX keys cited by :func:`methods_text`, in citation order."""
    return _paragraph(_open(ds))[1].keys


def methods_bibtex(ds) -> str:
    """BibTeX entries of every reference :func:`methods_text` cites (same order)."""
    return refs.bibtex(methods_references(ds))
