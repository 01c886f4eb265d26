"""Bibliography of the methods, basis sets and programs a scan uses (BibTeX).

CAUTION: every bibliographic detail below (authors, title, journal, volume, first page,
year and the few DOIs) is recalled from memory and must be checked against the
publisher's record before it goes into a paper. DOIs are given only where we are sure
of them; the others are left out rather than guessed.

:func:`reference_keys` maps what a scan used to keys of :data:`REFERENCES`;
:func:`bibtex` writes the entries.
"""

from __future__ import annotations

#: key -> BibTeX fields (entry type "article" unless ``type`` says otherwise)
REFERENCES: dict[str, dict[str, str]] = {
    "boys1970": dict(author="Boys, S. F. and Bernardi, F.", title="The calculation of small molecular "
                     "interactions by the differences of separate total energies. Some procedures with "
                     "reduced errors", journal="Mol. Phys.", volume="19", pages="553", year="1970",
                     doi="10.1080/00268977000101561"),
    "helgaker1997": dict(author="Helgaker, T. and Klopper, W. and Koch, H. and Noga, J.",
                         title="Basis-set convergence of correlated calculations on water",
                         journal="J. Chem. Phys.", volume="106", pages="9639", year="1997",
                         doi="10.1063/1.473863"),
    "jurecka2006": dict(author="Jure{\\v{c}}ka, P. and {\\v{S}}poner, J. and {\\v{C}}ern{\\'{y}}, J. and Hobza, P.",
                        title="Benchmark database of accurate (MP2 and CCSD(T) complete basis set limit) "
                        "interaction energies of small model complexes, DNA base pairs, and amino acid pairs",
                        journal="Phys. Chem. Chem. Phys.", volume="8", pages="1985", year="2006"),
    "becke1993": dict(author="Becke, A. D.", title="Density-functional thermochemistry. III. The role of "
                      "exact exchange", journal="J. Chem. Phys.", volume="98", pages="5648", year="1993",
                      doi="10.1063/1.464913"),
    "lee1988": dict(author="Lee, C. and Yang, W. and Parr, R. G.", title="Development of the Colle-Salvetti "
                    "correlation-energy formula into a functional of the electron density",
                    journal="Phys. Rev. B", volume="37", pages="785", year="1988", doi="10.1103/PhysRevB.37.785"),
    "stephens1994": dict(author="Stephens, P. J. and Devlin, F. J. and Chabalowski, C. F. and Frisch, M. J.",
                         title="Ab initio calculation of vibrational absorption and circular dichroism "
                         "spectra using density functional force fields", journal="J. Phys. Chem.",
                         volume="98", pages="11623", year="1994", doi="10.1021/j100096a001"),
    "grimme2010": dict(author="Grimme, S. and Antony, J. and Ehrlich, S. and Krieg, H.", title="A consistent "
                       "and accurate ab initio parametrization of density functional dispersion correction "
                       "(DFT-D) for the 94 elements H-Pu", journal="J. Chem. Phys.", volume="132",
                       pages="154104", year="2010", doi="10.1063/1.3382344"),
    "grimme2011": dict(author="Grimme, S. and Ehrlich, S. and Goerigk, L.", title="Effect of the damping "
                       "function in dispersion corrected density functional theory", journal="J. Comput. Chem.",
                       volume="32", pages="1456", year="2011", doi="10.1002/jcc.21759"),
    "caldeweyher2019": dict(author="Caldeweyher, E. and Ehlert, S. and Hansen, A. and Neugebauer, H. and "
                            "Spicher, S. and Bannwarth, C. and Grimme, S.", title="A generally applicable "
                            "atomic-charge dependent London dispersion correction", journal="J. Chem. Phys.",
                            volume="150", pages="154122", year="2019", doi="10.1063/1.5090222"),
    "axilrod1943": dict(author="Axilrod, B. M. and Teller, E.", title="Interaction of the van der Waals type "
                        "between three atoms", journal="J. Chem. Phys.", volume="11", pages="299", year="1943"),
    "muto1943": dict(author="Muto, Y.", title="Force between nonpolar molecules",
                     journal="Proc. Phys.-Math. Soc. Jpn.", volume="17", pages="629", year="1943"),
    "moller1934": dict(author="M{\\o}ller, C. and Plesset, M. S.", title="Note on an approximation treatment "
                       "for many-electron systems", journal="Phys. Rev.", volume="46", pages="618", year="1934",
                       doi="10.1103/PhysRev.46.618"),
    "grimme2003": dict(author="Grimme, S.", title="Improved second-order M{\\o}ller-Plesset perturbation "
                       "theory by separate scaling of parallel- and antiparallel-spin pair correlation "
                       "energies", journal="J. Chem. Phys.", volume="118", pages="9095", year="2003",
                       doi="10.1063/1.1569242"),
    "raghavachari1989": dict(author="Raghavachari, K. and Trucks, G. W. and Pople, J. A. and Head-Gordon, M.",
                             title="A fifth-order perturbation comparison of electron correlation theories",
                             journal="Chem. Phys. Lett.", volume="157", pages="479", year="1989"),
    "weigend2005": dict(author="Weigend, F. and Ahlrichs, R.", title="Balanced basis sets of split valence, "
                        "triple zeta valence and quadruple zeta valence quality for H to Rn: Design and "
                        "assessment of accuracy", journal="Phys. Chem. Chem. Phys.", volume="7", pages="3297",
                        year="2005", doi="10.1039/b508541a"),
    "dunning1989": dict(author="Dunning, Jr., T. H.", title="Gaussian basis sets for use in correlated "
                        "molecular calculations. I. The atoms boron through neon and hydrogen",
                        journal="J. Chem. Phys.", volume="90", pages="1007", year="1989", doi="10.1063/1.456153"),
    "kendall1992": dict(author="Kendall, R. A. and Dunning, Jr., T. H. and Harrison, R. J.", title="Electron "
                        "affinities of the first-row atoms revisited. Systematic basis sets and wave functions",
                        journal="J. Chem. Phys.", volume="96", pages="6796", year="1992", doi="10.1063/1.462569"),
    "papajak2011": dict(author="Papajak, E. and Zheng, J. and Xu, X. and Leverentz, H. R. and Truhlar, D. G.",
                        title="Perspectives on basis sets beautiful: Seasonal plantings of diffuse basis "
                        "functions", journal="J. Chem. Theory Comput.", volume="7", pages="3027", year="2011"),
    "hehre1969": dict(author="Hehre, W. J. and Stewart, R. F. and Pople, J. A.", title="Self-consistent "
                      "molecular-orbital methods. I. Use of Gaussian expansions of Slater-type atomic orbitals",
                      journal="J. Chem. Phys.", volume="51", pages="2657", year="1969"),
    "weigend2002jk": dict(author="Weigend, F.", title="A fully direct RI-HF algorithm: Implementation, "
                          "optimised auxiliary basis sets, demonstration of accuracy and efficiency",
                          journal="Phys. Chem. Chem. Phys.", volume="4", pages="4285", year="2002"),
    "weigend2002ri": dict(author="Weigend, F. and K{\\\"o}hn, A. and H{\\\"a}ttig, C.", title="Efficient use of "
                          "the correlation consistent basis sets in resolution of the identity MP2 calculations",
                          journal="J. Chem. Phys.", volume="116", pages="3175", year="2002"),
    "weigend2006": dict(author="Weigend, F.", title="Accurate Coulomb-fitting basis sets for H to Rn",
                        journal="Phys. Chem. Chem. Phys.", volume="8", pages="1057", year="2006"),
    "weigend2008": dict(author="Weigend, F.", title="Hartree-Fock exchange fitting basis sets for H to Rn",
                        journal="J. Comput. Chem.", volume="29", pages="167", year="2008"),
    "hellweg2007": dict(author="Hellweg, A. and H{\\\"a}ttig, C. and H{\\\"o}fener, S. and Klopper, W.",
                        title="Optimized accurate auxiliary basis sets for RI-MP2 and RI-CC2 calculations for "
                        "the atoms Rb to Rn", journal="Theor. Chem. Acc.", volume="117", pages="587", year="2007"),
    "jeziorski1994": dict(author="Jeziorski, B. and Moszynski, R. and Szalewicz, K.", title="Perturbation "
                          "theory approach to intermolecular potential energy surfaces of van der Waals "
                          "complexes", journal="Chem. Rev.", volume="94", pages="1887", year="1994",
                          doi="10.1021/cr00031a008"),
    "hohenstein2010": dict(author="Hohenstein, E. G. and Sherrill, C. D.", title="Density fitting and "
                           "Cholesky decomposition approximations in symmetry-adapted perturbation theory: "
                           "Implementation and application to probe the nature of pi-pi interactions in "
                           "linear acenes", journal="J. Chem. Phys.", volume="132", pages="184111", year="2010"),
    "parker2014": dict(author="Parker, T. M. and Burns, L. A. and Parrish, R. M. and Ryno, A. G. and "
                       "Sherrill, C. D.", title="Levels of symmetry adapted perturbation theory (SAPT). I. "
                       "Efficiency and performance for interaction energies", journal="J. Chem. Phys.",
                       volume="140", pages="094106", year="2014"),
    "sun2018": dict(author="Sun, Q. and Berkelbach, T. C. and Blunt, N. S. and Booth, G. H. and Guo, S. and "
                    "Li, Z. and Liu, J. and McClain, J. D. and Sayfutyarova, E. R. and Sharma, S. and "
                    "Wouters, S. and Chan, G. K.-L.", title="PySCF: the Python-based simulations of chemistry "
                    "framework", journal="WIREs Comput. Mol. Sci.", volume="8", pages="e1340", year="2018",
                    doi="10.1002/wcms.1340"),
    "sun2020": dict(author="Sun, Q. and others", title="Recent developments in the PySCF program package",
                    journal="J. Chem. Phys.", volume="153", pages="024109", year="2020", doi="10.1063/5.0006074"),
    "lehtola2018": dict(author="Lehtola, S. and Steigemann, C. and Oliveira, M. J. T. and Marques, M. A. L.",
                        title="Recent developments in libxc - A comprehensive library of functionals for "
                        "density functional theory", journal="SoftwareX", volume="7", pages="1", year="2018"),
}

