"""The scan Dataset: schema, assembly from job records, validation, netCDF files.

Layout (dimensions ``level``, ``distance``, ``atom``, ``xyz``, ``role``, ``end``):

==========================  ==========================  ===========
variable                    dimensions                  units
==========================  ==========================  ===========
e_int                       level, distance             kcal/mol
e_int_nocp                  level, distance             kcal/mol
                            (level, dispersion, distance when the spec lists
                            dispersion schemes: see :mod:`interkit.data.dispersion`)
bsse                        level, distance             kcal/mol
e_int_halfcp                level, distance             kcal/mol (mean of e_int and
                                                        e_int_nocp)
e_int_basis_uncertainty     level, distance             kcal/mol (extrapolated levels;
                                                        NaN elsewhere)
e_total_hartree             level, distance, role       hartree
converged                   level, distance             (bool)
status                      level, distance             ok/retried/
                                                        spin-contaminated/failed
spin_square                 level, distance, role       1 (<S^2>; only when a
                                                        calculation is unrestricted)
status_detail               level, distance             text
wall_time_s                 level, distance             s
scf_cycles                  level, distance, role       1 (SCF iterations of each
                                                        calculation; NaN: failed/none)
job_key                     level, distance, role       sha256
coordinates                 distance, atom, xyz         angstrom
anchors                     distance, end, xyz          angstrom
symbol, fragment            atom                        -
factor                      distance                    1
==========================  ==========================  ===========

A point with counterpoise whose monomer in its own basis failed keeps ``e_int`` (which does
not use it) and its status (``ok``/``retried``); only ``e_int_nocp`` and ``bsse`` are NaN,
and ``status_detail`` says which calculation failed and why.

The attribute ``level_settings_json`` records, per level label, the numerical settings
used (SCF and correlation fitting, frozen core, DFT grid, the fitting bases pyscf's
defaults resolved to, the ECPs) and the size estimate of its dimer calculation.

Composite levels add rows after the computed levels, with coordinates ``level_kind`` and
``used_by`` (see :mod:`interkit.data.composite`).

Sign convention: interaction energies are negative when the dimer is bound. Every
later variable (forces, components, dispersion corrections) is added to this layout:
forces see :mod:`interkit.data.forces`, the SAPT0 components (dimension ``distance`` only)
see :mod:`interkit.data.sapt0`.
"""

from __future__ import annotations

import json
import os
from datetime import datetime, timezone

import numpy as np
import xarray as xr

from ..errors import InputError
from ..model.job import OWN_BASIS_ROLES, ROLE_LABELS, ScanPlan
from ..units import CODATA_EDITION, HARTREE_TO_KCAL_PER_MOL

#: version 2 renamed the SAPT0 term variables (files of version 1 are converted on reading)
SCHEMA_VERSION = "interkit-scan/2"

CAUTION = (
    "Computed interaction energies are model results: they carry the errors of the "
    "stated method and basis set (and of the counterpoise scheme). Validate them "
    "against higher-level or experimental data before using them in design decisions."
)

ENERGY_VARIABLES = {
    "e_int": "interaction energy (counterpoise-corrected)",
    "e_int_nocp": "interaction energy (uncorrected)",
    "bsse": "basis set superposition error (corrected minus uncorrected; positive)",
}

#: appended to the status detail of a point whose own-basis monomer failed (with counterpoise)
NOCP_LOST = "e_int_nocp and bsse not available (e_int does not use the own-basis monomers)"

REQUIRED_VARIABLES = ("e_int", "e_int_nocp", "bsse", "converged", "status", "coordinates",
                      "symbol", "fragment")


#: distributions of the dispersion libraries recorded in every Dataset (attribute name ->
#: distribution name); absent ones are recorded as "not installed"
DISPERSION_DISTRIBUTIONS = {
    "pyscf_dispersion_version": "pyscf-dispersion",
    "dftd3_version": "dftd3",
    "dftd4_version": "dftd4",
}


def _versions() -> dict[str, str]:
    """Versions of interkit and of every library whose numbers enter a scan."""
    from importlib import metadata

    import pyscf

    from ..version import __version__

    out = {"interkit_version": __version__, "pyscf_version": pyscf.__version__,
           "xarray_version": xr.__version__, "numpy_version": np.__version__}
    for attr, dist in DISPERSION_DISTRIBUTIONS.items():
        try:
            out[attr] = metadata.version(dist)
        except metadata.PackageNotFoundError:
            out[attr] = "not installed"
    return out


