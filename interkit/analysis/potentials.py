"""Model potentials of an interaction-energy curve E(R) and the results of fitting them.

Energies are in kcal/mol and distances in angstrom throughout. Three model potentials
are offered:

* Morse: ``E = De [(1 - exp(-a (R - Re)))**2 - 1]``;
* Lennard-Jones 12-6: ``E = 4 eps [(sigma/R)**12 - (sigma/R)**6]``;
* Buckingham exponential repulsion with a Tang–Toennies damped C6 term,
  ``E = A exp(-b R) - f6(b R) C6 / R**6`` with
  ``f6(x) = 1 - exp(-x) sum_{k=0..6} x**k / k!``
  (K. T. Tang and J. P. Toennies, J. Chem. Phys. 80, 3726 (1984)).

Each has a frozen dataclass of fitted parameters with standard uncertainties
(:class:`MorseFit`, :class:`LennardJonesFit`, :class:`BuckinghamTTFit`), made by
:func:`interkit.analysis.fits.fit_curve`.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field, fields

import numpy as np
from scipy.optimize import minimize_scalar

from ..units import BOHR_TO_ANGSTROM, HARTREE_TO_KCAL_PER_MOL

#: 1 hartree·bohr^6 in kcal/mol·angstrom^6 (CODATA 2018 constants of ``interkit.units``).
HARTREE_BOHR6_TO_KCAL_PER_MOL_ANGSTROM6 = HARTREE_TO_KCAL_PER_MOL * BOHR_TO_ANGSTROM**6
#: 1 hartree·bohr^8 in kcal/mol·angstrom^8.
HARTREE_BOHR8_TO_KCAL_PER_MOL_ANGSTROM8 = HARTREE_TO_KCAL_PER_MOL * BOHR_TO_ANGSTROM**8


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

    #: the model potential (kcal/mol) of the fit, ``f(distance_angstrom, *parameters)``
    energy_function = None

    def to_dict(self) -> dict:
        """Scalar fields as a dict (the residual and distance arrays are left out)."""
        d = asdict(self)
        d.pop("residuals_kcal_per_mol")
        d.pop("distance_angstrom")
        return d

    @classmethod
    def parameter_fields(cls) -> tuple[tuple[str, str], ...]:
        """``(value, uncertainty)`` field names of the fitted parameters, in the order of
        the arguments of :attr:`energy_function`.

        Each fit declares them after the common fields, a value then its uncertainty.
        """
        names = [f.name for f in fields(cls)][len(fields(_FitCommon)):]
        return tuple(zip(names[::2], names[1::2]))

    @classmethod
    def from_parameters(cls, common: dict, values, errors):
        """The fit with the ``common`` fields, fitted ``values`` and their standard
        ``errors`` (both in the order of :meth:`parameter_fields`)."""
        pairs = cls.parameter_fields()
        return cls(**common, **{v: float(values[i]) for i, (v, _) in enumerate(pairs)},
                   **{e: float(errors[i]) for i, (_, e) in enumerate(pairs)})

    def energy(self, distance_angstrom) -> np.ndarray:
        """Model energy (kcal/mol) at ``distance_angstrom``."""
        return self.energy_function(distance_angstrom, *(getattr(self, v) for v, _ in self.parameter_fields()))


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

    energy_function = staticmethod(morse_energy)

    @property
    def r_min_angstrom(self) -> float:
        """Position of the model minimum (angstrom)."""
        return self.re_angstrom

    @property
    def well_depth_kcal_per_mol(self) -> float:
        """Depth of the model well (kcal/mol, positive when bound)."""
        return self.de_kcal_per_mol


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

    energy_function = staticmethod(lj_energy)

    @property
    def r_min_angstrom(self) -> float:
        """Position of the minimum, ``2**(1/6) sigma`` (angstrom)."""
        return 2.0 ** (1.0 / 6.0) * self.sigma_angstrom

    @property
    def well_depth_kcal_per_mol(self) -> float:
        """Depth of the well (kcal/mol)."""
        return self.epsilon_kcal_per_mol

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

    energy_function = staticmethod(buckingham_tt_energy)

    @property
    def c6_hartree_bohr6(self) -> float:
        """C6 in hartree·bohr^6."""
        return self.c6_kcal_per_mol_angstrom6 / HARTREE_BOHR6_TO_KCAL_PER_MOL_ANGSTROM6

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
