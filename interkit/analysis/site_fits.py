"""Site-site pair potentials fitted to interaction energies of many geometries.

The model energy of a dimer is a sum over every atom pair (i in A, j in B) of a pair
potential that depends on the atom types of i and j (one parameter set per unordered
type pair), plus, optionally, fixed point charges:

* ``'lj'``: ``4 eps [(sigma/r)^12 - (sigma/r)^6]``;
* ``'buckingham-tt'``: ``A exp(-b r) - f6(b r) C6 / r^6 [- f8(b r) C8 / r^8]`` with the
  Tang–Toennies damping functions ``f_n(x) = 1 - exp(-x) sum_{k<=n} x^k / k!``
  (K. T. Tang and J. P. Toennies, J. Chem. Phys. 80, 3726 (1984)); the C8 term only
  with ``c8=True``;
* charges ``q_i q_j / r`` (``COULOMB_KCAL_ANGSTROM`` kcal/mol·Å per e²) are fixed, not fitted.

Units: kcal/mol, angstrom, e. Atom types are the element symbols unless given.

Weights favour the bound region: a point of interaction energy ``E`` in a scan whose
lowest energy is ``E_min`` has weight ``1`` when ``E <= 0`` and ``(1 + E / s)^-2`` when
``E > 0``, with ``s = max(-E_min, 0.1)`` kcal/mol: a point one well depth up the
repulsive wall counts 1/4, five well depths up 1/36.

Fitting: LJ energies are linear in ``C12 = 4 eps sigma^12`` and ``C6 = 4 eps sigma^6``,
so a weighted linear least-squares gives the start; Buckingham-TT energies are linear
in A and the C_n for fixed b, so the b values are found first with the linear
parameters solved inside (variable projection). Then
:func:`scipy.optimize.least_squares` refines all parameters together; the standard
uncertainties are the square roots of the diagonal of ``s^2 (J^T J)^-1`` (J the
Jacobian of the weighted residuals at the solution, ``s^2`` the weighted residual sum
of squares over ``n - p``). LJ parameters and Buckingham A and b are kept positive. Parameters the data cannot
separate (``J^T J`` numerically singular) are refused, not reported.
"""

from __future__ import annotations

import csv
import json
import math
import os
from dataclasses import dataclass, field

import numpy as np
import xarray as xr
from scipy.optimize import least_squares

from ..errors import ConvergenceError, InputError
from ..units import BOHR_TO_ANGSTROM, HARTREE_TO_KCAL_PER_MOL
from .potentials import HARTREE_BOHR6_TO_KCAL_PER_MOL_ANGSTROM6

#: e^2 / (4 pi eps0) in kcal/mol·Å
COULOMB_KCAL_ANGSTROM = HARTREE_TO_KCAL_PER_MOL * BOHR_TO_ANGSTROM
SITE_MODELS = ("lj", "buckingham-tt")
WEIGHT_FORMULA = "w = 1 if E <= 0 else (1 + E/s)^-2, s = max(-E_min of the scan, 0.1 kcal/mol)"
_UNITS = {"epsilon": "kcal/mol", "sigma": "angstrom", "A": "kcal/mol", "b": "1/angstrom",
          "C6": "kcal/mol*angstrom^6", "C8": "kcal/mol*angstrom^8"}


def _tt(n: int, x: np.ndarray) -> np.ndarray:
    term = np.ones_like(x)
    total = np.ones_like(x)
    for k in range(1, n + 1):
        term = term * x / k
        total = total + term
    return 1.0 - np.exp(-x) * total


@dataclass
class _Data:
    """Pair distances of every point, grouped by pair type."""

    pairs: list[tuple[str, str]]
    r: list[list[np.ndarray]]          # r[p][point]: distances of pair type p in that point (Å)
    coulomb: np.ndarray                # fixed charge energy of every point (kcal/mol)
    energy: np.ndarray
    weight: np.ndarray
    scan: np.ndarray                   # scan index of every point


