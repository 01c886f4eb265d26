"""Rows of composite levels in the scan Dataset (see :mod:`interkit.model.composite`).

The ``level`` dimension of a scan with composites holds, in order: the plain levels
requested, the computed components not requested, the rows derived from component jobs
without a calculation of their own (Hartree–Fock at the larger basis from the MP2 job's
SCF, MP2 in the correction basis from the CCSD(T) job's SCF), then the composites.
Coordinates ``level_kind`` ('requested', 'component', 'composite') and ``used_by``
(the composites, joined by ``'; '``, that use a row) say which is which.

Each composite interaction energy is combined component by component, each from the
dimer and ghosted (or own-basis) calculations of its own basis:
``E_int = E_int^HF(Y) + CBS[E_int^corr(X), E_int^corr(Y)] + (E_int^corr,CC - E_int^corr,MP2)(corr. basis)``.
A single-basis composite (``mp2/B + ccsd(t)/b``) takes E_int^HF(B) + E_int^corr(B) in
place of the first two terms; its basis-set uncertainty is NaN.
"""

from __future__ import annotations

import json

import numpy as np
import xarray as xr

from ..model.composite import CompositeLevel, extrapolate_inverse_cube
from ..model.job import CP_ROLES, ScanPlan
from ..units import HARTREE_TO_KCAL_PER_MOL

UNCERTAINTY_NOTE = (
    "basis-set uncertainty of an extrapolated level: |E_int(composite) - E_int(same recipe "
    "with the larger basis's correlation energy instead of the extrapolated one)|, the "
    "spread between the two bases; NaN for levels that are not extrapolated (including a single-basis "
    "composite)")
HALFCP_LONG_NAME = "half-counterpoise interaction energy (mean of corrected and uncorrected)"
COMPOSITE_TOTAL_NOTE = ("e_total_hartree, job_key and scf_cycles are empty for composite rows (no single "
                        "calculation) and those of the source job for derived rows; wall_time_s is 0 for "
                        "both (their calculations are counted in the component rows)")
OWN_ROLES = ("dimer", "a_own_basis", "b_own_basis")
_STATUS_RANK = {"ok": 0, "retried": 1, "spin-contaminated": 2, "failed": 3}


def _energies(plan: ScanPlan, records: dict, li: int, field) -> np.ndarray:
    """(distance, role) energies in hartree of computed level ``li`` from one record
    field (a name, or a callable of the record); NaN where missing or failed."""
    roles = plan.roles
    out = np.full((plan.n_points, len(roles)), np.nan)
    for pi in range(plan.n_points):
        entry = plan.table[(li, pi)]
        for ri, role in enumerate(roles):
            rec = records.get(entry.get(role, ""))
            if rec is None or rec.get("status") == "failed":
                continue
            value = field(rec) if callable(field) else rec.get(field)
            out[pi, ri] = np.nan if value is None else float(value)
    return out


def _combine(e: np.ndarray, roles: tuple[str, ...], which: tuple[str, str, str]) -> np.ndarray:
    """Interaction energy (kcal/mol) per point: first role minus the other two."""
    if not all(r in roles for r in which):
        return np.full(e.shape[0], np.nan)
    i, j, k = (roles.index(r) for r in which)
    return (e[:, i] - e[:, j] - e[:, k]) * HARTREE_TO_KCAL_PER_MOL


def _parts(plan: ScanPlan, records: dict, li: int, field) -> tuple[np.ndarray, np.ndarray]:
    e = _energies(plan, records, li, field)
    return _combine(e, plan.roles, CP_ROLES), _combine(e, plan.roles, OWN_ROLES)


def add_composite_rows(ds: xr.Dataset, plan: ScanPlan, records: dict) -> xr.Dataset:
    """``ds`` (assembled for ``plan.spec.levels``) with the derived and composite rows."""
    spec = plan.spec
    computed = [lv.label for lv in spec.levels]
    index = {lab: k for k, lab in enumerate(computed)}
    derived, used_by = [], {}
    for comp in spec.composites:
        for lv in comp.components():
            used_by.setdefault(lv.label, []).append(comp.label)
        for lv, source, field in comp.derived():
            used_by.setdefault(lv.label, []).append(comp.label)
            if lv.label not in index and lv.label not in [d[0] for d in derived]:
                derived.append((lv.label, source.label, field))
    labels = computed + [d[0] for d in derived] + [c.label for c in spec.composites]
    fill = {"status": "failed", "status_detail": "", "job_key": "", "converged": False, "wall_time_s": 0.0}
    out = ds.reindex(level=labels, fill_value={k: v for k, v in fill.items() if k in ds})
    text = [n for n in ("status", "status_detail", "job_key") if n in out]
    for name in text:  # objects while rows are filled: fixed-width strings would truncate
        out[name] = out[name].astype(object)
    for label, source, field in derived:
        _fill_derived(out, plan, records, label, source, index[source], field)
    recipes, uncertainty = {}, np.full((len(labels), plan.n_points), np.nan)
    for comp in spec.composites:
        uncertainty[labels.index(comp.label)] = _fill_composite(out, plan, records, comp, index)
        recipes[comp.label] = comp.recipe()
    for name in text:
        out[name] = out[name].astype(str)
    requested = set(spec.requested_levels)
    kinds = ["composite" if lab in recipes else "requested" if lab in requested else "component" for lab in labels]
    out = out.assign_coords(
        level_kind=("level", np.array(kinds, dtype=str), {"long_name": "requested level, component of a "
                                                          "composite, or composite"}),
        used_by=("level", np.array(["; ".join(used_by.get(lab, [])) for lab in labels], dtype=str),
                 {"long_name": "composite levels that use this row"}))
    out["e_int_basis_uncertainty"] = (("level", "distance"), uncertainty,
                                      {"units": "kcal/mol", "long_name": "basis-set uncertainty of the "
                                       "interaction energy", "definition": UNCERTAINTY_NOTE})
    out.attrs["composite_recipe_json"] = json.dumps(recipes, sort_keys=True)
    out.attrs["composite_rows"] = COMPOSITE_TOTAL_NOTE
    out["e_total_hartree"].attrs["composite_rows"] = COMPOSITE_TOTAL_NOTE
    out.attrs["requested_levels_json"] = json.dumps(list(spec.requested_levels))
    return out