def assemble(plan: ScanPlan, records: dict[str, dict], missing_reason: str = "not computed",
             dispersion_terms: dict | None = None) -> xr.Dataset:
    """Build the scan Dataset from job records (pure: no I/O).

    Parameters
    ----------
    plan : ScanPlan
    records : dict
        Job key -> result record (see :func:`interkit.engine.energy.run_energy_job`).
    missing_reason : str
        Status detail for points whose jobs have no record (e.g. a cancelled run).
    dispersion_terms : dict, optional
        ``(job key, scheme) -> term`` of the post-hoc schemes listed in the spec's
        ``dispersion`` (see :func:`interkit.engine.dispersion.dispersion_terms`); the
        Dataset then gets a ``dispersion`` dimension (see :mod:`interkit.data.dispersion`).
    """
    from .composite import add_halfcp

    if not plan.spec.dispersion:
        return add_halfcp(_assemble_single(plan, records, missing_reason))
    from ..engine.dispersion import scheme_unavailable_reason
    from .dispersion import assemble_with_schemes

    return add_halfcp(assemble_with_schemes(plan, records, dispersion_terms or {},
                                            lambda p, r: _assemble_single(p, r, missing_reason),
                                            scheme_unavailable_reason))


def _assemble_single(plan: ScanPlan, records: dict[str, dict], missing_reason: str) -> xr.Dataset:
    spec = plan.spec
    levels = [lv.label for lv in spec.levels]
    points = spec.points
    nl, npnt = len(levels), len(points)
    d0 = spec.dimer
    roles = plan.roles
    total = np.full((nl, npnt, len(roles)), np.nan)
    keys = np.full((nl, npnt, len(roles)), "", dtype=object)
    converged = np.zeros((nl, npnt), dtype=bool)
    status = np.full((nl, npnt), "failed", dtype=object)
    detail = np.full((nl, npnt), "", dtype=object)
    wall = np.zeros((nl, npnt))
    from ..model.spin import is_unrestricted_job, spin_note

    with_spin = any(is_unrestricted_job(plan.jobs[k]) for entry in plan.table.values()
                    for k in entry.values())
    s2 = np.full((nl, npnt, len(roles)), np.nan)
    cycles = np.full((nl, npnt, len(roles)), np.nan)
    nocp_lost = np.zeros((nl, npnt), dtype=bool)
    for li in range(nl):
        for pi in range(npnt):
            entry = plan.table[(li, pi)]
            states, notes, own_failed, contaminated = [], [], [], False
            per_point = plan.point_roles(li, pi)
            for ri, role in enumerate(roles):
                key = entry.get(role)
                if key is None:
                    continue
                keys[li, pi, ri] = key
                rec = records.get(key)
                # with counterpoise, a failed own-basis monomer costs only e_int_nocp and bsse
                soft = spec.counterpoise and role in OWN_BASIS_ROLES
                if rec is None:
                    states.append("ok" if soft else "failed")
                    notes.append(f"{ROLE_LABELS[role]}: {missing_reason}")
                    if soft:
                        own_failed.append(role)
                    continue
                states.append("ok" if soft and rec["status"] == "failed" else rec["status"])
                if rec["status"] == "failed":
                    notes.append(f"{ROLE_LABELS[role]}: {rec.get('detail', '')}")
                    if soft:
                        own_failed.append(role)
                else:
                    total[li, pi, ri] = rec["energy_hartree"]
                    if rec.get("scf_cycles") is not None:
                        cycles[li, pi, ri] = rec["scf_cycles"]
                    if rec["status"] == "retried":
                        notes.append(f"{ROLE_LABELS[role]}: converged with {rec.get('detail', '')}")
                    if rec.get("spin_square") is not None:
                        s2[li, pi, ri] = rec["spin_square"]
                    note = spin_note(plan.jobs[key], rec)
                    if note:
                        contaminated = True
                        notes.append(f"{ROLE_LABELS[role]}: {note}")
                if role in per_point:
                    wall[li, pi] += float(rec.get("wall_time_s", 0.0))
            if "failed" in states:
                status[li, pi] = "failed"
            elif contaminated:  # numbers kept, never silently (see interkit.model.spin)
                status[li, pi] = "spin-contaminated"
            elif "retried" in states:
                status[li, pi] = "retried"
            else:
                status[li, pi] = "ok"
            converged[li, pi] = status[li, pi] != "failed"
            nocp_lost[li, pi] = bool(own_failed)
            if own_failed and converged[li, pi]:
                notes.append(NOCP_LOST)
            detail[li, pi] = "; ".join(notes)
    ri = {r: i for i, r in enumerate(roles)}
    e_dimer = total[..., ri["dimer"]]
    e_nocp = (e_dimer - total[..., ri["a_own_basis"]] - total[..., ri["b_own_basis"]]) * HARTREE_TO_KCAL_PER_MOL
    if spec.counterpoise:
        e_cp = (e_dimer - total[..., ri["a_dimer_basis"]] - total[..., ri["b_dimer_basis"]]) * HARTREE_TO_KCAL_PER_MOL
        bsse = e_cp - e_nocp
    else:
        e_cp = np.full_like(e_nocp, np.nan)
        bsse = np.full_like(e_nocp, np.nan)
    # a failed point is NaN everywhere, never a partial number
    bad = ~converged
    for arr in (e_cp, e_nocp, bsse):
        arr[bad] = np.nan
    e_nocp[nocp_lost] = np.nan  # (NaN already: the own-basis energy is NaN; said explicitly)
    bsse[nocp_lost] = np.nan

    extra_vars = {}
    if spec.forces:
        from .forces import force_variables

        extra_vars = force_variables(plan, records, converged)
    decomposition_attrs = {}
    if spec.decomposition:
        from .sapt0 import decomposition_variables

        decomposition_vars, decomposition_attrs = decomposition_variables(plan, records)
        extra_vars.update(decomposition_vars)
    if with_spin:
        from ..model.spin import SPIN_CONTAMINATION_TOLERANCE

        extra_vars["spin_square"] = (("level", "distance", "role"), s2, {
            "units": "1", "long_name": "<S^2> of each unrestricted calculation (SCF determinant; NaN: "
            "restricted or failed)", "spin_contamination_tolerance": SPIN_CONTAMINATION_TOLERANCE})
    coords = np.stack([p.dimer.coordinates for p in points])
    anchors = np.stack([np.stack(spec.coordinate.anchors(p.dimer)) for p in points])
    energy_attrs = {"units": "kcal/mol", "sign_convention": "negative = bound"}
    ds = xr.Dataset(
        data_vars={
            "e_int": (("level", "distance"), e_cp, dict(energy_attrs, long_name=ENERGY_VARIABLES["e_int"])),
            "e_int_nocp": (("level", "distance"), e_nocp,
                           dict(energy_attrs, long_name=ENERGY_VARIABLES["e_int_nocp"])),
            "bsse": (("level", "distance"), bsse, {"units": "kcal/mol", "long_name": ENERGY_VARIABLES["bsse"]}),
            "e_total_hartree": (("level", "distance", "role"), total,
                                {"units": "hartree", "long_name": "total energy of each calculation"}),
            "converged": (("level", "distance"), converged,
                          {"long_name": "all calculations of the point's e_int converged"}),
            "status": (("level", "distance"), status.astype(str),
                       {"long_name": "point status", "flag_values": "ok retried spin-contaminated failed"}),
            "status_detail": (("level", "distance"), detail.astype(str),
                              {"long_name": "why a point was retried, flagged or failed"}),
            "wall_time_s": (("level", "distance"), wall,
                            {"units": "s", "long_name": "wall time of the point's calculations"}),
            "scf_cycles": (("level", "distance", "role"), cycles,
                           {"units": "1", "long_name": "SCF iterations of each calculation (depends on "
                            "its initial guess, not a result)"}),
            "job_key": (("level", "distance", "role"), keys.astype(str),
                        {"long_name": "store key (SHA-256) of each calculation"}),
            "coordinates": (("distance", "atom", "xyz"), coords,
                            {"units": "angstrom", "long_name": "atomic positions"}),
            "anchors": (("distance", "end", "xyz"), anchors,
                        {"units": "angstrom", "long_name": "end points of the scan coordinate"}),
            "symbol": (("atom",), np.array(d0.symbols, dtype=str), {"long_name": "element"}),
            "fragment": (("atom",), np.array(d0.fragment_labels, dtype=str), {"long_name": "fragment (A or B)"}),
            **extra_vars,
        },
        coords={
            "level": ("level", np.array(levels, dtype=str), {"long_name": "level of theory"}),
            "distance": ("distance", np.array([p.distance for p in points]),
                         {"units": "angstrom", "long_name": spec.coordinate.describe()}),
            "factor": ("distance", np.array([p.factor for p in points]),
                       {"units": "1", "long_name": "value relative to the starting geometry"}),
            "atom": ("atom", np.arange(d0.natoms)),
            "xyz": ("xyz", np.array(["x", "y", "z"])),
            "role": ("role", np.array(roles, dtype=str), {"long_name": "calculation in the counterpoise scheme"}),
            "end": ("end", np.array(["A", "B"])),
        },
        attrs={
            "title": f"interaction-energy scan: {spec.name}",
            "schema": SCHEMA_VERSION,
            "spec_json": spec.to_json(),
            **_spec_toml_attr(spec),
            "counterpoise": "Boys-Bernardi" if spec.counterpoise else "none",
            "scan_coordinate": spec.coordinate.describe(),
            "charges": json.dumps(list(d0.charges)),
            "multiplicities": json.dumps(list(d0.multiplicities)),
            "dimer_multiplicity": int(d0.spin + 1),
            "dimer_spin": ("broken symmetry (lowest spin; fragment densities, spin of "
                           f"{'AB'[_flipped(d0)]} flipped)" if d0.broken_symmetry else
                           "high spin (S = S_A + S_B)" if sum(d0.spins) else "closed shell"),
            "codata": CODATA_EDITION,
            "created_utc": datetime.now(timezone.utc).isoformat(timespec="seconds"),
            "caution": CAUTION,
            **decomposition_attrs,
            "level_settings_json": json.dumps(level_settings(spec), sort_keys=True),
            **_versions(),
        },
    )
    if getattr(spec, "composites", ()):
        from .composite import add_composite_rows

        ds = add_composite_rows(ds, plan, records)
    return ds