@dataclass
class SiteSiteFit:
    """Fitted site-site parameters.

    Attributes
    ----------
    model : str
    pairs : list of (str, str)
        The type pairs, in the order of the parameters.
    names : list of str
        Parameter names, e.g. ``'epsilon'``, one entry per parameter (with ``pairs``
        repeated per parameter in ``parameter_pairs``).
    values, uncertainties : numpy.ndarray
        Values and standard uncertainties (units in ``units``).
    rmse_kcal_per_mol : dict
        Root-mean-square deviation (unweighted) of the fit from the computed energies,
        per scan label, and ``'all'`` (the repulsive wall, weighted down, dominates it).
    rmse_bound_kcal_per_mol : dict
        The same over the points with ``E <= 0`` only.
    charges_e : dict
        Fixed charge of every atom type (e), empty without charges.
    """

    model: str
    c8: bool
    pairs: list[tuple[str, str]]
    parameter_pairs: list[tuple[str, str]]
    names: list[str]
    values: np.ndarray
    uncertainties: np.ndarray
    rmse_kcal_per_mol: dict
    charges_e: dict
    n_points: int
    rmse_bound_kcal_per_mol: dict
    weights: str = WEIGHT_FORMULA
    scan_labels: list[str] = field(default_factory=list)

    @property
    def units(self) -> list[str]:
        return [_UNITS[n] for n in self.names]

    def parameter(self, name: str, pair: tuple[str, str]) -> tuple[float, float]:
        """(value, uncertainty) of ``name`` for the type pair ``pair`` (either order)."""
        key = tuple(sorted(pair))
        for n, p, v, u in zip(self.names, self.parameter_pairs, self.values, self.uncertainties):
            if n == name and p == key:
                return float(v), float(u)
        raise InputError(f"parameter: no {name!r} for the pair {pair!r}")

    def c6_hartree_bohr6(self, pair: tuple[str, str]) -> float:
        """C6 of ``pair`` in atomic units (hartree·bohr^6)."""
        if self.model == "lj":
            eps, _ = self.parameter("epsilon", pair)
            sig, _ = self.parameter("sigma", pair)
            c6 = 4 * eps * sig**6
        else:
            c6, _ = self.parameter("C6", pair)
        return c6 / HARTREE_BOHR6_TO_KCAL_PER_MOL_ANGSTROM6

    def table(self) -> list[dict]:
        """One row per parameter: type_a, type_b, parameter, value, uncertainty, unit."""
        return [{"type_a": p[0], "type_b": p[1], "parameter": n, "value": float(v), "uncertainty": float(u),
                 "unit": _UNITS[n]}
                for n, p, v, u in zip(self.names, self.parameter_pairs, self.values, self.uncertainties)]

    def energy(self, dimer, types=None, charges=None) -> float:
        """Model interaction energy (kcal/mol) of one dimer (types/charges as in the fit)."""
        data = _collect([(dimer, 0.0)], [0], _types_of([dimer], types), _charges_of([dimer], charges),
                        self.pairs, allow_new=False)
        return float(_model(self.model, self.c8, data, self.values)[0] + data.coulomb[0])

    def to_dict(self) -> dict:
        return {"model": self.model, "c8": self.c8, "weights": self.weights, "n_points": self.n_points,
                "charges_e": self.charges_e, "rmse_kcal_per_mol": self.rmse_kcal_per_mol,
                "rmse_bound_kcal_per_mol": self.rmse_bound_kcal_per_mol,
                "energy_unit": "kcal/mol", "length_unit": "angstrom", "parameters": self.table()}

    def to_json(self, path: str | os.PathLike) -> None:
        """Write the parameters, uncertainties and RMSDs as JSON."""
        with open(path, "w", encoding="utf-8") as fh:
            json.dump(self.to_dict(), fh, indent=2)

    def to_csv(self, path: str | os.PathLike) -> None:
        """Write the parameter table as CSV (one row per parameter)."""
        rows = self.table()
        with open(path, "w", newline="", encoding="utf-8") as fh:
            writer = csv.DictWriter(fh, fieldnames=["model", *rows[0].keys()])
            writer.writeheader()
            for row in rows:
                writer.writerow({"model": self.model, **row})


# --------------------------------------------------------------------------- data


def _types_of(dimers, types) -> list[list[str]]:
    if types is None:
        return [list(d.symbols) for d in dimers]
    if isinstance(types, dict):  # element -> type
        return [[str(types.get(s, s)) for s in d.symbols] for d in dimers]
    out = []
    for d in dimers:
        if len(types) != d.natoms:
            raise InputError(f"types: {len(types)} labels for a dimer of {d.natoms} atoms")
        out.append([str(t) for t in types])
    return out