def _fill_derived(out, plan, records, label, source, li, field) -> None:
    """A derived row: the source row's calculations with another energy taken from them."""
    if field == "scf_energy_hartree":
        get = "scf_energy_hartree"
    else:
        def get(rec):
            extra = rec.get(field)
            return None if extra is None else rec["scf_energy_hartree"] + extra
    e = _energies(plan, records, li, get)
    cp, nocp = _combine(e, plan.roles, CP_ROLES), _combine(e, plan.roles, OWN_ROLES)
    src = out.sel(level=source)
    if plan.spec.counterpoise:
        cp[~np.isfinite(src["e_int"].values)] = np.nan
    else:
        cp[:] = np.nan
    nocp[~np.isfinite(src["e_int_nocp"].values)] = np.nan
    row = {"level": label}
    out["e_total_hartree"].loc[row] = e
    out["e_int"].loc[row] = cp
    out["e_int_nocp"].loc[row] = nocp
    out["bsse"].loc[row] = cp - nocp
    note = f"derived from the {source} calculations ({'their SCF part' if field == 'scf_energy_hartree' else field})"
    for name in ("status", "converged", "job_key", "scf_cycles", "spin_square"):
        if name in out:
            out[name].loc[row] = src[name].values
    details = [f"{note}; {d}" if d else note for d in src["status_detail"].values]
    out["status_detail"].loc[row] = np.array(details, dtype=str)


def _fill_composite(out, plan, records, comp: CompositeLevel, index: dict) -> np.ndarray:
    """Fill one composite row; return its basis-set uncertainty (kcal/mol) per point."""
    base = comp.base_levels()
    large = base[-1]
    ll = index[large.label]
    hf_cp, hf_nocp = _parts(plan, records, ll, "scf_energy_hartree")
    cl_cp, cl_nocp = _parts(plan, records, ll, "correlation_energy_hartree")
    if comp.extrapolates:
        cs_cp, cs_nocp = _parts(plan, records, index[base[0].label], "correlation_energy_hartree")
        x = comp.x_small
        cbs_cp, cbs_nocp = extrapolate_inverse_cube(cs_cp, cl_cp, x), extrapolate_inverse_cube(cs_nocp, cl_nocp, x)
    else:  # one base basis: its own correlation energy, nothing extrapolated
        cbs_cp, cbs_nocp = cl_cp, cl_nocp
    e_cp, e_nocp = hf_cp + cbs_cp, hf_nocp + cbs_nocp
    rows = [lv.label for lv in base]
    corr = comp.correction()
    if corr is not None:
        lc = index[corr.label]

        def delta(rec):
            mp2 = rec.get("mp2_correlation_energy_hartree")
            return None if mp2 is None else rec["correlation_energy_hartree"] - mp2
        d_cp, d_nocp = _parts(plan, records, lc, delta)
        e_cp, e_nocp = e_cp + d_cp, e_nocp + d_nocp
        rows.append(corr.label)
    # the point's state: the worst of its components'
    status = np.full(plan.n_points, "ok", dtype=object)
    detail = [[] for _ in range(plan.n_points)]
    for lab in rows:
        src = out.sel(level=lab)
        for pi, (st, det) in enumerate(zip(src["status"].values, src["status_detail"].values)):
            if _STATUS_RANK.get(str(st), 3) > _STATUS_RANK[status[pi]]:
                status[pi] = str(st)
            if det:
                detail[pi].append(f"component {lab}: {det}")
    failed = status == "failed"
    if not plan.spec.counterpoise:
        e_cp = np.full_like(e_cp, np.nan)
    e_cp[failed] = np.nan
    e_nocp[failed] = np.nan
    spread = np.abs(cbs_cp - cl_cp) if plan.spec.counterpoise else np.abs(cbs_nocp - cl_nocp)
    if not comp.extrapolates:
        spread[:] = np.nan  # no second basis to take a spread from
    spread[failed] = np.nan
    row = {"level": comp.label}
    out["e_int"].loc[row] = e_cp
    out["e_int_nocp"].loc[row] = e_nocp
    out["bsse"].loc[row] = e_cp - e_nocp
    out["status"].loc[row] = status.astype(str)
    out["converged"].loc[row] = ~failed
    out["status_detail"].loc[row] = np.array(["; ".join(d) for d in detail], dtype=str)
    return spread


def add_halfcp(ds: xr.Dataset) -> xr.Dataset:
    """Add ``e_int_halfcp`` (every row) and, if absent, an all-NaN ``e_int_basis_uncertainty``."""
    half = ((ds["e_int"] + ds["e_int_nocp"]) / 2).assign_attrs(
        units="kcal/mol", sign_convention="negative = bound", long_name=HALFCP_LONG_NAME)
    ds["e_int_halfcp"] = half
    if "e_int_basis_uncertainty" not in ds:
        ds["e_int_basis_uncertainty"] = (("level", "distance"), np.full(ds["bsse"].shape, np.nan),
                                         {"units": "kcal/mol", "long_name": "basis-set uncertainty of the "
                                          "interaction energy", "definition": UNCERTAINTY_NOTE})
    return ds

