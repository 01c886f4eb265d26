"""Energies of one job: SCF (HF/DFT) with a convergence ladder, then MP2, SCS-MP2 or
CCSD(T), plus post-hoc dispersion.

The result is a plain record (JSON-safe dict); the converged density is returned
separately so a worker can seed the next point's SCF with it.
"""

from __future__ import annotations

import time
import traceback
from collections import OrderedDict

import numpy as np
from pyscf import cc, dft, mp, scf
from pyscf.data import elements

from ..model.job import Job, failed_record
from ..model.levels import SCS_OPPOSITE_SPIN, SCS_SAME_SPIN, LevelOfTheory
from ..model.spin import BROKEN_SYMMETRY_GUESS
from .dispersion import dispersion_energy_and_gradient
from .fitted_integrals import keep_scf_tensor, share_scf_tensor
from .guess import FRAGMENT_GUESS_CONV_TOL_HARTREE, broken_symmetry_guess
from .molecule import build_molecule
from .numint_cache import CachingNumInt

#: SCF energy threshold (hartree) at least applied to calculations with gradients
GRADIENT_CONV_TOL_HARTREE = 1e-9
#: SCF iterations per rung of the convergence ladder
MAX_SCF_CYCLES = 100


#: DFT grids of the last few geometries (process-local): the dimer and both ghosted
#: monomers of a point share one grid, since ghost atoms keep their grids
_GRID_CACHE: OrderedDict = OrderedDict()
_GRID_CACHE_SIZE = 2


def _share_grids(mf, job: Job) -> None:
    """Give a DFT calculation the already-built grid of the same atoms and positions."""
    key = (job.symbols, job.coordinates, job.level.basis, mf.grids.level, mf.grids.prune)
    cached = _GRID_CACHE.get(key)
    if cached is None:
        mf.grids.build(with_non0tab=True)
        _GRID_CACHE[key] = mf.grids.copy()  # pruning later replaces arrays, never edits them
        while len(_GRID_CACHE) > _GRID_CACHE_SIZE:
            _GRID_CACHE.popitem(last=False)
    else:
        _GRID_CACHE.move_to_end(key)
        grids = cached.copy()
        grids.mol = mf.mol
        mf.grids = grids


#: angular pruning schemes of the DFT grid by their level-setting name
GRID_PRUNE_FUNCTIONS = {"nwchem": dft.gen_grid.nwchem_prune, "sg1": dft.gen_grid.sg1_prune,
                        "treutler": dft.gen_grid.treutler_prune, "none": None}


def _make_scf(mol, level: LevelOfTheory, conv_tol: float, unrestricted: bool | None = None):
    if unrestricted is None:
        unrestricted = mol.spin != 0
    if level.method == "dft":
        mf = dft.UKS(mol) if unrestricted else dft.RKS(mol)
        mf.xc = level.functional
        mf._numint = CachingNumInt()
        mf.grids.level = level.grid_level
        mf.grids.prune = GRID_PRUNE_FUNCTIONS[level.grid_pruning]
    else:
        mf = scf.UHF(mol) if unrestricted else scf.RHF(mol)
    # CCSD(T) runs on a conventional reference so the correlation step is not fitted
    if level.scf_fitted:
        mf = mf.density_fit(auxbasis=level.jk_auxbasis)
    mf.conv_tol = conv_tol
    mf.max_cycle = MAX_SCF_CYCLES
    mf.verbose = 0
    return mf


def is_unrestricted(mf) -> bool:
    """True for UHF/UKS objects (also a broken-symmetry determinant with 2S = 0)."""
    return isinstance(mf, scf.uhf.UHF)


def _usable_guess(guess, mf) -> bool:
    if guess is None:
        return False
    nao = mf.mol.nao
    shape = (2, nao, nao) if is_unrestricted(mf) else (nao, nao)
    return np.shape(guess) == shape


def converge_scf(mf, guess=None) -> tuple[str, str]:
    """Run the SCF through a ladder of increasingly robust settings.

    1. DIIS from the guess (or pyscf's default guess);
    2. level shift 0.5 Eh with damping 0.5, from the last density;
    3. second-order (Newton) solver from the last orbitals.

    Returns
    -------
    status : str
        ``'ok'``, ``'retried'`` or ``'failed'``.
    detail : str
        Which rung converged, or why it failed.
    """
    dm0 = guess if _usable_guess(guess, mf) else None
    mf.kernel(dm0=dm0)
    if mf.converged:
        return "ok", "DIIS"
    mf.level_shift = 0.5
    mf.damp = 0.5
    mf.diis_start_cycle = 4
    mf.kernel(dm0=mf.make_rdm1())
    mf.level_shift = 0.0
    mf.damp = 0.0
    if mf.converged:
        return "retried", "level shift and damping"
    newton = mf.newton()
    newton.max_cycle = mf.max_cycle
    newton.kernel(mf.mo_coeff, mf.mo_occ)
    if newton.converged:
        for attr in ("e_tot", "mo_coeff", "mo_occ", "mo_energy", "converged"):
            setattr(mf, attr, getattr(newton, attr))
        return "retried", "second-order solver"
    return "failed", "SCF did not converge (DIIS, level shift with damping, second-order solver)"