def _charges_of(dimers, charges) -> list[np.ndarray] | None:
    if charges is None:
        return None
    out = []
    for d in dimers:
        if isinstance(charges, dict):  # element -> charge
            q = [charges.get(s) for s in d.symbols]
            missing = [s for s, v in zip(d.symbols, q) if v is None]
            if missing:
                raise InputError(f"charges: no charge for element {missing[0]!r}")
        else:
            q = list(charges)
            if len(q) != d.natoms:
                raise InputError(f"charges: {len(q)} charges for a dimer of {d.natoms} atoms")
        arr = np.asarray(q, dtype=float)
        for frag, label in ((d.fragment_a, "A"), (d.fragment_b, "B")):
            total = float(arr[list(frag)].sum())
            if abs(total - d.charges[0 if label == "A" else 1]) > 1e-6:
                raise InputError(f"charges: fragment {label} charges sum to {total:.6f} e, "
                                 f"but fragment {label} has charge {d.charges[0 if label == 'A' else 1]}")
        out.append(arr)
    return out


def bound_weights(energy: np.ndarray) -> np.ndarray:
    """Weights of the points of one scan (see the module text)."""
    e = np.asarray(energy, dtype=float)
    s = max(-float(np.min(e)), 0.1)
    return np.where(e <= 0, 1.0, 1.0 / (1.0 + np.maximum(e, 0) / s) ** 2)


def _collect(points, scan_index, types, charges, pairs=None, allow_new=True) -> _Data:
    pairs = list(pairs or [])
    r: dict[tuple[str, str], list[np.ndarray]] = {p: [] for p in pairs}
    coul = np.zeros(len(points))
    for k, (d, _e) in enumerate(points):
        a, b = list(d.fragment_a), list(d.fragment_b)
        dist = np.linalg.norm(d.coordinates[a][:, None] - d.coordinates[b][None], axis=2)
        t = types[k]
        here: dict[tuple[str, str], list[float]] = {}
        for ia, i in enumerate(a):
            for jb, j in enumerate(b):
                key = tuple(sorted((t[i], t[j])))
                if key not in r:
                    if not allow_new:
                        raise InputError(f"types: the pair {key} was not in the fit")
                    r[key] = [np.zeros(0)] * k
                    pairs.append(key)
                here.setdefault(key, []).append(dist[ia, jb])
        for key in pairs:
            r[key].append(np.asarray(here.get(key, []), dtype=float))
        if charges is not None:
            q = charges[k]
            coul[k] = COULOMB_KCAL_ANGSTROM * float((q[a][:, None] * q[b][None] / dist).sum())
    e = np.array([p[1] for p in points], dtype=float)
    return _Data(pairs, [r[p] for p in pairs], coul, e, np.ones(len(points)), np.asarray(scan_index))


def _sums(data: _Data, fn) -> np.ndarray:
    """(points, pairs) array of sum over the pair's distances of ``fn(r, pair index)``."""
    out = np.zeros((len(data.energy), len(data.pairs)))
    for p, per_point in enumerate(data.r):
        for k, rr in enumerate(per_point):
            if rr.size:
                out[k, p] = fn(rr, p).sum()
    return out


def _n_params(model: str, c8: bool) -> int:
    return 2 if model == "lj" else (4 if c8 else 3)


def _model(model: str, c8: bool, data: _Data, x: np.ndarray) -> np.ndarray:
    n = len(data.pairs)
    if model == "lj":
        eps, sig = x[:n], x[n:2 * n]
        return _sums(data, lambda r, p: 4 * eps[p] * ((sig[p] / r) ** 12 - (sig[p] / r) ** 6)).sum(axis=1)
    a, b, c6 = x[:n], x[n:2 * n], x[2 * n:3 * n]
    c8v = x[3 * n:4 * n] if c8 else np.zeros(n)
    return _sums(data, lambda r, p: a[p] * np.exp(-b[p] * r) - _tt(6, b[p] * r) * c6[p] / r**6
                 - _tt(8, b[p] * r) * c8v[p] / r**8).sum(axis=1)


