"""The ``dispersion`` dimension: several post-hoc dispersion schemes on one SCF per point.

Dispersion corrections (D3 with zero or Becke–Johnson damping, D4, optionally with the
three-body term) depend on the nuclear positions only and leave the density unchanged,
so every scheme shares the SCF of a calculation. The Dataset of a scan whose spec lists
``dispersion`` schemes carries:

=====================  ====================================  =========================
variable               dimensions                            meaning
=====================  ====================================  =========================
e_int, e_int_nocp      level, dispersion, distance           kcal/mol, scheme included
e_disp_corr            level, dispersion, distance           kcal/mol, the scheme's part
                                                             of the interaction energy
dispersion_status      level, dispersion                     'ok', or why the pair has
                                                             no values
forces, force_along…   level, dispersion, distance, …        with ``forces=True``
=====================  ====================================  =========================

Non-DFT levels carry values under ``'none'`` only; a scheme without parameters for a
functional is NaN with its reason in ``dispersion_status``, never a crash.
:func:`flatten_dispersion` folds the schemes into the ``level`` axis
(``'b3lyp/def2-svp'`` + ``'d3bj'`` -> ``'b3lyp-d3bj/def2-svp'``) for views that show
one curve per level.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import xarray as xr

from ..model.composite import CompositeLevel
from ..model.composite import parse_level as parse_any_level
from ..model.job import CP_ROLES, ScanPlan
from ..model.levels import DISPERSION_LABELS, LevelOfTheory
from ..units import HARTREE_TO_KCAL_PER_MOL

#: variables whose values depend on the dispersion scheme
SCHEME_DEPENDENT = ("e_int", "e_int_nocp", "e_total_hartree", "forces", "force_pulay", "force_along",
                    "force_pulay_along", "fragment_force", "fragment_force_pulay", "fragment_torque")


def scheme_label(level: LevelOfTheory, scheme: str) -> str:
    """Label of ``level`` with ``scheme`` applied, e.g. ``'b3lyp-d3bj/def2-svp'``."""
    if scheme == "none":
        return level.label
    head, _, tail = level.label.partition("/")
    return f"{head}-{scheme}/{tail}"


def pair_status(level: LevelOfTheory, scheme: str, reason: Callable[[str, str], str]) -> str:
    """``'ok'`` or why (level, scheme) has no values."""
    if scheme == "none":
        return "ok"
    if isinstance(level, CompositeLevel):
        return "not applicable: a composite level"
    if level.method != "dft":
        return f"not applicable: {level.method} is not a DFT level"
    why = reason(level.functional, scheme)
    return f"unavailable: {why}" if why else "ok"


def _shifted_records(records: dict, terms: dict, scheme: str) -> dict:
    """Records with the scheme's energy (and gradient) added to every DFT calculation."""
    if scheme == "none":
        return records
    out = {}
    for key, rec in records.items():
        term = terms.get((key, scheme))
        if term is None or rec.get("status") == "failed":
            out[key] = rec
            continue
        rec = dict(rec)
        rec["energy_hartree"] = rec["energy_hartree"] + term["energy_hartree"]
        rec["dispersion_energy_hartree"] = term["energy_hartree"]
        grad = rec.get("gradient_hartree_per_bohr")
        if grad is not None and term.get("gradient_hartree_per_bohr") is not None:
            rec["gradient_hartree_per_bohr"] = (np.asarray(grad) + np.asarray(term["gradient_hartree_per_bohr"])).tolist()
        out[key] = rec
    return out


def _disp_part(plan: ScanPlan, terms: dict, scheme: str) -> np.ndarray:
    """Counterpoise combination of the scheme's energies (kcal/mol), (level, distance)."""
    nl, npnt = len(plan.spec.levels), plan.n_points
    out = np.full((nl, npnt), np.nan)
    roles = CP_ROLES if plan.spec.counterpoise else ("dimer", "a_own_basis", "b_own_basis")
    for (li, pi), entry in plan.table.items():
        if scheme == "none":
            out[li, pi] = 0.0
            continue
        parts = [terms.get((entry[r], scheme)) for r in roles]
        if all(p is not None for p in parts):
            e = parts[0]["energy_hartree"] - parts[1]["energy_hartree"] - parts[2]["energy_hartree"]
            out[li, pi] = e * HARTREE_TO_KCAL_PER_MOL
    return out


