"""Where the density moved: the deformation density of the explorer's point.

Δρ = ρ_AB − ρ_A − ρ_B (all in the dimer basis) is drawn in the explorer's 3D view as two
isosurfaces, charge gained and charge lost, with an isovalue control, beside its
integral over planes perpendicular to the scan direction (the charge shift along the
contact, electrons per Å). The density matrices come from the store (a scan run with
``keep_densities=True``); when they are absent the panel says so and offers to compute
that one point (three calculations), never the whole scan.
"""

from __future__ import annotations

import io
import os

import ipywidgets as widgets
import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from ..data.cube import cube_text
from ..errors import InterkitError
from ..run.densities import DensitiesNotStoredError, compute_point_densities, load_point_densities
from .style import GAIN_COLOUR, LOSS_COLOUR, error_html, note_html

#: grid step of the volume sent to the 3D view (bohr)
VIEW_SPACING_BOHR = 0.35
DEFAULT_ISOVALUE = 0.001


def profile_png(position, profile, contact_angstrom: float, title: str) -> bytes:
    """PNG of the charge shift along the contact (electrons/Å against Å)."""
    fig = Figure(figsize=(5.0, 2.6), dpi=90, layout="constrained")
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    x, y = np.asarray(position), np.asarray(profile)
    ax.fill_between(x, y, 0, where=y >= 0, color=GAIN_COLOUR, alpha=0.5, lw=0, label="gain")
    ax.fill_between(x, y, 0, where=y < 0, color=LOSS_COLOUR, alpha=0.5, lw=0, label="loss")
    ax.plot(x, y, color="#222222", lw=1)
    ax.axhline(0, color="#888888", lw=0.6)
    for at, name in ((0.0, "A end"), (contact_angstrom, "B end")):
        ax.axvline(at, color="#b0247c", lw=0.8, ls="--")
        ax.annotate(name, (at, 1), xycoords=("data", "axes fraction"), fontsize=7, ha="center", va="bottom")
    ax.set_xlabel("position along the contact / Å")
    ax.set_ylabel("Δρ over the plane / e Å⁻¹")
    ax.set_title(title, fontsize=8)
    ax.legend(fontsize=7, loc="lower right")
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    return buf.getvalue()


class DensityPanel(widgets.VBox):
    """Deformation-density controls for a :class:`~interkit.widgets.ScanExplorer`.

    Parameters
    ----------
    explorer : ScanExplorer
        Gives the point (``index``), the level, the raw Dataset (``source``) and the 3D view.
    cache : path-like, optional
        Result store holding the density matrices (default ``.interkit-cache`` if present).
    """

    def __init__(self, explorer, cache: str | os.PathLike | None = None):
        self.explorer = explorer
        default = cache if cache is not None else (".interkit-cache" if os.path.isdir(".interkit-cache") else "")
        self.show = widgets.Checkbox(value=False, description="deformation density Δρ", indent=False)
        self.show.add_class("interkit-density-show")
        self.isovalue = widgets.FloatLogSlider(value=DEFAULT_ISOVALUE, base=10, min=-4, max=-1, step=0.1,
                                               description="isovalue", readout_format=".1e",
                                               continuous_update=False, layout=widgets.Layout(width="330px"))
        self.isovalue.add_class("interkit-isovalue")
        self.unit_note = widgets.HTML(note_html("e/bohr³"))
        self.store = widgets.Text(value=os.fspath(default), description="store", placeholder="cache folder",
                                  layout=widgets.Layout(width="330px"))
        self.compute_button = widgets.Button(description="compute this point", layout=widgets.Layout(width="160px"),
                                             tooltip="run the 3 counterpoise calculations of this point only")
        self.compute_button.add_class("interkit-density-compute")
        self.compute_button.layout.display = "none"
        self.status = widgets.HTML()
        self.status.add_class("interkit-density-status")
        self.profile = widgets.Image(format="png")
        self.profile.add_class("interkit-density-profile")
        self.profile.layout.display = "none"
        self.densities = None
        legend = (f'<span style="color:{GAIN_COLOUR}">■ gain (Δρ &gt; 0)</span> &nbsp; '
                  f'<span style="color:{LOSS_COLOUR}">■ loss (Δρ &lt; 0)</span>')
        super().__init__(children=[
            widgets.HTML("<b>Where the density moved</b>"),
            widgets.HBox([self.show, widgets.HTML(f'<div style="font-size:88%">{legend}</div>')]),
            widgets.HBox([self.isovalue, self.unit_note]), widgets.HBox([self.store, self.compute_button]),
            self.status, self.profile])
        self.add_class("interkit-density")
        self.show.observe(lambda _c: self.update(), "value")
        self.isovalue.observe(self._on_isovalue, "value")
        self.compute_button.on_click(lambda _b: self.update(compute=True))
        explorer.observe(lambda _c: self.update() if self.show.value else None, names=["index", "level"])

    def _level(self) -> str:
        levels = [str(x) for x in self.explorer.source["level"].values]
        return self.explorer.level if self.explorer.level in levels else levels[0]

    def _on_isovalue(self, change) -> None:
        if self.show.value and self.explorer.view3d.canvas is not None:
            self.explorer.view3d.canvas.isovalue = float(change["new"])

    def update(self, compute: bool = False) -> None:
        """Load (or, with ``compute``, calculate) the point's densities and draw them."""
        view = self.explorer.view3d
        self.compute_button.layout.display = "none"
        if not self.show.value:
            view.set_volume(None)
            self.profile.layout.display = "none"
            self.status.value = ""
            return
        ds, point, level = self.explorer.source, int(self.explorer.index), self._level()
        cache = self.store.value.strip() or None
        try:
            if compute:
                self.status.value = note_html(f"computing the 3 counterpoise calculations of point {point} ...")
                pdens = compute_point_densities(ds, point, level, cache=cache)
            else:
                pdens = load_point_densities(ds, point, level, cache=cache)
        except DensitiesNotStoredError as exc:
            view.set_volume(None)
            self.profile.layout.display = "none"
            self.status.value = error_html(f"no stored densities for point {point}: {exc}")
            self.compute_button.layout.display = None
            return
        except InterkitError as exc:
            view.set_volume(None)
            self.status.value = error_html(str(exc))
            return
        self.densities = pdens
        box = pdens.box(spacing_bohr=VIEW_SPACING_BOHR)
        values = pdens.volumes(box, names=("deformation",))["deformation"]
        mol = pdens.mol
        cube = cube_text([mol.atom_pure_symbol(i) for i in range(mol.natm)], mol.atom_coords(), box, values,
                         ("interkit deformation density", "electrons/bohr^3"))
        view.set_volume(cube, self.isovalue.value)
        x, prof = pdens.profile()
        contact = float(np.linalg.norm(pdens.anchors_angstrom[1] - pdens.anchors_angstrom[0]))
        self.profile.value = profile_png(x, prof, contact, f"{level}, point {point} (from 0), "
                                         f"{pdens.distance_angstrom:.3f} Å")
        self.profile.layout.display = None
        self.status.value = note_html(
            f"Δρ = ρ_AB − ρ_A − ρ_B in the dimer basis (SCF densities), {level}, point {point} "
            f"(numbered from 0) at {pdens.distance_angstrom:.3f} Å; surfaces at ± isovalue e/bohr³; "
            "profile: Δρ integrated over planes perpendicular to the scan direction")
