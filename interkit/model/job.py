"""Jobs: one electronic-structure calculation described completely by data, its key,
and the plan of a scan (which job serves which role at which point).

A job's key is the SHA-256 of its description plus the versions that change its numbers.
Reading library versions (package metadata, libxc's version string) is the only contact
with pyscf here; nothing is computed.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass, field

import numpy as np

from .levels import LevelOfTheory
from .spec import ScanSpec

#: bump when a change in interkit alters the numbers a job produces
NUMERICS_VERSION = 5  # 5: default DFT grid level 2 (was 3)
#: coordinates in job descriptions are rounded to this many decimals of an angstrom
COORDINATE_DECIMALS = 10

CP_ROLES = ("dimer", "a_dimer_basis", "b_dimer_basis")
OWN_BASIS_ROLES = ("a_own_basis", "b_own_basis")
#: counterpoise calculations at B displaced by +h and -h along the coordinate, for
#: numerical forces (levels without analytic gradients)
DISPLACED_ROLES = tuple(f"{r}_{sign}" for sign in ("plus", "minus") for r in CP_ROLES)
ROLES = CP_ROLES + OWN_BASIS_ROLES + DISPLACED_ROLES
ROLE_LABELS = {
    "dimer": "dimer (dimer basis)",
    "a_dimer_basis": "A in dimer basis",
    "b_dimer_basis": "B in dimer basis",
    "a_own_basis": "A in own basis",
    "b_own_basis": "B in own basis",
    **{f"{r}_{sign}": f"{label}, B displaced {'+' if sign == 'plus' else '-'}h"
       for sign in ("plus", "minus")
       for r, label in (("dimer", "dimer"), ("a_dimer_basis", "A in dimer basis"),
                        ("b_dimer_basis", "B in dimer basis"))},
}
#: step (angstrom) of central differences along the scan coordinate
NUMERICAL_FORCE_STEP_ANGSTROM = 0.005
#: role of the per-point SAPT0 decomposition job (outside the counterpoise table)
DECOMPOSITION_ROLE = "sapt0"
#: SCF energy threshold (hartree) of the monomer and dimer SCFs of a decomposition,
#: unless the spec asks for a tighter one: the SAPT0 terms need well-converged orbitals
DECOMPOSITION_CONV_TOL_HARTREE = 1e-10


def force_method(level: LevelOfTheory) -> str:
    """How forces are obtained for a level: analytic gradients where pyscf has them."""
    if level.method in ("hf", "dft"):
        return "analytic"
    if level.method == "mp2":
        # open-shell dimers get exact integrals for the whole level (spec.ScanSpec)
        return "analytic (DF-MP2)" if level.correlation_fitting else "analytic (conventional MP2)"
    return "numerical"


def _pyscf_version() -> str:
    return _distribution_version("pyscf")


@dataclass(frozen=True)
class Job:
    """One electronic-structure calculation, described completely by data.

    Attributes
    ----------
    symbols : tuple of str
        Element symbols.
    coordinates : tuple of (x, y, z)
        Positions in angstrom, rounded to ``COORDINATE_DECIMALS``.
    ghost : tuple of bool
        True where the atom carries basis functions but no nucleus or electrons.
    charge, spin : int
        Net charge and number of unpaired electrons (2S) of the real atoms.
    level : LevelOfTheory
    conv_tol : float
        SCF energy threshold in hartree.
    outputs : tuple of str
        What to compute: ``('energy',)``, ``('energy', 'gradient')`` or ``('sapt0',)``
        (the SAPT0 terms of the two fragments, in the basis of every atom).
    fragment_a : tuple of int
        Atoms of fragment A (indices into ``symbols``) for jobs that need the split
        (``'sapt0'``); empty otherwise.
    fragment_charges : tuple of int
        Net charges of fragments A and B for such jobs; empty otherwise.
    fragment_spins : tuple of int
        Signed 2M_S of fragments A and B in a broken-symmetry initial guess, e.g.
        ``(1, -1)`` (spin of B flipped); empty otherwise.
    guess : str
        Initial-guess recipe when it selects the SCF solution (part of the key):
        ``''`` (pyscf's default or the previous point's density, same solution) or
        :data:`interkit.model.spin.BROKEN_SYMMETRY_GUESS` (the fragments' densities with
        ``fragment_spins``; the job is unrestricted even at 2S = 0).
    memory_limit_mb : float
        Largest tensor the calculation may build (MB); a resource limit that does not
        change the numbers, so it is not part of :meth:`describe` or the key.
    ecp : tuple of (str, str)
        Effective core potential of each real element whose basis definition carries
        one, as (symbol, ECP name); filled from pyscf's basis library when not given.
    keep_density : bool
        Also return the converged SCF density matrix in the record
        (``density_matrix``, about nao² × 8 bytes); it changes what the record holds,
        not the numbers, so it is not part of :meth:`describe` or the key.
    """

    symbols: tuple[str, ...]
    coordinates: tuple[tuple[float, float, float], ...]
    ghost: tuple[bool, ...]
    charge: int
    spin: int
    level: LevelOfTheory
    conv_tol: float
    outputs: tuple[str, ...] = ("energy",)
    fragment_a: tuple[int, ...] = ()
    fragment_charges: tuple[int, ...] = ()
    fragment_spins: tuple[int, ...] = ()
    guess: str = ""
    memory_limit_mb: float = field(default=4000.0, compare=False)
    key: str = field(default="", compare=False)
    ecp: tuple[tuple[str, str], ...] | None = None
    keep_density: bool = field(default=False, compare=False)

    def __post_init__(self):
        if self.ecp is None:
            from ..model.levels import ecp_assignment

            real = [s for s, g in zip(self.symbols, self.ghost) if not g]
            object.__setattr__(self, "ecp", tuple(sorted(ecp_assignment(self.level.basis, real).items())))
        if not self.key:
            object.__setattr__(self, "key", job_key(self.describe()))

    def describe(self) -> dict:
        """Complete plain-data description; its hash is the job's key."""
        out = {
            "symbols": list(self.symbols),
            "coordinates_angstrom": [list(c) for c in self.coordinates],
            "ghost": list(self.ghost),
            "charge": self.charge,
            "spin": self.spin,
            "level": self.level.to_dict(),
            "conv_tol": self.conv_tol,
            "outputs": list(self.outputs),
            "ecp": {s: name for s, name in self.ecp},
        }
        # only jobs that split the atoms into fragments carry these (older keys unchanged)
        if self.fragment_a:
            out["fragment_a"] = list(self.fragment_a)
            out["fragment_charges"] = list(self.fragment_charges)
        if self.guess:  # broken-symmetry jobs only (other keys unchanged)
            out["fragment_spins"] = list(self.fragment_spins)
            out["guess"] = self.guess
        return out

    @property
    def real_atoms(self) -> list[int]:
        """Indices of the non-ghost atoms."""
        return [i for i, g in enumerate(self.ghost) if not g]