def assemble_with_schemes(plan: ScanPlan, records: dict, terms: dict, assemble_one: Callable,
                          reason: Callable[[str, str], str]) -> xr.Dataset:
    """The scan Dataset with a ``dispersion`` dimension (pure: no I/O).

    Parameters
    ----------
    plan : ScanPlan
        Its spec lists the schemes in ``spec.dispersion``.
    records : dict
        Job key -> record of the SCF (and correlation) calculations, no dispersion.
    terms : dict
        ``(job key, scheme) -> {'energy_hartree', 'gradient_hartree_per_bohr'}`` from
        :func:`interkit.engine.dispersion.dispersion_terms`.
    assemble_one : callable
        ``(plan, records) -> Dataset`` without the dimension.
    reason : callable
        ``(functional, scheme) -> str``: why a pair is unavailable ('' if it is not).
    """
    spec = plan.spec
    schemes = list(spec.dispersion)
    parts = [assemble_one(plan, _shifted_records(records, terms, s)) for s in schemes]
    base = parts[0]
    # rows of composites and of levels derived from their components follow spec.levels
    rows = [parse_any_level(str(lab)) for lab in base["level"].values]
    status = np.array([[pair_status(lv, s, reason) for s in schemes] for lv in rows], dtype=object)
    index = xr.IndexVariable("dispersion", np.array(schemes, dtype=str),
                             {"long_name": "post-hoc dispersion correction"})
    ds = base.copy()
    for name in SCHEME_DEPENDENT:
        if name not in base.variables:
            continue
        stacked = xr.concat([p[name] for p in parts], dim=index)
        dims = list(base[name].dims)
        stacked = stacked.transpose("level", "dispersion", *dims[1:])
        ok = xr.DataArray(status == "ok", dims=("level", "dispersion"))
        ds[name] = stacked.where(ok).assign_attrs(base[name].attrs)
    disp = np.stack([_disp_part(plan, terms, s) for s in schemes], axis=1)
    if len(rows) > disp.shape[0]:  # derived and composite rows: wavefunction methods, no scheme
        extra = np.full((len(rows) - disp.shape[0],) + disp.shape[1:], np.nan)
        if "none" in schemes:
            extra[:, schemes.index("none"), :] = 0.0
        disp = np.concatenate([disp, extra])
    disp[status != "ok"] = np.nan
    disp[~np.broadcast_to(base["converged"].values[:, None, :], disp.shape)] = np.nan
    ds["e_disp_corr"] = (("level", "dispersion", "distance"), disp,
                         {"units": "kcal/mol", "long_name": "dispersion correction's part of the interaction energy",
                          "sign_convention": "negative = attractive"})
    ds["dispersion_status"] = (("level", "dispersion"), status.astype(str),
                               {"long_name": "whether the scheme applies to the level"})
    ds = ds.assign_coords(dispersion=index)
    ds["dispersion_label"] = (("dispersion",), np.array([DISPERSION_LABELS.get(s, "none") for s in schemes], dtype=str),
                              {"long_name": "name of the scheme"})
    return ds


def available_pairs(ds: xr.Dataset) -> list[tuple[str, str]]:
    """(level, scheme) pairs of a Dataset with the ``dispersion`` dimension that have values."""
    status = ds["dispersion_status"]
    return [(str(lv), str(s)) for lv in ds["level"].values for s in ds["dispersion"].values
            if str(status.sel(level=lv, dispersion=s).values) == "ok"]


def flatten_dispersion(ds: xr.Dataset) -> xr.Dataset:
    """Fold the ``dispersion`` dimension into ``level``; unchanged without it.

    Each (level, scheme) pair with values becomes one level labelled like a level with
    a dispersion suffix (``'b3lyp-d3bj/def2-svp'``; scheme ``'none'`` keeps the bare
    label), so every view that draws one curve per level works unchanged.
    """
    if "dispersion" not in ds.dims:
        return ds
    levels = [str(x) for x in ds["level"].values]
    schemes = [str(x) for x in ds["dispersion"].values]
    pairs = available_pairs(ds)
    li = [levels.index(lv) for lv, _ in pairs]
    si = [schemes.index(s) for _, s in pairs]
    labels = [scheme_label(parse_any_level(lv), s) for lv, s in pairs]
    out = ds.drop_vars(["dispersion_status", "dispersion_label"]).isel(level=li)
    for name in list(out.data_vars):
        if "dispersion" in out[name].dims:
            picked = ds[name].isel(level=xr.DataArray(li, dims="level"), dispersion=xr.DataArray(si, dims="level"))
            order = ["level"] + [d for d in ds[name].dims if d not in ("level", "dispersion")]
            out[name] = picked.transpose(*order).assign_attrs(ds[name].attrs)
    out = out.drop_dims("dispersion") if "dispersion" in out.dims else out
    out = out.drop_vars("dispersion", errors="ignore")
    out = out.assign_coords(level=("level", np.array(labels, dtype=str), ds["level"].attrs))
    out.attrs = dict(ds.attrs, dispersion_folded="schemes folded into the level axis")
    return out
