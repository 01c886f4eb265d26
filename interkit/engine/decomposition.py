"""Run one SAPT0 decomposition job (``outputs == ('sapt0',)``) and describe its bases.

The job carries the geometry, the fragment split and charges as data; the terms come
from :func:`interkit.engine.sapt0.sapt0_terms` in the dimer-centred basis of the job's
level. The result is a plain record (JSON-safe dict) with every term in hartree; a
failure (SCF or CPHF non-convergence, any exception) becomes a failed record with its
reason, so the rest of the scan goes on.
"""

from __future__ import annotations

import time
import traceback

from ..model.geometry import Dimer
from ..model.job import Job, failed_record
from .sapt0 import TERM_KEYS, sapt0_terms

#: extra keys of the sSAPT0 variant stored in every record
SCALED_KEYS = ("exch_ind20r_scaled", "exch_disp20_scaled", "total_ssapt0", "exch_scaling")


def job_dimer(job: Job) -> Dimer:
    """The Dimer a SAPT0 job describes (all atoms real, closed-shell fragments)."""
    if not job.fragment_a or len(job.fragment_charges) != 2:
        raise ValueError("the job does not describe a fragment split")
    if any(job.ghost):
        raise ValueError("a SAPT0 job has no ghost atoms")
    return Dimer(tuple(job.symbols), [list(c) for c in job.coordinates], tuple(job.fragment_a),
                 charges=tuple(job.fragment_charges), multiplicities=(1, 1), name="sapt0 job",
                 _check=False)


def fitting_basis_labels(basis: str, symbols) -> dict[str, str]:
    """Names of the fitting bases the decomposition uses, per element.

    Returns
    -------
    dict
        ``{'jk': 'O: aug-cc-pvdz-jkfit; H: cc-pvdz-jkfit', 'ri': ...}`` for the
        Coulomb/exchange/induction fit and the dispersion fit.
    """
    elements = sorted(set(symbols))
    low = basis.lower()
    out = {}
    for kind in ("jkfit", "ri"):
        if low.startswith("jun-"):
            stem = low[4:]
            names = {s: (stem if s in ("H", "He") else "aug-" + stem) + "-" + kind for s in elements}
        else:
            from pyscf import df, gto

            mol = gto.M(atom=[(s, (0.0, 0.0, 2.0 * k)) for k, s in enumerate(elements)], basis=basis,
                        spin=None, verbose=0)
            aux = df.make_auxbasis(mol, mp2fit=(kind == "ri"))
            names = {s: str(aux[s]) if isinstance(aux, dict) else str(aux) for s in elements}
        out["jk" if kind == "jkfit" else "ri"] = "; ".join(f"{s}: {names[s]}" for s in elements)
    return out


def run_decomposition_job(job: Job) -> dict:
    """Compute the SAPT0 terms of one job.

    Returns
    -------
    dict
        ``sapt0_hartree`` (term name -> energy in hartree, see
        :data:`interkit.engine.sapt0.TERM_KEYS` and :data:`SCALED_KEYS`; None on
        failure), ``converged``, ``status`` (``'ok'`` or ``'failed'``), ``detail``,
        ``nao``, ``wall_time_s``; ``energy_hartree`` is NaN (a decomposition has no
        total energy of its own).
    """
    t0 = time.perf_counter()
    record = failed_record(sapt0_hartree=None, basis=job.level.basis)
    try:
        dimer = job_dimer(job)
        terms = sapt0_terms(dimer, job.level.basis, max_memory_mb=float(job.memory_limit_mb),
                            conv_tol=min(float(job.conv_tol), 1e-10), scaled=True)  # CPHF needs tight SCF
        missing = [k for k in TERM_KEYS + SCALED_KEYS if k not in terms]
        if missing:
            raise RuntimeError(f"terms missing from the SAPT0 result: {', '.join(missing)}")
        record.update(sapt0_hartree={k: float(terms[k]) for k in TERM_KEYS + SCALED_KEYS},
                      converged=True, status="ok", detail="SAPT0")
    except Exception as exc:  # a failed decomposition must not stop the scan
        last = traceback.extract_tb(exc.__traceback__)[-1] if exc.__traceback__ else None
        where = f" (at {last.name})" if last is not None else ""
        record["detail"] = f"SAPT0: {type(exc).__name__}: {exc}{where}".replace("\n", " ")[:500]
    record["wall_time_s"] = time.perf_counter() - t0
    return record
