"""Model fits of an interaction-energy curve E(R) and long-range C6 estimates.

Energies are in kcal/mol and distances in angstrom throughout. The model potentials
(Morse, Lennard-Jones 12-6, Buckingham with Tang–Toennies damped C6) and their result
classes are in :mod:`interkit.analysis.potentials`.

Parameters come from :func:`scipy.optimize.curve_fit` (``absolute_sigma=False``); the
standard uncertainties are the square roots of the diagonal of its covariance.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import asdict, dataclass

import numpy as np
import xarray as xr
from scipy.optimize import OptimizeWarning, curve_fit

from ..errors import ConvergenceError, InputError
from .potentials import (
    HARTREE_BOHR6_TO_KCAL_PER_MOL_ANGSTROM6,
    BuckinghamTTFit,
    LennardJonesFit,
    MorseFit,
    tang_toennies_f6,
)

#: result class of each fit model (its parameters and model potential)
_FITS = {"morse": MorseFit, "lj": LennardJonesFit, "buckingham-tt": BuckinghamTTFit}
MODELS = tuple(_FITS)

_N_PARAMS = {model: len(cls.parameter_fields()) for model, cls in _FITS.items()}


# --------------------------------------------------------------------------- helpers


def _finite_curve(distance, energy, n_min: int, what: str) -> tuple[np.ndarray, np.ndarray]:
    """Validated finite points of a curve, sorted by distance."""
    r = np.asarray(distance, dtype=float)
    e = np.asarray(energy, dtype=float)
    if r.ndim != 1:
        raise InputError(f"distance: expected a 1-D array, got shape {r.shape}")
    if e.shape != r.shape:
        raise InputError(f"energy: length {e.size} does not match distance length {r.size}")
    bad = np.isfinite(r) & (r <= 0)
    if bad.any():
        raise InputError(f"distance: value {r[bad][0]!r} angstrom is not positive")
    ok = np.isfinite(r) & np.isfinite(e)
    n = int(ok.sum())
    if n < n_min:
        raise InputError(f"energy: {n} finite point(s); {what} needs at least {n_min}")
    order = np.argsort(r[ok])
    r, e = r[ok][order], e[ok][order]
    if np.any(np.diff(r) == 0):
        raise InputError(f"distance: repeated value {r[:-1][np.diff(r) == 0][0]!r} angstrom")
    return r, e


def _linear_amplitudes(columns: list[np.ndarray], e: np.ndarray) -> tuple[np.ndarray, float]:
    """Least-squares amplitudes for ``e = sum c_i columns_i`` and the residual sum of squares."""
    x = np.column_stack(columns)
    scale = np.linalg.norm(x, axis=0)
    scale[scale == 0] = 1.0
    coef, *_ = np.linalg.lstsq(x / scale, e, rcond=None)
    coef = coef / scale
    rss = float(np.sum((e - x @ coef) ** 2))
    return coef, rss


def _start_morse(r, e):
    k = int(np.argmin(e))
    re0 = float(r[k])
    best = None
    for a in np.geomspace(0.3, 6.0, 40):
        x = np.exp(-a * (r - re0))
        coef, rss = _linear_amplitudes([x * x - 2.0 * x], e)
        if coef[0] > 0 and (best is None or rss < best[0]):
            best = (rss, float(coef[0]), float(a))
    if best is None:
        return [max(-float(e[k]), 1e-6), 1.5, re0]
    return [best[1], best[2], re0]


def _start_lj(r, e):
    k = int(np.argmin(e))
    sigma0 = float(r[k]) / 2.0 ** (1.0 / 6.0)
    best = None
    for s in sigma0 * np.linspace(0.8, 1.2, 41):
        s6 = (s / r) ** 6
        coef, rss = _linear_amplitudes([4.0 * (s6 * s6 - s6)], e)
        if coef[0] > 0 and (best is None or rss < best[0]):
            best = (rss, float(coef[0]), float(s))
    if best is None:
        return [max(-float(e[k]), 1e-6), sigma0]
    return [best[1], best[2]]


def _start_buckingham(r, e):
    best = None
    for b in np.geomspace(0.5, 10.0, 80):
        rep = np.exp(-b * r)
        disp = -tang_toennies_f6(b * r) / r**6
        coef, rss = _linear_amplitudes([rep, disp], e)
        if coef[0] > 0 and coef[1] >= 0 and (best is None or rss < best[0]):
            best = (rss, float(coef[0]), float(b), float(coef[1]))
    if best is None:
        k = int(np.argmin(e))
        rk = float(r[k])
        c6 = max(-float(e[k]), 1e-6) * rk**6 * 2.0
        b = 3.0
        return [c6 / rk**6 * np.exp(b * rk), b, c6]
    return [best[1], best[2], best[3]]


_STARTS = {"morse": _start_morse, "lj": _start_lj, "buckingham-tt": _start_buckingham}
_BOUNDS = {
    "morse": ([0.0, 0.0, 0.0], [np.inf, np.inf, np.inf]),
    "lj": ([0.0, 0.0], [np.inf, np.inf]),
    "buckingham-tt": ([0.0, 0.0, 0.0], [np.inf, np.inf, np.inf]),
}


def _fit(model: str, r: np.ndarray, e: np.ndarray):
    func = _FITS[model].energy_function
    p0 = _STARTS[model](r, e)
    lo, hi = _BOUNDS[model]
    p0 = np.clip(p0, np.asarray(lo) + 1e-12, hi)
    try:
        with warnings.catch_warnings(), np.errstate(over="ignore", invalid="ignore"):
            warnings.simplefilter("ignore", OptimizeWarning)
            popt, pcov = curve_fit(func, r, e, p0=p0, bounds=(lo, hi), absolute_sigma=False,
                                   x_scale="jac", max_nfev=20000)
    except (RuntimeError, ValueError) as exc:
        msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise ConvergenceError(f"{model} fit did not converge: {msg}") from None
    if not np.all(np.isfinite(popt)):
        raise ConvergenceError(f"{model} fit did not converge: non-finite parameters {popt.tolist()}")
    resid = e - func(r, *popt)
    if not np.all(np.isfinite(resid)):
        raise ConvergenceError(f"{model} fit did not converge: non-finite residuals")
    err = np.sqrt(np.clip(np.diag(pcov), 0.0, np.inf)) if pcov is not None else np.full(len(popt), np.nan)
    rmse = float(np.sqrt(np.mean(resid**2)))
    return popt, err, resid, rmse


# --------------------------------------------------------------------------- public


def fit_morse(distance, energy) -> MorseFit:
    """Fit a Morse potential to E(R).

    Parameters
    ----------
    distance : array-like
        Distances in angstrom (any order; must be positive).
    energy : array-like
        Interaction energies in kcal/mol; NaN points are skipped.

    Raises
    ------
    InputError
        Fewer than 4 finite points, non-positive distances or mismatched lengths.
    ConvergenceError
        The least-squares fit did not converge.
    """
    return fit_curve(distance, energy, "morse")


def fit_lennard_jones(distance, energy) -> LennardJonesFit:
    """Fit a Lennard-Jones 12-6 potential to E(R) (see :func:`fit_morse`; needs 3 points)."""
    return fit_curve(distance, energy, "lj")


def fit_buckingham_tt(distance, energy) -> BuckinghamTTFit:
    """Fit a Buckingham potential with Tang–Toennies damped C6 (see :func:`fit_morse`)."""
    return fit_curve(distance, energy, "buckingham-tt")


def fit_curve(distance, energy, model: str):
    """Fit one model potential to an interaction-energy curve.

    Parameters
    ----------
    distance : array-like
        Distances in angstrom (positive).
    energy : array-like
        Interaction energies in kcal/mol; NaN points are skipped.
    model : str
        ``"morse"``, ``"lj"`` (Lennard-Jones 12-6) or ``"buckingham-tt"``.

    Returns
    -------
    MorseFit or LennardJonesFit or BuckinghamTTFit
        Parameters, standard uncertainties, residuals (kcal/mol) and RMSE (kcal/mol).

    Raises
    ------
    InputError
        Unknown model, bad arrays, or fewer finite points than parameters + 1.
    ConvergenceError
        The fit did not converge.
    """
    if model not in _N_PARAMS:
        raise InputError(f"model: unknown fit model {model!r}; choose one of {', '.join(MODELS)}")
    r, e = _finite_curve(distance, energy, _N_PARAMS[model] + 1, f"a {model} fit")
    p, err, resid, rmse = _fit(model, r, e)
    common = dict(model=model, rmse_kcal_per_mol=rmse, residuals_kcal_per_mol=resid,
                  distance_angstrom=r, n_points=len(r))
    return _FITS[model].from_parameters(common, p, err)


def _curves(ds: xr.Dataset, variable: str):
    """Yield ``(labels, energies)`` for every level (and dispersion scheme, if present)."""
    if variable not in ds:
        raise InputError(f"variable: {variable!r} is not in the dataset")
    da = ds[variable]
    units = da.attrs.get("units")
    if units != "kcal/mol":
        raise InputError(f"dataset variable {variable}: units {units!r} is not 'kcal/mol'")
    for dim in ("level", "distance"):
        if dim not in da.dims:
            raise InputError(f"dataset variable {variable}: dimension {dim!r} missing (dims {da.dims})")
    has_disp = "dispersion" in da.dims
    for level in ds["level"].values:
        if has_disp:
            for disp in ds["dispersion"].values:
                if "dispersion_status" in ds and \
                        str(ds["dispersion_status"].sel(level=level, dispersion=disp).values) != "ok":
                    continue
                curve = da.sel(level=level, dispersion=disp).transpose("distance")
                yield {"level": str(level), "dispersion": str(disp)}, curve.values
        else:
            yield {"level": str(level)}, da.sel(level=level).transpose("distance").values


def fit_table(ds: xr.Dataset, variable: str = "e_int", models=MODELS) -> list[dict]:
    """Fit every curve of a scan Dataset with each model.

    Parameters
    ----------
    ds : xarray.Dataset
        Scan with dims ``level`` and ``distance`` (angstrom) and ``variable`` in kcal/mol;
        if ``variable`` also has a ``dispersion`` dimension, every (level, dispersion)
        curve is fitted.
    variable : str
        Energy variable to fit.
    models : sequence of str
        Models of :func:`fit_curve`.

    Returns
    -------
    list of dict
        One row per curve and model: labels, ``model``, ``status`` (``"ok"`` or the
        one-line reason the fit was not made), the fitted parameters and uncertainties,
        ``rmse_kcal_per_mol``, ``r_min_angstrom``, ``well_depth_kcal_per_mol``.
    """
    models = [models] if isinstance(models, str) else list(models)
    for m in models:
        if m not in _N_PARAMS:
            raise InputError(f"models: unknown fit model {m!r}; choose one of {', '.join(MODELS)}")
    distance = ds["distance"].values
    rows = []
    for labels, energy in _curves(ds, variable):
        for m in models:
            row = dict(labels)
            row["model"] = m
            try:
                result = fit_curve(distance, energy, m)
            except (InputError, ConvergenceError) as exc:
                row.update(status=str(exc), rmse_kcal_per_mol=math.nan, r_min_angstrom=math.nan,
                           well_depth_kcal_per_mol=math.nan)
                rows.append(row)
                continue
            row["status"] = "ok"
            row.update(result.to_dict())
            row.setdefault("r_min_angstrom", result.r_min_angstrom)
            row.setdefault("well_depth_kcal_per_mol", result.well_depth_kcal_per_mol)
            rows.append(row)
    return rows


# --------------------------------------------------------------------------- C6 tail


@dataclass(frozen=True)
class TailC6:
    """Long-range dispersion coefficient from the tail of a curve.

    Attributes
    ----------
    c6_kcal_per_mol_angstrom6, c6_err_kcal_per_mol_angstrom6 : float
        C6 of ``E = -C6/R^6 [- C8/R^8]`` and its standard uncertainty (NaN when the
        fit has no degree of freedom left).
    c6_hartree_bohr6, c6_err_hartree_bohr6 : float
        The same in hartree·bohr^6.
    c8_kcal_per_mol_angstrom8, c8_err_kcal_per_mol_angstrom8 : float
        C8 and its uncertainty (NaN when the C8 term was not fitted).
    log_log_slope, log_log_slope_err : float
        Slope (dimensionless) of ``ln|E|`` against ``ln R`` over the tail points and its
        standard uncertainty; -6 for a pure R^-6 tail. NaN if the tail energies are not
        all of one sign and non-zero, or fewer than 2 points.
    r_from_angstrom, r_to_angstrom : float
        Range of the tail points used.
    n_points : int
        Tail points used.
    with_c8 : bool
        Whether the C8 term was fitted.
    """

    c6_kcal_per_mol_angstrom6: float
    c6_err_kcal_per_mol_angstrom6: float
    c6_hartree_bohr6: float
    c6_err_hartree_bohr6: float
    c8_kcal_per_mol_angstrom8: float
    c8_err_kcal_per_mol_angstrom8: float
    log_log_slope: float
    log_log_slope_err: float
    r_from_angstrom: float
    r_to_angstrom: float
    n_points: int
    with_c8: bool

    def to_dict(self) -> dict:
        return asdict(self)


def _linear_fit_with_errors(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Ordinary least squares with standard uncertainties ``sqrt(diag(s^2 (X^T X)^-1))``."""
    scale = np.linalg.norm(x, axis=0)
    xs = x / scale
    coef, *_ = np.linalg.lstsq(xs, y, rcond=None)
    n, p = xs.shape
    if n > p:
        s2 = float(np.sum((y - xs @ coef) ** 2)) / (n - p)
        cov = s2 * np.linalg.inv(xs.T @ xs)
        err = np.sqrt(np.clip(np.diag(cov), 0.0, np.inf))
    else:
        err = np.full(p, np.nan)
    return coef / scale, err / scale