#: functional -> keys of its original papers (others: see the libxc documentation)
FUNCTIONAL_REFERENCES = {"b3lyp": ("becke1993", "lee1988", "stephens1994")}
#: dispersion scheme (without -atm) -> keys
DISPERSION_REFERENCES = {"d3zero": ("grimme2010",), "d3bj": ("grimme2010", "grimme2011"),
                         "d4": ("caldeweyher2019",)}
ATM_REFERENCES = ("axilrod1943", "muto1943")
METHOD_REFERENCES = {"mp2": ("moller1934",), "scs-mp2": ("moller1934", "grimme2003"),
                     "ccsd(t)": ("raghavachari1989",)}
PROGRAM_REFERENCES = ("sun2018", "sun2020")
COUNTERPOISE_REFERENCES = ("boys1970",)
EXTRAPOLATION_REFERENCES = ("helgaker1997",)
#: MP2 in one basis plus CCSD(T) - MP2 in a smaller one (single-basis composite)
ADDITIVE_REFERENCES = ("jurecka2006",)
SAPT0_REFERENCES = ("jeziorski1994", "hohenstein2010")
SSAPT0_REFERENCES = ("parker2014",)


def basis_references(basis: str) -> tuple[str, ...]:
    """Keys for an orbital basis-set name (empty if not in our table)."""
    b = basis.lower()
    if b.startswith("def2-"):
        return ("weigend2005",)
    if b.startswith("jun-cc-p"):
        return ("dunning1989", "kendall1992", "papajak2011")
    if b.startswith("aug-cc-p"):
        return ("dunning1989", "kendall1992")
    if b.startswith("cc-p"):
        return ("dunning1989",)
    if b == "sto-3g":
        return ("hehre1969",)
    return ()