def _flipped(dimer) -> int:
    from ..model.spin import flipped_fragment

    return flipped_fragment(dimer.spins)


def level_settings(spec) -> dict[str, dict]:
    """Numerical settings used by each level (by label): SCF and correlation fitting,
    frozen core, DFT grid, fitting bases (the names pyscf's defaults resolved to),
    effective core potentials, and the size estimate of its dimer calculation."""
    from ..engine.cost import scan_cost

    try:
        costs = scan_cost(spec)
    except Exception as exc:  # the record must not cost the computed scan
        costs = {lv.label: {"error": f"{type(exc).__name__}: {exc}"} for lv in spec.levels}
    out = {}
    for lv in spec.levels:
        cost = costs.get(lv.label, {})
        entry = dict(lv.settings())
        entry["jk_auxbasis_used"] = cost.get("jk_auxbasis", "")
        entry["ri_auxbasis_used"] = cost.get("ri_auxbasis", "")
        entry["ecp"] = cost.get("ecp", {})
        entry["estimated_peak_memory_mb"] = cost.get("peak_memory_mb")
        entry["nbasis"] = cost.get("nbasis")
        out[lv.label] = entry
    return out


def validate(ds: xr.Dataset) -> None:
    """Check that ``ds`` follows the scan schema; raise InputError naming the problem."""
    if not isinstance(ds, xr.Dataset):
        raise InputError(f"dataset: expected an xarray.Dataset, got {type(ds).__name__}")
    if ds.attrs.get("schema") != SCHEMA_VERSION:
        raise InputError(f"dataset attrs.schema: {ds.attrs.get('schema')!r} is not {SCHEMA_VERSION!r}")
    for name in REQUIRED_VARIABLES:
        if name not in ds.variables:
            raise InputError(f"dataset: variable {name!r} is missing")
    for name in ("e_int", "e_int_nocp", "bsse", "distance", "coordinates"):
        if not np.issubdtype(ds[name].dtype, np.number) or np.issubdtype(ds[name].dtype, np.complexfloating):
            raise InputError(f"dataset variable {name}: values of type {str(ds[name].dtype)!r} are not real numbers")
    for name in ("e_int", "e_int_nocp", "bsse"):
        if ds[name].attrs.get("units") != "kcal/mol":
            raise InputError(f"dataset variable {name}: units {ds[name].attrs.get('units')!r} is not 'kcal/mol'")
        allowed = (("level", "dispersion", "distance"),) if "dispersion" in ds.dims else (("level", "distance"),)
        if name == "bsse":
            allowed = (("level", "distance"),)
        if ds[name].dims not in allowed:
            raise InputError(f"dataset variable {name}: dimensions {ds[name].dims} are not {allowed[0]}")
    if ds["distance"].attrs.get("units") != "angstrom":
        raise InputError("dataset coordinate distance: units must be 'angstrom'")
    if ds["coordinates"].dims != ("distance", "atom", "xyz"):
        raise InputError(f"dataset variable coordinates: dimensions {ds['coordinates'].dims} are wrong")
    dist = ds["distance"].values
    if dist.size > 1 and not np.all(np.diff(dist) > 0):
        raise InputError("dataset coordinate distance: values are not strictly increasing")
    bad = set(np.unique(ds["status"].values)) - {"ok", "retried", "spin-contaminated", "failed"}
    if bad:
        raise InputError(f"dataset variable status: unexpected values {sorted(bad)}")
    if "dispersion" in ds.dims and "dispersion_status" not in ds.variables:
        raise InputError("dataset: variable 'dispersion_status' is missing")
    failed = ds["status"] == "failed"
    if bool((failed & ds["e_int_nocp"].notnull()).any()):
        raise InputError("dataset: a failed point carries a number in e_int_nocp")
    from .sapt0 import check_decomposition

    check_decomposition(ds)
    try:
        json.loads(ds.attrs["spec_json"])
    except (KeyError, ValueError):
        raise InputError("dataset attrs.spec_json: missing or not JSON") from None