def c6_from_tail(distance, energy, n_tail: int = 3, r_min_angstrom: float | None = None,
                 with_c8: bool | None = None) -> TailC6:
    """Estimate C6 from the long-range tail of E(R) by linear least squares.

    Parameters
    ----------
    distance : array-like
        Distances in angstrom (positive).
    energy : array-like
        Interaction energies in kcal/mol; NaN points are skipped.
    n_tail : int
        Number of largest-distance finite points used when ``r_min_angstrom`` is None.
    r_min_angstrom : float, optional
        Use every finite point with ``R > r_min_angstrom`` instead.
    with_c8 : bool, optional
        Fit ``-C6/R^6 - C8/R^8`` (True) or ``-C6/R^6`` alone (False); by default the
        C8 term is included when the tail has at least 4 points.

    Returns
    -------
    TailC6
        C6 in kcal/mol·angstrom^6 and hartree·bohr^6 with uncertainties, and the
        log–log slope of the tail.

    Raises
    ------
    InputError
        Bad arrays, fewer than 2 tail points, or fewer than 4 with ``with_c8=True``.
    """
    r, e = _finite_curve(distance, energy, 2, "a C6 tail fit")
    if r_min_angstrom is not None:
        if not np.isfinite(r_min_angstrom) or r_min_angstrom <= 0:
            raise InputError(f"r_min_angstrom: value {r_min_angstrom!r} is not a positive distance")
        keep = r > r_min_angstrom
        r, e = r[keep], e[keep]
        where = f"beyond r_min_angstrom={r_min_angstrom}"
    else:
        if int(n_tail) != n_tail or n_tail < 2:
            raise InputError(f"n_tail: value {n_tail!r} must be an integer >= 2")
        r, e = r[-int(n_tail):], e[-int(n_tail):]
        where = f"in the last n_tail={n_tail}"
    n = len(r)
    if n < 2:
        raise InputError(f"energy: {n} finite point(s) {where}; a C6 tail fit needs at least 2")
    if with_c8 is None:
        with_c8 = n >= 4
    if with_c8 and n < 4:
        raise InputError(f"with_c8: a C6 + C8 tail fit needs at least 4 points {where}, got {n}")
    cols = [-(r**-6)] + ([-(r**-8)] if with_c8 else [])
    coef, err = _linear_fit_with_errors(np.column_stack(cols), e)
    c6, c6_err = float(coef[0]), float(err[0])
    c8, c8_err = (float(coef[1]), float(err[1])) if with_c8 else (math.nan, math.nan)
    slope, slope_err = math.nan, math.nan
    if np.all(e < 0) or np.all(e > 0):
        x = np.column_stack([np.log(r), np.ones(n)])
        sc, se = _linear_fit_with_errors(x, np.log(np.abs(e)))
        slope, slope_err = float(sc[0]), float(se[0])
    return TailC6(
        c6_kcal_per_mol_angstrom6=c6,
        c6_err_kcal_per_mol_angstrom6=c6_err,
        c6_hartree_bohr6=c6 / HARTREE_BOHR6_TO_KCAL_PER_MOL_ANGSTROM6,
        c6_err_hartree_bohr6=c6_err / HARTREE_BOHR6_TO_KCAL_PER_MOL_ANGSTROM6,
        c8_kcal_per_mol_angstrom8=c8,
        c8_err_kcal_per_mol_angstrom8=c8_err,
        log_log_slope=slope,
        log_log_slope_err=slope_err,
        r_from_angstrom=float(r[0]),
        r_to_angstrom=float(r[-1]),
        n_points=n,
        with_c8=bool(with_c8),
    )