def _frozen_core(mol, level: LevelOfTheory | None = None) -> int:
    # chemcore counts real atoms only (ghosts have no electrons) and respects ECPs
    if level is not None and not level.frozen_core:
        return 0
    return int(elements.chemcore(mol))


def mp2_solver(mf, level: LevelOfTheory):
    """pyscf MP2 object of the level: fitted (on ``ri_auxbasis``, else the SCF's own
    fitting basis or pyscf's RI basis) or with exact integrals."""
    from pyscf import df
    from pyscf.mp import dfmp2, dfump2

    unrestricted = is_unrestricted(mf)
    if not level.correlation_fitting:
        # pyscf's MP2 classes take (ia|jb) from a fitted SCF's fitting tensor: hand them
        # the same orbitals on an SCF object without it, so the integrals are exact
        base = mf.undo_df() if getattr(mf, "with_df", None) is not None else mf
        return mp.ump2.UMP2(base) if unrestricted else mp.mp2.RMP2(base)
    # the fitted classes use the SCF's own fitting tensor, or pyscf's RI basis
    solver = dfump2.DFUMP2(mf) if unrestricted else dfmp2.DFMP2(mf)
    if level.ri_auxbasis:
        solver.with_df = df.DF(mf.mol, auxbasis=level.ri_auxbasis)
    return solver


def correlation_energy(mf, level: LevelOfTheory, extra: dict | None = None) -> float:
    """Correlation energy (hartree; frozen core unless the level says otherwise) of a
    converged SCF for MP2-type or CCSD(T) levels. For CCSD(T), ``extra`` (if given)
    receives ``mp2_correlation_energy_hartree``: the MP2 energy of the same SCF and
    frozen core, exact integrals (composite levels use it)."""
    mol = mf.mol
    ncore = _frozen_core(mol, level)
    if level.method in ("mp2", "scs-mp2"):
        solver = mp2_solver(mf, level)
        solver.frozen = ncore or None
        solver.verbose = 0
        solver.kernel()
        if level.method == "mp2":
            return float(solver.e_corr)
        return float(SCS_OPPOSITE_SPIN * solver.e_corr_os + SCS_SAME_SPIN * solver.e_corr_ss)
    if level.method == "ccsd(t)":
        solver = cc.UCCSD(mf) if is_unrestricted(mf) else cc.CCSD(mf)
        solver.frozen = ncore or None
        solver.verbose = 0
        solver.conv_tol = 1e-9
        solver.kernel()
        if not solver.converged:
            raise RuntimeError("CCSD amplitudes did not converge")
        if extra is not None:
            # pyscf's MP2 on this SCF (CCSD's own first-order energy takes the orbital
            # energies from the Fock matrix of the converged density, which differs from
            # the SCF's at the level of the SCF convergence, ~1e-9 hartree)
            pt = mp.ump2.UMP2(mf) if is_unrestricted(mf) else mp.mp2.RMP2(mf)
            pt.frozen = ncore or None
            pt.verbose = 0
            pt.kernel()
            extra["mp2_correlation_energy_hartree"] = float(pt.e_corr)
        return float(solver.e_corr + solver.ccsd_t())
    return 0.0


