"""Force views for the explorer: the force curve panel and per-fragment arrows."""

from __future__ import annotations

import numpy as np
import xarray as xr

from ..model.level_names import display_label
from ..plot.curves import plot_forces
from ..units import convert_force, unit_text
from .curves import CurvePanel

#: arrows in the 3D view: angstrom of arrow per kcal/mol/angstrom of force
ATOM_ARROW_SCALE = 0.05
FRAGMENT_ARROW_SCALE = 0.08


class ForcePanel(CurvePanel):
    """Net force on fragment B along the coordinate (per level) with a movable marker.

    The ``unit`` of :meth:`redraw` is a force unit (a key of
    :data:`interkit.units.FORCE_UNITS`); the toggles of the energy view do not apply.
    """

    css_class = "interkit-force-curves"

    def _draw(self, unit: str, show_uncorrected: bool, show_bsse: bool) -> None:
        plot_forces(self.ds, ax=self.ax, levels=self.levels, show_fit=True, show_split=False,
                    force_unit=unit)
        if self.ylim is not None:
            self.ax.set_ylim(*self.ylim)

    def _marked_values(self, level: str, unit: str) -> np.ndarray:
        stored = self.ds["force_along"].attrs.get("units", "kcal/mol/angstrom")
        return convert_force(self.ds["force_along"].sel(level=level).values, stored, unit)


def force_arrows(ds: xr.Dataset, level: str, index: int, mode: str) -> list | None:
    """Arrow segments (start, end) in angstrom for the 3D view.

    Parameters
    ----------
    mode : {'atoms', 'fragments', 'off'}
        One arrow per atom (scale ``ATOM_ARROW_SCALE``) or one per fragment at its
        centre of mass (``FRAGMENT_ARROW_SCALE``).
    """
    if mode == "off" or "forces" not in ds.variables:
        return None
    coords = ds["coordinates"].values[index]
    vec = np.asarray(ds["forces"].sel(level=level).isel(distance=index).transpose("atom", "xyz").values)
    if not np.all(np.isfinite(vec)):
        return None
    if mode == "atoms":
        return [(coords[a], coords[a] + ATOM_ARROW_SCALE * vec[a]) for a in range(len(coords))
                if np.linalg.norm(vec[a]) > 1e-3]
    from ..model.geometry import atomic_mass

    masses = np.array([atomic_mass(str(s)) for s in ds["symbol"].values])
    frag = ds["fragment"].values.astype(str)
    arrows = []
    for label in ("A", "B"):
        idx = frag == label
        com = (masses[idx, None] * coords[idx]).sum(axis=0) / masses[idx].sum()
        net = vec[idx].sum(axis=0)
        if np.linalg.norm(net) > 1e-3:
            arrows.append((com, com + FRAGMENT_ARROW_SCALE * net))
    return arrows


def scale_legend(mode: str, level: str | None = None, force_unit: str = "kcal/mol/angstrom") -> str:
    """One line saying what an arrow length means, in ``force_unit``, and (given
    ``level``) whose forces the arrows show."""
    if mode == "off":
        return "force arrows off"
    scale = ATOM_ARROW_SCALE if mode == "atoms" else FRAGMENT_ARROW_SCALE
    per_angstrom = convert_force(1 / scale, "kcal/mol/angstrom", force_unit)
    whose = f"forces of {display_label(level)}, " if level else ""
    return (f"arrows ({whose}{'per atom' if mode == 'atoms' else 'net force per fragment, at its centre of mass'}): "
            f"1 Å of arrow = {per_angstrom:.4g} {unit_text(force_unit)}")