def _linear(cols: np.ndarray, target: np.ndarray, sw: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    coef, *_ = np.linalg.lstsq(cols * sw[:, None], target * sw, rcond=None)
    return coef, (cols @ coef - target) * sw


def _start_lj(data: _Data, sw: np.ndarray) -> np.ndarray:
    cols = np.hstack([_sums(data, lambda r, p: r**-12.0), -_sums(data, lambda r, p: r**-6.0)])
    coef, _ = _linear(cols, data.energy - data.coulomb, sw)
    n = len(data.pairs)
    c12, c6 = coef[:n], coef[n:]
    good = (c12 > 0) & (c6 > 0)
    eps = np.where(good, c6**2 / (4 * np.where(good, c12, 1.0)), 0.05)
    sig = np.where(good, (np.where(good, c12, 1.0) / np.where(good, c6, 1.0)) ** (1 / 6), 3.0)
    return np.concatenate([eps, sig])  # pairs the linear fit cannot place start at 0.05 kcal/mol, 3 Å


def _linear_tt(data: _Data, b: np.ndarray, c8: bool, sw: np.ndarray):
    cols = [_sums(data, lambda r, p: np.exp(-b[p] * r)), -_sums(data, lambda r, p: _tt(6, b[p] * r) / r**6)]
    if c8:
        cols.append(-_sums(data, lambda r, p: _tt(8, b[p] * r) / r**8))
    return _linear(np.hstack(cols), data.energy - data.coulomb, sw)


def _start_tt(data: _Data, c8: bool, sw: np.ndarray) -> np.ndarray:
    n = len(data.pairs)
    best = None
    for b0 in np.linspace(2.0, 5.0, 13):  # a common b first, then each pair's own
        res = _linear_tt(data, np.full(n, b0), c8, sw)[1]
        if best is None or res @ res < best[0]:
            best = (float(res @ res), b0)
    fit = least_squares(lambda b: _linear_tt(data, b, c8, sw)[1], np.full(n, best[1]), bounds=(0.3, 15.0),
                        xtol=1e-15, ftol=1e-15, gtol=1e-15, max_nfev=2000)
    coef, _ = _linear_tt(data, fit.x, c8, sw)
    parts = [coef[:n], fit.x, coef[n:2 * n]] + ([coef[2 * n:3 * n]] if c8 else [])
    return np.concatenate(parts)


def _names(model: str, c8: bool) -> list[str]:
    return ["epsilon", "sigma"] if model == "lj" else ["A", "b", "C6"] + (["C8"] if c8 else [])


# --------------------------------------------------------------------------- fitting


def fit_site_site_points(dimers, energies, model: str = "lj", *, types=None, charges=None, c8: bool = False,
                         scan_index=None, scan_labels=None, weights=None) -> SiteSiteFit:
    """Fit site-site parameters to interaction energies (kcal/mol) of given dimers.

    Parameters
    ----------
    dimers : sequence of Dimer
    energies : sequence of float
        Interaction energies in kcal/mol (NaN points are skipped).
    model : {'lj', 'buckingham-tt'}
    types : None, dict or sequence
        None: element symbols; a dict element -> type; or one label per atom (same
        atom order in every dimer).
    charges : None, dict or sequence
        Fixed point charges (e): a dict element -> charge, or one per atom; each
        fragment's charges must sum to its charge.
    c8 : bool
        Buckingham-TT with a damped C8 term besides C6.
    scan_index, scan_labels : optional
        Which scan each point belongs to (weights and RMSDs are per scan).
    weights : array-like, optional
        Explicit weights instead of the bound-region weights.
    """
    if model not in SITE_MODELS:
        raise InputError(f"model: {model!r} is not one of {', '.join(SITE_MODELS)}")
    dimers = list(dimers)
    energies = np.asarray(energies, dtype=float)
    if len(dimers) != len(energies):
        raise InputError(f"energies: {len(energies)} energies for {len(dimers)} geometries")
    idx = np.zeros(len(dimers), dtype=int) if scan_index is None else np.asarray(scan_index, dtype=int)
    ok = np.isfinite(energies)
    dimers = [d for d, k in zip(dimers, ok) if k]
    energies, idx = energies[ok], idx[ok]
    labels = list(scan_labels) if scan_labels is not None else [f"scan {k}" for k in range(int(idx.max()) + 1)]
    data = _collect(list(zip(dimers, energies)), idx, _types_of(dimers, types), _charges_of(dimers, charges))
    if weights is None:
        w = np.ones(len(energies))
        for k in np.unique(idx):
            w[idx == k] = bound_weights(energies[idx == k])
    else:
        w = np.asarray(weights, dtype=float)[ok]
    sw = np.sqrt(w)
    n_par = _n_params(model, c8) * len(data.pairs)
    if len(energies) <= n_par:
        raise InputError(f"energies: {len(energies)} finite points for {n_par} parameters; give more points")
    x0 = _start_lj(data, sw) if model == "lj" else _start_tt(data, c8, sw)

    def resid(x):
        return (_model(model, c8, data, x) + data.coulomb - data.energy) * sw

    lower = np.zeros(n_par) if model == "lj" else np.concatenate(
        [np.zeros(2 * len(data.pairs)), np.full(n_par - 2 * len(data.pairs), -np.inf)])
    fit = least_squares(resid, np.maximum(x0, 1e-6), bounds=(lower, np.inf), x_scale="jac",
                        xtol=1e-15, ftol=1e-15, gtol=1e-15, max_nfev=5000)
    jac = fit.jac
    sv = np.linalg.svd(jac, compute_uv=False)
    if sv[-1] <= 1e-10 * sv[0]:
        raise ConvergenceError(f"site-site fit: the data do not determine the {n_par} parameters of the pairs "
                               f"{data.pairs} (singular Jacobian); use fewer atom types or more geometries")
    dof = len(energies) - n_par
    s2 = float(fit.fun @ fit.fun) / dof
    cov = np.linalg.inv(jac.T @ jac) * s2
    err = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    model_e = _model(model, c8, data, fit.x) + data.coulomb
    rmse = {labels[k]: float(np.sqrt(np.mean((model_e - energies)[idx == k] ** 2))) for k in np.unique(idx)}
    rmse["all"] = float(np.sqrt(np.mean((model_e - energies) ** 2)))
    bound = energies <= 0
    rmse_bound = {labels[k]: float(np.sqrt(np.mean((model_e - energies)[(idx == k) & bound] ** 2)))
                  if ((idx == k) & bound).any() else float("nan") for k in np.unique(idx)}
    rmse_bound["all"] = float(np.sqrt(np.mean((model_e - energies)[bound] ** 2))) if bound.any() else float("nan")
    names = _names(model, c8)
    n = len(data.pairs)
    charges_e = {}
    if charges is not None:
        tq = _types_of(dimers, types)
        cq = _charges_of(dimers, charges)
        for t, q in zip(tq[0], cq[0]):
            charges_e[t] = float(q)
    if not all(math.isfinite(v) for v in fit.x):
        raise ConvergenceError("site-site fit: the least-squares fit did not give finite parameters")
    return SiteSiteFit(model, bool(c8), list(data.pairs), [p for _ in names for p in data.pairs],
                       [nm for nm in names for _ in range(n)], fit.x.copy(), err, rmse, charges_e,
                       len(energies), rmse_bound, scan_labels=labels)


def scan_points(ds: xr.Dataset, level: str | None = None, variable: str = "e_int"):
    """(dimers, energies in kcal/mol) of every point of one level of a scan Dataset or
    an orientation grid (every cell; see :func:`interkit.data.grid.flat_view`)."""
    from ..data.grid import GRID_SCHEMA, flat_view
    from ..data.schema import spec_of

    if ds.attrs.get("schema") == GRID_SCHEMA:
        ds = flat_view(ds)
    spec = spec_of(ds)
    labels = [str(x) for x in ds["level"].values]
    if level is None:
        if len(labels) != 1:
            raise InputError(f"level: the scan has levels {labels}; name the one to fit")
        level = labels[0]
    if level not in labels:
        raise InputError(f"level: {level!r} is not one of {labels}")
    if variable not in ds or "dispersion" in ds[variable].dims:
        raise InputError(f"variable: {variable!r} is not a per-level energy of this scan")
    e = ds[variable].sel(level=level).values.astype(float)
    dimers = [spec.dimer.with_coordinates(c) for c in ds["coordinates"].values]
    return dimers, e


def fit_site_site(scans, model: str = "lj", *, level: str | None = None, types=None, charges=None,
                  c8: bool = False, variable: str = "e_int") -> SiteSiteFit:
    """Fit site-site parameters to every point of one or many scans (see the module text).

    Parameters
    ----------
    scans : Dataset, sequence of Dataset, or dict label -> Dataset
        Scans of :func:`interkit.run_scan` / :func:`interkit.open_scan`.
    model, types, charges, c8
        As in :func:`fit_site_site_points`.
    level : str, optional
        The level to fit (needed when a scan has more than one).
    variable : str
        Energy variable (default the counterpoise-corrected ``e_int``).
    """
    if isinstance(scans, xr.Dataset):
        scans = {scans.attrs.get("title", "scan"): scans}
    elif not isinstance(scans, dict):
        scans = {f"scan {k}": s for k, s in enumerate(scans)}
    if not scans:
        raise InputError("scans: no scan given")
    dimers, energies, idx = [], [], []
    for k, ds in enumerate(scans.values()):
        d, e = scan_points(ds, level, variable)
        dimers += d
        energies += list(e)
        idx += [k] * len(d)
    return fit_site_site_points(dimers, energies, model, types=types, charges=charges, c8=c8,
                                scan_index=idx, scan_labels=list(scans))
