"""Model fits of an interaction-energy curve E(R) and long-range C6 estimates.

Energies are in kcal/mol and distances in angstrom throughout. Three model potentials
are offered:

* Morse: ``E = De [(1 - exp(-a (R - Re)))**2 - 1]``;
* Lennard-Jones 12-6: ``E = 4 eps [(sigma/R)**12 - (sigma/R)**6]``;
* Buckingham exponential repulsion with a Tang–Toennies damped C6 term,
  ``E = A exp(-b R) - f6(b R) C6 / R**6`` with
  ``f6(x) = 1 - exp(-x) sum_{k=0..6} x**k / k!``
  (K. T. Tang and J. P. Toennies, J. Chem. Phys. 80, 3726 (1984)).

Parameters come from :func:`scipy.optimize.curve_fit` (``absolute_sigma=False``); the
standard uncertainties are the square roots of the diagonal of its covariance.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import asdict, dataclass, field

import numpy as np
import xarray as xr
from scipy.optimize import OptimizeWarning, curve_fit, minimize_scalar

from ..errors import ConvergenceError, InputError
from ..units import BOHR_TO_ANGSTROM, HARTREE_TO_KCAL_PER_MOL

MODELS = ("morse", "lj", "buckingham-tt")

#: 1 hartree·bohr^6 in kcal/mol·angstrom^6 (CODATA 2018 constants of ``interkit.units``).
HARTREE_BOHR6_TO_KCAL_PER_MOL_ANGSTROM6 = HARTREE_TO_KCAL_PER_MOL * BOHR_TO_ANGSTROM**6
#: 1 hartree·bohr^8 in kcal/mol·angstrom^8.
HARTREE_BOHR8_TO_KCAL_PER_MOL_ANGSTROM8 = HARTREE_TO_KCAL_PER_MOL * BOHR_TO_ANGSTROM**8

_N_PARAMS = {"morse": 3, "lj": 2, "buckingham-tt": 3}


# --------------------------------------------------------------------------- models


def morse_energy(distance_angstrom, de_kcal_per_mol, a_per_angstrom, re_angstrom):
    """Morse potential (kcal/mol) at ``distance_angstrom``."""
    r = np.asarray(distance_angstrom, dtype=float)
    x = np.exp(-a_per_angstrom * (r - re_angstrom))
    return de_kcal_per_mol * ((1.0 - x) ** 2 - 1.0)


def lj_energy(distance_angstrom, epsilon_kcal_per_mol, sigma_angstrom):
    """Lennard-Jones 12-6 potential (kcal/mol) at ``distance_angstrom``."""
    r = np.asarray(distance_angstrom, dtype=float)
    s6 = (sigma_angstrom / r) ** 6
    return 4.0 * epsilon_kcal_per_mol * (s6 * s6 - s6)


def tang_toennies_f6(x) -> np.ndarray:
    """Tang–Toennies damping function of order 6, ``1 - exp(-x) sum_{k<=6} x^k/k!``
    (dimensionless; ``x = b R``)."""
    x = np.asarray(x, dtype=float)
    term = np.ones_like(x)
    total = np.ones_like(x)
    for k in range(1, 7):
        term = term * x / k
        total = total + term
    return 1.0 - np.exp(-x) * total


def buckingham_tt_energy(distance_angstrom, a_kcal_per_mol, b_per_angstrom, c6_kcal_per_mol_angstrom6):
    """Buckingham repulsion with Tang–Toennies damped dispersion (kcal/mol)."""
    r = np.asarray(distance_angstrom, dtype=float)
    return (a_kcal_per_mol * np.exp(-b_per_angstrom * r)
            - tang_toennies_f6(b_per_angstrom * r) * c6_kcal_per_mol_angstrom6 / r**6)


# --------------------------------------------------------------------------- results


@dataclass(frozen=True)
class _FitCommon:
    model: str
    rmse_kcal_per_mol: float
    residuals_kcal_per_mol: np.ndarray = field(repr=False)
    distance_angstrom: np.ndarray = field(repr=False)
    n_points: int

    def to_dict(self) -> dict:
        """Scalar fields as a dict (the residual and distance arrays are left out)."""
        d = asdict(self)
        d.pop("residuals_kcal_per_mol")
        d.pop("distance_angstrom")
        return d


@dataclass(frozen=True)
class MorseFit(_FitCommon):
    """Morse fit of E(R).

    Attributes
    ----------
    model : str
        ``"morse"``.
    rmse_kcal_per_mol : float
        Root-mean-square residual.
    residuals_kcal_per_mol : numpy.ndarray
        ``data - model`` at the finite points, in order of increasing distance.
    distance_angstrom : numpy.ndarray
        Distances of the finite points used (increasing).
    n_points : int
        Finite points used.
    de_kcal_per_mol, de_err_kcal_per_mol : float
        Well depth (> 0) and its standard uncertainty.
    a_per_angstrom, a_err_per_angstrom : float
        Range parameter and its standard uncertainty.
    re_angstrom, re_err_angstrom : float
        Equilibrium distance and its standard uncertainty.
    """

    de_kcal_per_mol: float = math.nan
    de_err_kcal_per_mol: float = math.nan
    a_per_angstrom: float = math.nan
    a_err_per_angstrom: float = math.nan
    re_angstrom: float = math.nan
    re_err_angstrom: float = math.nan

    @property
    def r_min_angstrom(self) -> float:
        """Position of the model minimum (angstrom)."""
        return self.re_angstrom

    @property
    def well_depth_kcal_per_mol(self) -> float:
        """Depth of the model well (kcal/mol, positive when bound)."""
        return self.de_kcal_per_mol

    def energy(self, distance_angstrom) -> np.ndarray:
        """Model energy (kcal/mol) at ``distance_angstrom``."""
        return morse_energy(distance_angstrom, self.de_kcal_per_mol, self.a_per_angstrom, self.re_angstrom)


@dataclass(frozen=True)
class LennardJonesFit(_FitCommon):
    """Lennard-Jones 12-6 fit of E(R).

    Attributes
    ----------
    model : str
        ``"lj"``.
    rmse_kcal_per_mol, residuals_kcal_per_mol, distance_angstrom, n_points
        As in :class:`MorseFit`.
    epsilon_kcal_per_mol, epsilon_err_kcal_per_mol : float
        Well depth and its standard uncertainty.
    sigma_angstrom, sigma_err_angstrom : float
        Distance where E = 0 and its standard uncertainty.
    """

    epsilon_kcal_per_mol: float = math.nan
    epsilon_err_kcal_per_mol: float = math.nan
    sigma_angstrom: float = math.nan
    sigma_err_angstrom: float = math.nan

    @property
    def r_min_angstrom(self) -> float:
        """Position of the minimum, ``2**(1/6) sigma`` (angstrom)."""
        return 2.0 ** (1.0 / 6.0) * self.sigma_angstrom

    @property
    def well_depth_kcal_per_mol(self) -> float:
        """Depth of the well (kcal/mol)."""
        return self.epsilon_kcal_per_mol

    def energy(self, distance_angstrom) -> np.ndarray:
        """Model energy (kcal/mol) at ``distance_angstrom``."""
        return lj_energy(distance_angstrom, self.epsilon_kcal_per_mol, self.sigma_angstrom)

    def to_dict(self) -> dict:
        d = super().to_dict()
        d["r_min_angstrom"] = self.r_min_angstrom
        return d


@dataclass(frozen=True)
class BuckinghamTTFit(_FitCommon):
    """Buckingham fit with Tang–Toennies damped C6 dispersion.

    Attributes
    ----------
    model : str
        ``"buckingham-tt"``.
    rmse_kcal_per_mol, residuals_kcal_per_mol, distance_angstrom, n_points
        As in :class:`MorseFit`.
    a_kcal_per_mol, a_err_kcal_per_mol : float
        Pre-exponential factor of the repulsion and its standard uncertainty.
    b_per_angstrom, b_err_per_angstrom : float
        Exponent of the repulsion (also the damping range) and its uncertainty.
    c6_kcal_per_mol_angstrom6, c6_err_kcal_per_mol_angstrom6 : float
        Dispersion coefficient and its standard uncertainty.
    """

    a_kcal_per_mol: float = math.nan
    a_err_kcal_per_mol: float = math.nan
    b_per_angstrom: float = math.nan
    b_err_per_angstrom: float = math.nan
    c6_kcal_per_mol_angstrom6: float = math.nan
    c6_err_kcal_per_mol_angstrom6: float = math.nan

    @property
    def c6_hartree_bohr6(self) -> float:
        """C6 in hartree·bohr^6."""
        return self.c6_kcal_per_mol_angstrom6 / HARTREE_BOHR6_TO_KCAL_PER_MOL_ANGSTROM6

    def energy(self, distance_angstrom) -> np.ndarray:
        """Model energy (kcal/mol) at ``distance_angstrom``."""
        return buckingham_tt_energy(distance_angstrom, self.a_kcal_per_mol, self.b_per_angstrom,
                                    self.c6_kcal_per_mol_angstrom6)

    def _minimum(self) -> tuple[float, float]:
        r = self.distance_angstrom
        grid = np.linspace(0.5 * r.min(), 2.0 * r.max(), 4001)
        with np.errstate(over="ignore", invalid="ignore"):
            vals = self.energy(grid)
        k = int(np.nanargmin(vals))
        if k in (0, len(grid) - 1):
            return math.nan, math.nan
        res = minimize_scalar(lambda x: float(self.energy(x)), bounds=(grid[k - 1], grid[k + 1]),
                              method="bounded")
        return float(res.x), float(-res.fun)

    @property
    def r_min_angstrom(self) -> float:
        """Position of the model minimum (angstrom; NaN if none near the data)."""
        return self._minimum()[0]

    @property
    def well_depth_kcal_per_mol(self) -> float:
        """Depth of the model well (kcal/mol; NaN if no minimum near the data)."""
        return self._minimum()[1]

    def to_dict(self) -> dict:
        d = super().to_dict()
        d["c6_hartree_bohr6"] = self.c6_hartree_bohr6
        d["c6_err_hartree_bohr6"] = self.c6_err_kcal_per_mol_angstrom6 / HARTREE_BOHR6_TO_KCAL_PER_MOL_ANGSTROM6
        d["r_min_angstrom"], d["well_depth_kcal_per_mol"] = self._minimum()
        return d


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


_FUNCS = {"morse": morse_energy, "lj": lj_energy, "buckingham-tt": buckingham_tt_energy}
_STARTS = {"morse": _start_morse, "lj": _start_lj, "buckingham-tt": _start_buckingham}
_BOUNDS = {
    "morse": ([0.0, 0.0, 0.0], [np.inf, np.inf, np.inf]),
    "lj": ([0.0, 0.0], [np.inf, np.inf]),
    "buckingham-tt": ([0.0, 0.0, 0.0], [np.inf, np.inf, np.inf]),
}


def _fit(model: str, r: np.ndarray, e: np.ndarray):
    p0 = _STARTS[model](r, e)
    lo, hi = _BOUNDS[model]
    p0 = np.clip(p0, np.asarray(lo) + 1e-12, hi)
    try:
        with warnings.catch_warnings(), np.errstate(over="ignore", invalid="ignore"):
            warnings.simplefilter("ignore", OptimizeWarning)
            popt, pcov = curve_fit(_FUNCS[model], r, e, p0=p0, bounds=(lo, hi), absolute_sigma=False,
                                   x_scale="jac", max_nfev=20000)
    except (RuntimeError, ValueError) as exc:
        msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise ConvergenceError(f"{model} fit did not converge: {msg}") from None
    if not np.all(np.isfinite(popt)):
        raise ConvergenceError(f"{model} fit did not converge: non-finite parameters {popt.tolist()}")
    resid = e - _FUNCS[model](r, *popt)
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
    if model == "morse":
        return MorseFit(**common, de_kcal_per_mol=float(p[0]), de_err_kcal_per_mol=float(err[0]),
                        a_per_angstrom=float(p[1]), a_err_per_angstrom=float(err[1]),
                        re_angstrom=float(p[2]), re_err_angstrom=float(err[2]))
    if model == "lj":
        return LennardJonesFit(**common, epsilon_kcal_per_mol=float(p[0]),
                               epsilon_err_kcal_per_mol=float(err[0]),
                               sigma_angstrom=float(p[1]), sigma_err_angstrom=float(err[1]))
    return BuckinghamTTFit(**common, a_kcal_per_mol=float(p[0]), a_err_kcal_per_mol=float(err[0]),
                           b_per_angstrom=float(p[1]), b_err_per_angstrom=float(err[1]),
                           c6_kcal_per_mol_angstrom6=float(p[2]),
                           c6_err_kcal_per_mol_angstrom6=float(err[2]))


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