def _distribution_version(name: str) -> str:
    from importlib import metadata

    try:
        return metadata.version(name)
    except metadata.PackageNotFoundError:
        return "not installed"


def _libxc_version() -> str:
    from pyscf.dft import libxc

    return str(libxc.__version__)


def library_versions(level: dict) -> dict[str, str]:
    """Versions of the libraries whose numbers enter a job of ``level`` (its plain-data
    form): pyscf always, libxc for DFT, and pyscf-dispersion for a post-hoc dispersion
    correction (it bundles the D3 and D4 libraries interkit calls; separately installed
    ``dftd3``/``dftd4`` packages are not used, so their versions stay out of the key)."""
    out = {"pyscf": _pyscf_version()}
    if level.get("method") == "dft":
        out["libxc"] = _libxc_version()
    if level.get("dispersion"):
        out["pyscf-dispersion"] = _distribution_version("pyscf-dispersion")
    return out


def job_key(description: dict) -> str:
    """SHA-256 of the job description plus the versions that change its numbers
    (``NUMERICS_VERSION`` and :func:`library_versions`)."""
    payload = {
        "job": description,
        "numerics_version": NUMERICS_VERSION,
        "versions": library_versions(description.get("level", {})),
    }
    text = json.dumps(payload, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()


def _rounded(coords: np.ndarray) -> tuple[tuple[float, float, float], ...]:
    r = np.round(np.asarray(coords, dtype=float), COORDINATE_DECIMALS) + 0.0  # no -0.0
    return tuple(tuple(float(x) for x in row) for row in r)


@dataclass(frozen=True)
class ScanPlan:
    """The jobs of a scan and where each result goes.

    Attributes
    ----------
    jobs : dict
        Unique jobs by key.
    table : dict
        ``table[(level_index, point_index)][role] -> key``.
    decomposition : dict
        ``decomposition[point_index] -> key`` of the point's SAPT0 job (independent
        of the levels); empty without a decomposition.
    feasibility : dict
        Report of the checks made with the plan (size estimates; see
        :func:`interkit.run.feasibility.check_feasibility`); empty when not checked.
    """

    spec: ScanSpec
    jobs: dict[str, Job]
    table: dict[tuple[int, int], dict[str, str]]
    decomposition: dict[int, str] = field(default_factory=dict)
    feasibility: dict = field(default_factory=dict, compare=False)

    @property
    def roles(self) -> tuple[str, ...]:
        """Every role used somewhere in the plan, in canonical order."""
        used = {r for entry in self.table.values() for r in entry}
        return tuple(r for r in ROLES if r in used)

    def point_roles(self, level_index: int, point_index: int) -> tuple[str, ...]:
        """Roles computed per point (own-basis monomers only for non-rigid scans)."""
        entry = self.table[(level_index, point_index)]
        skip = OWN_BASIS_ROLES if self.spec.is_rigid else ()
        return tuple(r for r in ROLES if r in entry and r not in skip)

    @property
    def n_points(self) -> int:
        return len(self.spec.points)

    def chunks(self, n_chunks: int) -> list[list[tuple[str, str]]]:
        """Split the work into about ``n_chunks`` ordered task lists of ``(role, key)``.

        Each chunk holds a contiguous run of one level's calculations, ordered point by
        point, so a worker can start every calculation from the previous point's
        density in the same role, and within a point the monomers come before the
        dimer. The runs are cut where their estimated costs
        (:func:`calculation_weight`) are about equal, inside a point if need be: with
        few points per worker, whole points would leave a worker idle. In rigid scans
        the two own-basis monomers (one calculation each per level) open the first and
        the last chunk of their level.
        """
        own_per_point = not self.spec.is_rigid
        n_levels, n_points = len(self.spec.levels), self.n_points
        per_level = min(n_points, max(1, -(-int(n_chunks) // n_levels)))
        chunks: list[list[tuple[str, str]]] = []
        largest = max((len(j.symbols) for j in self.jobs.values()), default=1)
        for li in range(n_levels):
            # per point the monomers before the dimer: a dimer can then start from the sum
            # of its ghosted monomers even when a cut falls just before its point
            tasks = [(role, self.table[(li, pi)][role]) for pi in range(n_points)
                     for role in sorted(self.point_roles(li, pi), key=_guess_rank)]
            own = [] if own_per_point else [(r, self.table[(li, 0)][r]) for r in OWN_BASIS_ROLES]
            flat = own[:1] + tasks + own[1:]
            weights = [calculation_weight(self.jobs[key], largest) for _, key in flat]
            level_chunks = [list(piece) for piece in _cut_evenly(flat, weights, per_level)]
            if len(own) == 2:  # B's own-basis monomer opens the last chunk (after A's if it is the only one)
                last = level_chunks[-1]
                last.insert(1 if len(level_chunks) == 1 else 0, last.pop())
            chunks.extend(level_chunks)
        if self.decomposition:
            keys = [self.decomposition[pi] for pi in sorted(self.decomposition)]
            n_sapt = min(len(keys), max(1, int(n_chunks)))
            bounds = np.linspace(0, len(keys), n_sapt + 1).round().astype(int)
            chunks.extend([[(DECOMPOSITION_ROLE, k) for k in keys[lo:hi]]
                           for lo, hi in zip(bounds[:-1], bounds[1:])])
        seen: set[str] = set()
        out = []
        for tasks in chunks:
            kept = []
            for role, key in tasks:
                if key not in seen:
                    seen.add(key)
                    kept.append((role, key))
            if kept:
                out.append(kept)
        return out


#: the cost of a calculation grows about as (atoms carrying basis functions) to this power
#: (DFT, B3LYP/def2-SVP, 9 to 23 atoms: time per calculation against basis size, 2.1-2.8)
CHUNK_COST_EXPONENT = 2.5


def _guess_rank(role: str) -> int:
    """Own-basis monomers, then monomers in the dimer basis, then the dimer."""
    return 0 if role in OWN_BASIS_ROLES else 2 if role.startswith("dimer") else 1


def calculation_weight(job, largest_atoms: int) -> float:
    """Relative cost of ``job`` for splitting work: (its atoms / ``largest_atoms``) to
    :data:`CHUNK_COST_EXPONENT` (ghost atoms count: they carry basis functions)."""
    return (len(job.symbols) / max(1, largest_atoms)) ** CHUNK_COST_EXPONENT


def _cut_evenly(items: list, weights: list[float], n: int) -> list[list]:
    """``items`` in at most ``n`` contiguous non-empty pieces of about equal total weight."""
    n = max(1, min(int(n), len(items)))
    cum = np.cumsum(weights)
    total = float(cum[-1]) if len(cum) else 0.0
    cuts = [0]
    for k in range(1, n):
        # the task boundary whose cumulative weight is closest to k/n of the total
        i = int(np.argmin(np.abs(cum - total * k / n))) + 1
        i = min(max(i, cuts[-1] + 1), len(items) - (n - k))
        cuts.append(i)
    cuts.append(len(items))
    return [items[a:b] for a, b in zip(cuts[:-1], cuts[1:])]


#: longest failure reason a record keeps (characters)
DETAIL_MAX_CHARS = 500


def failed_record(detail: str = "", **fields) -> dict:
    """The record of a calculation that produced no result: the one layout every part
    of interkit writes (the engine before it has numbers, executors for lost workers
    and tasks), so the store and ``assemble`` see a single schema.

    Energies are NaN (never a partial number), ``status`` is ``'failed'``, ``detail``
    the reason (shortened to ``DETAIL_MAX_CHARS``); ``fields`` adds or overrides entries
    (e.g. ``role`` or ``sapt0_hartree``).
    """
    record = {
        "energy_hartree": float("nan"), "scf_energy_hartree": float("nan"),
        "correlation_energy_hartree": 0.0, "dispersion_energy_hartree": 0.0,
        "converged": False, "status": "failed", "detail": str(detail).replace("\n", " ")[:DETAIL_MAX_CHARS],
        "scf_cycles": 0, "nao": 0, "wall_time_s": 0.0,
    }
    record.update(fields)
    return record