def run_energy_job(job: Job, guess=None) -> tuple[dict, object]:
    """Compute one job.

    Parameters
    ----------
    job : Job
    guess : array, optional
        Density matrix of a similar calculation (same basis layout) to start from.

    Returns
    -------
    record : dict
        ``energy_hartree`` (total, NaN on failure), ``scf_energy_hartree``,
        ``correlation_energy_hartree``, ``dispersion_energy_hartree``, ``converged``,
        ``status`` (ok / retried / failed), ``detail``, ``scf_cycles``, ``nao``,
        ``wall_time_s``; ``spin_square`` (<S^2> of the SCF determinant) for
        unrestricted calculations.
    density : array or None
        The converged density matrix, for seeding the next calculation.
    """
    t0 = time.perf_counter()
    record = failed_record(guess="previous point" if guess is not None else "default")
    density = None
    want_gradient = "gradient" in job.outputs
    broken_symmetry = job.guess == BROKEN_SYMMETRY_GUESS
    unrestricted = job.spin != 0 or broken_symmetry
    try:
        mol = build_molecule(job)
        record["nao"] = int(mol.nao)
        level = job.level
        if want_gradient and level.method == "mp2" and unrestricted and level.correlation_fitting:
            # the plan gives open-shell MP2 force levels exact integrals throughout
            raise ValueError("no DF-MP2 gradient for open shells; the level needs exact integrals")
        # forces are first order in the density error, energies second order: gradient
        # jobs converge at least to GRADIENT_CONV_TOL_HARTREE
        conv_tol = min(job.conv_tol, GRADIENT_CONV_TOL_HARTREE) if want_gradient else job.conv_tol
        # a broken-symmetry determinant is unrestricted even at 2S = 0
        mf = _make_scf(mol, level, conv_tol, True) if broken_symmetry else _make_scf(mol, level, conv_tol)
        if level.method == "dft":
            # no density-based pruning of grid points: the dimer and both ghosted monomers
            # of a point then share one grid and its orbital values, and the gradient's
            # grid response differentiates exactly the grid the energy used
            mf.small_rho_cutoff = 0.0
            _share_grids(mf, job)
        if broken_symmetry:
            # always from the fragments (never the previous point), so the solution
            # depends on the job description only
            guess = broken_symmetry_guess(job, mol, lambda m: _make_scf(m, level, FRAGMENT_GUESS_CONV_TOL_HARTREE))
            record["guess"] = BROKEN_SYMMETRY_GUESS
        shared = share_scf_tensor(mf)
        status, detail = converge_scf(mf, guess)
        keep_scf_tensor(mf, shared)
        record["scf_cycles"] = int(getattr(mf, "cycles", 0) or 0)
        record["status"], record["detail"] = status, detail
        if status != "failed":
            density = mf.make_rdm1()
            if unrestricted:
                record["spin_square"] = float(mf.spin_square()[0])
            e_scf = float(mf.e_tot)
            if want_gradient:
                e_corr, e_disp = _gradient_outputs(job, mf, level, density, record)
            else:
                extra = {}
                e_corr = correlation_energy(mf, job.level, extra)
                record.update(extra)
                e_disp = 0.0
                if job.level.dispersion:
                    real = job.real_atoms
                    e_disp, _ = dispersion_energy_and_gradient(
                        [job.symbols[i] for i in real], [job.coordinates[i] for i in real],
                        job.level.functional, job.level.dispersion, charge=job.charge)
            record.update(
                scf_energy_hartree=e_scf,
                correlation_energy_hartree=e_corr,
                dispersion_energy_hartree=float(e_disp),
                energy_hartree=e_scf + e_corr + float(e_disp),
                converged=True,
            )
            if getattr(job, "keep_density", False):
                # optional and additive: the SCF density for deformation densities
                from .density import encode_matrix

                record["density_matrix"] = encode_matrix(density)
    except Exception as exc:  # a failed calculation must not stop the scan
        record["status"] = "failed"
        last = traceback.extract_tb(exc.__traceback__)[-1]
        record["detail"] = f"{type(exc).__name__}: {exc} (at {last.name})".replace("\n", " ")[:500]
        density = None
    record["wall_time_s"] = time.perf_counter() - t0
    return record, density


def _gradient_outputs(job: Job, mf, level: LevelOfTheory, density, record: dict) -> tuple[float, float]:
    """Fill the record's gradient and electrostatic force; return (E_corr, E_disp)."""
    from .gradient import dispersion_gradient, electrostatic_forces, mp2_gradient, scf_gradient

    mol = mf.mol
    if level.method in ("hf", "dft"):
        e_corr = 0.0
        grad, es = scf_gradient(mf, level)
        e_disp, g_disp = dispersion_gradient(job, mol.natm)
        grad = grad + g_disp
        if es is None:
            es = electrostatic_forces(mol, density)
        record["electrostatic_force_hartree_per_bohr"] = es.tolist()
    elif level.method == "mp2" and level.correlation_fitting:
        from .mp2_gradient import fitted_mp2_gradient

        e_corr, grad, _, es = fitted_mp2_gradient(mf, _frozen_core(mol, level), relaxed_density=True)
        e_disp = 0.0
        # Hellmann–Feynman part: the electrostatic force of the relaxed MP2 density
        record["electrostatic_force_hartree_per_bohr"] = es.tolist()
    elif level.method == "mp2":
        e_corr, grad = mp2_gradient(mf, _frozen_core(mol, level))
        e_disp = 0.0
        record["electrostatic_force_hartree_per_bohr"] = None  # needs the relaxed density
    else:
        raise ValueError(f"no analytic gradient for {level.method}")
    record["gradient_hartree_per_bohr"] = np.asarray(grad).tolist()
    return e_corr, float(e_disp)
