"""SAPT0 energy components of a scan, assembled from the per-point SAPT0 records.

One closed-shell density-fitted SAPT0 calculation per scan point, in the dimer-centred
decomposition basis and independent of the levels of theory, gives the variables below
(dimension ``distance``, kcal/mol; see :mod:`interkit.engine.sapt0` for the terms):

=====================  ==============================================================
variable               meaning
=====================  ==============================================================
sapt_e10_elst            E(10)elst, electrostatics of the unperturbed monomers
sapt_e10_exch            E(10)exch, first-order exchange
sapt_e10_exch_s2         E(10)exch in the single-exchange (S^2) approximation
sapt_e20_ind_resp            E(20)ind,resp, induction with orbital response, both directions
sapt_e20_ind_resp_a/_ba     its parts: A polarised by B / B polarised by A
sapt_e20_exind_resp       E(20)exch-ind,resp (S^2)
sapt_e20_disp            E(20)disp
sapt_e20_exdisp       E(20)exch-disp (S^2)
sapt_delta_hf               δHF: HF interaction minus the first- and second-order SCF terms
sapt_e_int_hf          counterpoise-corrected HF interaction energy in the same basis
e_elst                 electrostatics = elst10
e_exch                 exchange = exch10
e_ind                  induction = ind20r + exch-ind20r + δHF
e_disp                 dispersion = disp20 + exch-disp20
e_sapt0                SAPT0 total, the sum of the four components
e_ssapt0               sSAPT0 total: exch-ind and exch-disp scaled by (exch10/exch10_s2)^3
sapt_status            'ok' or 'failed' per point (``sapt_status_detail`` says why)
=====================  ==============================================================

Sign convention as for ``e_int``: negative = attractive.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from ..errors import InputError
from ..model.job import ScanPlan
from ..units import HARTREE_TO_KCAL_PER_MOL

#: Dataset variable -> (term key of the SAPT0 record, description)
TERM_VARIABLES = {
    "sapt_e10_elst": ("elst10", "E(10)elst: electrostatics of the unperturbed monomers"),
    "sapt_e10_exch": ("exch10", "E(10)exch: first-order exchange"),
    "sapt_e10_exch_s2": ("exch10_s2", "E(10)exch(S^2): first-order exchange, single-exchange approximation"),
    "sapt_e20_ind_resp": ("ind20r", "E(20)ind,resp: induction with orbital response (CPHF), both directions"),
    "sapt_e20_ind_resp_a": ("ind20r_ab", "E(20)ind,resp of A polarised by the field of B"),
    "sapt_e20_ind_resp_b": ("ind20r_ba", "E(20)ind,resp of B polarised by the field of A"),
    "sapt_e20_exind_resp": ("exch_ind20r", "E(20)exch-ind,resp (S^2): exchange-induction"),
    "sapt_e20_disp": ("disp20", "E(20)disp: dispersion"),
    "sapt_e20_exdisp": ("exch_disp20", "E(20)exch-disp (S^2): exchange-dispersion"),
    "sapt_delta_hf": ("dhf", "delta HF: HF interaction minus the first- and second-order SCF terms"),
    "sapt_e_int_hf": ("e_int_hf", "counterpoise-corrected HF interaction energy in the decomposition basis"),
}
#: grouped components: variable -> (term key, description)
COMPONENT_VARIABLES = {
    "e_elst": ("elst", "electrostatics (SAPT0: E(10)elst)"),
    "e_exch": ("exch", "exchange (SAPT0: E(10)exch)"),
    "e_ind": ("ind", "induction (SAPT0: ind20r + exch-ind20r + delta HF)"),
    "e_disp": ("disp", "dispersion (SAPT0: disp20 + exch-disp20)"),
    "e_sapt0": ("total", "SAPT0 interaction energy (sum of the four components)"),
    "e_ssapt0": ("total_ssapt0", "sSAPT0 interaction energy (exchange-scaled exch-ind and exch-disp)"),
}
#: the four components in display order
COMPONENTS = ("e_elst", "e_exch", "e_ind", "e_disp")
COMPONENT_NAMES = {"e_elst": "electrostatics", "e_exch": "exchange", "e_ind": "induction",
                   "e_disp": "dispersion"}
ENERGY_NAMES = tuple(TERM_VARIABLES) + tuple(COMPONENT_VARIABLES)


def decomposition_variables(plan: ScanPlan, records: dict) -> tuple[dict, dict]:
    """Dataset variables (name -> (dims, data, attrs)) and Dataset attrs of a scan's
    SAPT0 decomposition. A point whose SAPT0 job failed or is missing is NaN with its
    reason in ``sapt_status_detail``."""
    from ..engine.decomposition import fitting_basis_labels

    spec = plan.spec
    npnt = len(spec.points)
    values = {name: np.full(npnt, np.nan) for name in ENERGY_NAMES}
    status = np.full(npnt, "failed", dtype=object)
    detail = np.full(npnt, "", dtype=object)
    wall = np.zeros(npnt)
    for pi in range(npnt):
        rec = records.get(plan.decomposition.get(pi, ""))
        if rec is None:
            detail[pi] = "SAPT0: not computed"
            continue
        wall[pi] = float(rec.get("wall_time_s", 0.0))
        terms = rec.get("sapt0_hartree")
        if rec.get("status") == "failed" or not terms:
            detail[pi] = str(rec.get("detail", "SAPT0 failed"))
            continue
        status[pi] = "ok"
        for table in (TERM_VARIABLES, COMPONENT_VARIABLES):
            for name, (key, _) in table.items():
                values[name][pi] = float(terms[key]) * HARTREE_TO_KCAL_PER_MOL
    basis = spec.decomposition_basis
    fits = fitting_basis_labels(basis, spec.dimer.symbols)
    energy_attrs = {"units": "kcal/mol", "sign_convention": "negative = attractive",
                    "decomposition_basis": basis}
    out = {}
    for table in (TERM_VARIABLES, COMPONENT_VARIABLES):
        for name, (_, text) in table.items():
            out[name] = (("distance",), values[name], dict(energy_attrs, long_name=text))
    out["sapt_status"] = (("distance",), status.astype(str),
                          {"long_name": "SAPT0 status per point", "flag_values": "ok failed"})
    out["sapt_status_detail"] = (("distance",), detail.astype(str),
                                 {"long_name": "why a SAPT0 point failed"})
    out["sapt_wall_time_s"] = (("distance",), wall, {"units": "s", "long_name": "wall time of the SAPT0 point"})
    attrs = {
        "decomposition": "SAPT0 (closed-shell, density-fitted, dimer-centred basis)",
        "decomposition_basis": basis,
        "decomposition_jk_fitting_basis": fits["jk"],
        "decomposition_ri_fitting_basis": fits["ri"],
        "decomposition_memory_limit_mb": spec.sapt_memory_limit_mb,
    }
    return out, attrs


def has_decomposition(ds: xr.Dataset) -> bool:
    """True if the Dataset carries the four SAPT0 components."""
    return all(name in ds.variables for name in COMPONENTS)


def check_decomposition(ds: xr.Dataset) -> None:
    """Schema check of the decomposition variables present (none is fine)."""
    for name in ENERGY_NAMES:
        if name in ds.variables:
            if ds[name].attrs.get("units") != "kcal/mol":
                raise InputError(f"dataset variable {name}: units {ds[name].attrs.get('units')!r} "
                                 "is not 'kcal/mol'")
            if "distance" not in ds[name].dims:
                raise InputError(f"dataset variable {name}: dimensions {ds[name].dims} lack 'distance'")
    if "sapt_status" in ds.variables:
        bad = set(np.unique(ds["sapt_status"].values).astype(str)) - {"ok", "failed"}
        if bad:
            raise InputError(f"dataset variable sapt_status: unexpected values {sorted(bad)}")
        failed = ds["sapt_status"] == "failed"
        if "e_sapt0" in ds.variables and bool((failed & ds["e_sapt0"].notnull()).any()):
            raise InputError("dataset: a failed SAPT0 point carries a number in e_sapt0")


def components_at(ds: xr.Dataset, index: int, unit: str = "kcal/mol", level: str | None = None) -> dict:
    """The four components (and the SAPT0 total) at point ``index`` in ``unit``.

    ``level`` selects a level when the variables carry a ``level`` dimension.
    """
    from ..units import convert_energy

    out = {}
    for name in COMPONENTS + ("e_sapt0",):
        if name not in ds.variables:
            continue
        var = ds[name]
        if "level" in var.dims:
            var = var.sel(level=level if level is not None else str(ds["level"].values[0]))
        out[name] = float(convert_energy(float(var.isel(distance=index).values), "kcal/mol", unit))
    return out


def decomposition_report(ds: xr.Dataset) -> list[str]:
    """Text lines with the SAPT0 components at the point of lowest SAPT0 energy
    (empty if the Dataset has no decomposition).

    The components are grouped by what they do at that point: the attractive ones,
    largest first, each with its share of the total attraction, then the repulsive
    ones, then the net SAPT0 (and sSAPT0) energy.
    """
    if not has_decomposition(ds) or "e_sapt0" not in ds.variables or "level" in ds["e_sapt0"].dims:
        return []
    total = np.asarray(ds["e_sapt0"].values, dtype=float)
    basis = ds.attrs.get("decomposition_basis", "?")
    if not np.any(np.isfinite(total)):
        return [f"SAPT0 decomposition ({basis}): no point has one (see sapt_status_detail)"]
    i = int(np.nanargmin(total))
    r = float(ds["distance"].values[i])
    parts = components_at(ds, i)
    attractive = sorted((n for n in COMPONENTS if parts[n] < 0), key=lambda n: parts[n])
    repulsive = [n for n in COMPONENTS if parts[n] >= 0]
    attraction = sum(parts[n] for n in attractive)
    lines = [f"SAPT0 decomposition ({basis}) at R = {r:.3f} Å, the grid point of lowest SAPT0 energy; kcal/mol"]
    for k, name in enumerate(attractive):
        group = "attraction" if k == 0 else ""
        share = 100.0 * parts[name] / attraction if attraction else float("nan")
        lines.append(f"  {group:<11s} {COMPONENT_NAMES[name]:<15s} {parts[name]:+10.3f}   {share:3.0f} % of the attraction")
    for k, name in enumerate(repulsive):
        group = "repulsion" if k == 0 else ""
        lines.append(f"  {group:<11s} {COMPONENT_NAMES[name]:<15s} {parts[name]:+10.3f}")
    net = f"  {'net':<11s} {'SAPT0':<15s} {parts['e_sapt0']:+10.3f}"
    if "e_ssapt0" in ds.variables:
        net += f"   (sSAPT0 {float(ds['e_ssapt0'].values[i]):+.3f})"
    lines.append(net)
    n_failed = int((ds["sapt_status"] == "failed").sum()) if "sapt_status" in ds.variables else 0
    if n_failed:
        lines.append(f"  ({n_failed} point(s) without a decomposition)")
    return lines