def save_scan(ds: xr.Dataset, path: str | os.PathLike) -> None:
    """Write a scan Dataset to netCDF-4 (atomically: temporary file, then rename)."""
    validate(ds)
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise InputError(f"output: folder {folder!r} does not exist")
    from ..fileio import exclusive_temp

    fd, tmp = exclusive_temp(folder, ".tmp-", ".nc")   # mode follows the umask
    os.close(fd)
    try:
        ds.to_netcdf(tmp, engine="h5netcdf", invalid_netcdf=False)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def open_scan(path: str | os.PathLike) -> xr.Dataset:
    """Read a scan Dataset written by :func:`save_scan` (fully loaded, file closed).

    A file of an earlier schema version is converted to the current one with an
    :class:`~interkit.errors.InterkitWarning` that says so (attribute
    ``converted_from_schema``); see :mod:`interkit.data.upgrade`.
    """
    path = os.fspath(path)
    if not os.path.isfile(path):
        raise InputError(f"scan file: {path!r} does not exist")
    try:
        with xr.open_dataset(path, engine="h5netcdf") as handle:
            ds = handle.load()
    except (OSError, ValueError) as exc:
        raise InputError(f"scan file {path!r}: not a readable netCDF scan ({exc})") from None
    from .upgrade import upgrade

    ds, note = upgrade(ds, SCHEMA_VERSION)
    if note:
        import warnings

        from ..errors import InterkitWarning

        warnings.warn(f"scan file {path!r}: {note}", InterkitWarning, stacklevel=2)
    validate(ds)
    return ds


def _spec_toml_attr(spec) -> dict:
    """``{"spec_toml": <the spec as a TOML file>}`` (the layout of ``interkit scan``'s spec
    files; ``interkit spec`` extracts it), or nothing for a spec TOML cannot hold (e.g.
    frames measured along a vector): ``spec_json`` has the spec all the same."""
    try:
        return {"spec_toml": spec.to_toml()}
    except InputError:
        return {}


def spec_of(ds: xr.Dataset):
    """The ScanSpec stored in a Dataset."""
    from ..model.spec import ScanSpec

    return ScanSpec.from_json(ds.attrs["spec_json"])
