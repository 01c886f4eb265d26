"""The S22 set as a bundled study example (geometries shipped with the ``ase`` package).

Geometries: the S22 set of Jurečka, Šponer, Černý and Hobza, Phys. Chem. Chem. Phys.
8, 1985 (2006), as shipped in ``ase.data.s22`` (nothing is downloaded). Categories
follow that paper: systems 1-7 hydrogen-bonded, 8-15 dispersion-dominated, 16-22 mixed.

Reference values: the revised CCSD(T)/CBS interaction energies "S22B" of Marshall,
Burns and Sherrill, J. Chem. Phys. 135, 194102 (2011), counterpoise-corrected, in
kcal/mol. The ten values marked ``checked`` are those of the project's reference
table; the other twelve are recalled from memory of that paper's table (differences
to the 2006 values are a few hundredths of a kcal/mol; treat them with a tolerance of
about 0.05 kcal/mol). ASE's own stored energies are not used: they are neither the
2006 nor the 2011 values for every system.
"""

from __future__ import annotations

from collections.abc import Sequence

from ..errors import InputError, NotAvailableError
from .coordinates import CentreOfMass
from .geometry import Dimer
from .study import ReferenceValue, Study, StudySystem

S22_CITATION = "Jurečka, Šponer, Černý, Hobza, Phys. Chem. Chem. Phys. 8, 1985 (2006)"
S22B_CITATION = "Marshall, Burns, Sherrill, J. Chem. Phys. 135, 194102 (2011)"

#: (ase name, S22B e_int in kcal/mol, checked against the project's reference table)
S22B_KCAL_PER_MOL: tuple[tuple[str, float, bool], ...] = (
    ("Ammonia_dimer", -3.133, True),
    ("Water_dimer", -4.989, True),
    ("Formic_acid_dimer", -18.753, True),
    ("Formamide_dimer", -16.062, True),
    ("Uracil_dimer_h-bonded", -20.641, False),
    ("2-pyridoxine_2-aminopyridine_complex", -16.934, False),
    ("Adenine-thymine_Watson-Crick_complex", -16.660, False),
    ("Methane_dimer", -0.527, True),
    ("Ethene_dimer", -1.472, True),
    ("Benzene-methane_complex", -1.448, True),
    ("Benzene_dimer_parallel_displaced", -2.654, True),
    ("Pyrazine_dimer", -4.255, False),
    ("Uracil_dimer_stack", -9.805, False),
    ("Indole-benzene_complex_stack", -4.524, False),
    ("Adenine-thymine_complex_stack", -11.730, False),
    ("Ethene-ethyne_complex", -1.496, False),
    ("Benzene-water_complex", -3.275, True),
    ("Benzene-ammonia_complex", -2.312, False),
    ("Benzene-HCN_complex", -4.541, False),
    ("Benzene_dimer_T-shaped", -2.717, True),
    ("Indole-benzene_T-shape_complex", -5.627, False),
    ("Phenol_dimer", -7.097, False),
)
S22_NAMES = tuple(n for n, _, _ in S22B_KCAL_PER_MOL)


def s22_category(number: int) -> str:
    """Category of S22 system ``number`` (1-22) as grouped by Jurečka et al. 2006."""
    if 1 <= number <= 7:
        return "hydrogen bond"
    if 8 <= number <= 15:
        return "dispersion"
    if 16 <= number <= 22:
        return "mixed"
    raise InputError(f"systems: {number!r} is not an S22 system number (1-22)")


def _resolve(systems) -> list[int]:
    if systems is None:
        return list(range(1, 23))
    if isinstance(systems, (str, int)):
        systems = [systems]
    out = []
    for s in systems:
        if isinstance(s, bool):
            raise InputError(f"systems: {s!r} is not an S22 system name or number")
        if isinstance(s, int):
            s22_category(s)
            out.append(s)
        elif isinstance(s, str) and s in S22_NAMES:
            out.append(S22_NAMES.index(s) + 1)
        else:
            raise InputError(f"systems: {s!r} is not an S22 system (names: {', '.join(S22_NAMES)}; or 1-22)")
    if len(set(out)) != len(out):
        raise InputError("systems: an S22 system is listed twice")
    return out


def s22_dimer(name_or_number) -> Dimer:
    """The S22 geometry ``name_or_number`` as a Dimer (fragment A = ASE's first monomer)."""
    number = _resolve([name_or_number])[0]
    try:
        from ase.data import s22
    except ImportError:
        raise NotAvailableError("s22: the S22 geometries ship with the 'ase' package; "
                                "install it (pip install 'interkit[ase]')") from None
    name = S22_NAMES[number - 1]
    atoms = s22.create_s22_system(name)
    n_a = s22.get_number_of_dimer_atoms(name)[0]
    return Dimer.from_ase(atoms, fragment_a=list(range(n_a)), name=name)


def s22_study(levels: Sequence[str] = ("hf/sto-3g",), systems=None, factors: Sequence[float] = (1.0,),
              dispersion: Sequence[str] | None = None, counterpoise: bool = True, name: str = "S22",
              **settings) -> Study:
    """A study of the S22 set (or some of its systems) with the S22B reference values.

    Parameters
    ----------
    levels : sequence of str
        Levels of theory, e.g. ``["b3lyp-d3bj/def2-tzvp"]``.
    systems : sequence of str or int, optional
        ASE names (:data:`S22_NAMES`) or numbers 1-22; default all 22.
    factors : sequence of float
        Centre-of-mass distance factors of each curve (default: the equilibrium
        geometry only). The S22B reference applies at factor 1.0 only; these curves are
        not the S22x5 curves, whose displacement directions differ.
    dispersion : sequence of str, optional
        Post-hoc dispersion schemes (see :class:`~interkit.ScanSpec`).
    counterpoise : bool
    name : str
    **settings
        Further :class:`~interkit.model.study.Study` fields.

    Returns
    -------
    Study
        Categories "hydrogen bond", "dispersion", "mixed"; each system's reference
        (kcal/mol, source: Marshall et al. 2011) at factor 1.0 when it is on the grid.
    """
    numbers = _resolve(systems)
    members = []
    for number in numbers:
        ase_name, value, checked = S22B_KCAL_PER_MOL[number - 1]
        note = "" if checked else " (value recalled from memory)"
        refs = [ReferenceValue(value, factor=1.0, source=f"S22B, {S22B_CITATION}{note}")] \
            if any(abs(float(f) - 1.0) < 1e-12 for f in factors) else []
        members.append(StudySystem(ase_name, s22_dimer(number), CentreOfMass(), factors=list(factors),
                                   category=s22_category(number), reference=refs))
    return Study(name, members, levels, dispersion=dispersion, counterpoise=counterpoise, **settings)