def fitting_references(name: str) -> tuple[str, ...]:
    """Keys for a fitting-basis name as pyscf spells it (empty if not in our table)."""
    n = name.lower()
    if n.startswith("def2-") and n.endswith("-jkfit"):
        return ("weigend2008",)   # pyscf maps def2-*-jkfit to def2-universal-jkfit
    if n.startswith("def2-") and n.endswith("-jfit"):
        return ("weigend2006",)
    if n.startswith("def2-") and n.endswith("-ri"):
        return ("hellweg2007",)
    if "cc-p" in n and n.endswith("-jkfit"):
        return ("weigend2002jk",)
    if "cc-p" in n and n.endswith("-ri"):
        return ("weigend2002ri",)
    return ()


def _field(value: str) -> str:
    return "{" + value + "}"


def bibtex(keys) -> str:
    """BibTeX entries of ``keys`` (in the given order; unknown keys raise KeyError)."""
    out = ["% Bibliographic details recalled from memory: check them against the publisher's record."]
    for key in keys:
        fields = dict(REFERENCES[key])
        kind = fields.pop("type", "article")
        body = ",\n".join(f"  {name} = {_field(val)}" for name, val in fields.items())
        out.append(f"@{kind}{{{key},\n{body}\n}}")
    return "\n\n".join(out) + "\n"


def short_citation(key: str) -> str:
    """One-line citation, e.g. ``S. F. Boys and F. Bernardi, Mol. Phys. 19, 553 (1970)``."""
    f = REFERENCES[key]
    authors = f["author"].split(" and ")
    first = authors[0].split(",")[0]
    if authors[-1].strip() == "others":
        authors = authors[:1] + ["", ""]
    who = first if len(authors) == 1 else f"{first} and {authors[1].split(',')[0]}" if len(authors) == 2 \
        else f"{first} et al."
    return f"{who}, {f['journal']} {f['volume']}, {f['pages']} ({f['year']})".replace("{\\o}", "ø") \
        .replace('{\\"o}', "ö").replace('{\\"a}', "ä")
