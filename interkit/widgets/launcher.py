"""ScanLauncher: set up a scan in a form, see its cost, run it in the background.

The launcher builds an :class:`interkit.ScanSpec` from its controls and hands it to
:func:`interkit.run_scan` in a background thread (see :mod:`.runner`), so the kernel
stays responsive. Bad input shows the InterkitError message in the form. The form's
choices, parsing and wording live in :mod:`.launcher_form`; running the scan and its
progress and result views in :mod:`.launcher_run`.
"""

from __future__ import annotations

import os

import ipywidgets as widgets
import numpy as np

from ..errors import InputError, InterkitError
from ..model.composite import parse_level
from ..model.coordinates import AtomPair, CentreOfMass
from ..model.demo import demo_catalog, list_demos, load_demo
from ..model.geometry import Dimer
from ..model.levels import DEFAULT_GRID_LEVEL
from ..model.spec import DEFAULT_MEMORY_LIMIT_MB, ScanSpec
from ..run.store import DEFAULT_STORE, resolve_cache
from .contact_picking import ContactPicker
from .explorer import ScanExplorer
from .launcher_form import (
    COORDINATES,
    DEFAULT_FACTORS,
    GRID_MODES,
    SOURCES,
    _duration,
    _shows_errors,
    dimer_summary,
    parse_grid,
    rough_seconds_per_calculation,
)
from .launcher_run import RunPanel
from .runner import BackgroundScan, count_calculations, default_workers
from .style import error_html, note_html
from .viewer3d import Molecule3D, scene_from_arrays

__all__ = ["ScanLauncher", "parse_grid", "rough_seconds_per_calculation"]

_lay = widgets.Layout


class ScanLauncher(RunPanel, widgets.VBox):
    """A form to set up and run an interaction-energy scan from a notebook.

    Parameters
    ----------
    demo : str
        Bundled dimer selected at start.
    executor : {'processes', 'serial'}
        How :func:`interkit.run_scan` runs the calculations (one worker is always serial).
    cache : path-like, None or DEFAULT_STORE
        Result store folder (finished calculations are reused by later runs); by default
        the folder of :func:`interkit.run.store.default_store_folder` (``$INTERKIT_CACHE``,
        else ``.interkit-cache`` in the current folder, as :func:`interkit.run_scan`).
        None (or an empty "store" field) keeps no store.

    Attributes
    ----------
    dimer : Dimer or None
        The dimer the form currently holds.
    result : xarray.Dataset or None
        The last finished (or cancelled) scan; it also opens in :attr:`explorer`.
    """

    def __init__(self, demo: str = "water_methanol", executor: str = "processes",
                 cache: str | os.PathLike | None = DEFAULT_STORE):
        self.executor = executor
        self.dimer: Dimer | None = None
        self.result = None
        self.explorer: ScanExplorer | None = None
        self.scan: BackgroundScan | None = None
        self._last_live = 0.0
        self.message = widgets.HTML()
        self.message.add_class("interkit-message")
        self._build_dimer_source(demo)
        self._build_coordinate_and_grid()
        self._build_levels()
        self._build_level_settings()
        self._build_store_and_estimate(cache)
        self._build_run_controls()
        self._wire()
        self._source_box = widgets.VBox()
        self._text_source = ""
        super().__init__(children=self._layout())
        self.add_class("interkit-launcher")
        self._on_source()

    # ------------------------------------------------------------------ building the form
    def _build_dimer_source(self, demo: str) -> None:
        """Section 1: where the dimer comes from, its fragments, charges and spins, a 3D preview."""
        self.source = widgets.ToggleButtons(options=list(SOURCES), value=SOURCES[0], description="dimer from",
                                            style={"button_width": "120px"})
        titles = [(f"{demo_catalog()[n].get('title', n)} ({n})", n) for n in list_demos()]
        self.demo = widgets.Dropdown(options=titles, value=demo, description="bundled", layout=_lay(width="440px"))
        self.demo.add_class("interkit-demo")
        self.upload = widgets.FileUpload(accept=".xyz", multiple=False, description="XYZ file")
        self.paste = widgets.Textarea(placeholder="number of atoms\ncomment\nO 0.0 0.0 0.0\n...",
                                      layout=_lay(width="440px", height="120px"))
        self.paste_button = widgets.Button(description="read pasted XYZ", layout=_lay(width="150px"))
        self.fragment_a = widgets.Text(description="fragment A", placeholder="automatic (e.g. 0, 1, 2)",
                                       continuous_update=False, layout=_lay(width="300px"))
        self.charges = [widgets.IntText(value=0, description=f"charge {f}", layout=_lay(width="150px"))
                        for f in "AB"]
        self.mults = [widgets.IntText(value=1, description=f"2S+1 {f}", layout=_lay(width="150px"))
                      for f in "AB"]
        self.dimer_mult = widgets.Text(value="", description="2S+1 dimer", placeholder="high spin",
                                       tooltip="empty: high spin (S = S_A + S_B); the lowest spin |S_A - S_B| "
                                               "is a broken-symmetry calculation",
                                       continuous_update=False, layout=_lay(width="300px"))
        self.dimer_mult.add_class("interkit-dimer-multiplicity")
        self.dimer_info = widgets.HTML()
        self.preview = Molecule3D([scene_from_arrays(["H", "H"], ["A", "B"], [[0, 0, 0], [0, 0, 0.74]])],
                                  width=360, height=280, pickable=True)

    def _build_coordinate_and_grid(self) -> None:
        """Section 2: the scan coordinate (atom pair or centres of mass) and its grid."""
        self.coordinate = widgets.RadioButtons(options=list(COORDINATES), value=COORDINATES[0],
                                               description="coordinate")
        self.atom_a = widgets.Dropdown(description="atom in A", layout=_lay(width="260px"))
        self.atom_b = widgets.Dropdown(description="atom in B", layout=_lay(width="260px"))
        self.atom_a.add_class("interkit-atom-a")
        self.atom_b.add_class("interkit-atom-b")
        self.grid_mode = widgets.ToggleButtons(options=list(GRID_MODES), value=GRID_MODES[0], description="grid",
                                               style={"button_width": "110px"})
        self.grid = widgets.Text(value=DEFAULT_FACTORS, description="values", layout=_lay(width="440px"))
        self.grid.add_class("interkit-grid")

    def _build_levels(self) -> None:
        """Section 3, first part: levels of theory, counterpoise, workers and extra properties."""
        self.levels = widgets.Text(value="hf/def2-svp", description="levels",
                                   placeholder="comma-separated, e.g. hf/def2-svp, b3lyp-d3bj/def2-svp",
                                   layout=_lay(width="440px"))
        self.levels.add_class("interkit-levels")
        self.counterpoise = widgets.Checkbox(value=True, description="counterpoise correction", indent=False)
        ncpu = os.cpu_count() or 1
        # one core stays free for the notebook's own kernel (the explorer, the progress view)
        self.workers = widgets.IntSlider(value=default_workers(), min=1, max=max(ncpu, 1), description="workers")
        self.workers.add_class("interkit-workers")
        self.forces = widgets.Checkbox(value=False, description="forces", indent=False,
                                       tooltip="counterpoise-corrected forces and their electrostatic part")
        self.decomposition = widgets.Checkbox(value=False, description="SAPT0 decomposition", indent=False,
                                              tooltip="electrostatics, exchange, induction, dispersion "
                                                      "(closed-shell fragments, jun-cc-pVDZ)")
        self.dispersion = widgets.Text(value="", description="dispersion",
                                       placeholder="optional: compare schemes, e.g. none, d3bj, d4",
                                       tooltip="post-hoc schemes on one SCF per point (bare DFT functionals); "
                                               "d3zero, d3bj, d4, their -atm variants, none",
                                       layout=_lay(width="440px"))
        self.dispersion.add_class("interkit-dispersion")

    def _build_level_settings(self) -> None:
        """Section 3, second part: numerical settings applied to every level (see LevelOfTheory;
        defaults = pyscf's) and the memory limit."""
        self.scf_fitting = widgets.Checkbox(value=True, description="fitted SCF", indent=False,
                                            layout=_lay(width="110px"))
        self.frozen_core = widgets.Checkbox(value=True, description="frozen core", indent=False,
                                            layout=_lay(width="110px"))
        self.correlation_fitting = widgets.Checkbox(value=True, description="fitted MP2", indent=False,
                                                    layout=_lay(width="110px"))
        self.grid_level = widgets.BoundedIntText(value=DEFAULT_GRID_LEVEL, min=0, max=9, description="DFT grid",
                                                 layout=_lay(width="150px"))
        self.grid_pruning = widgets.Dropdown(options=["nwchem", "sg1", "treutler", "none"], value="nwchem",
                                             description="pruning", layout=_lay(width="200px"))
        self.jk_auxbasis = widgets.Text(description="JK fit", placeholder="default: matches basis",
                                        layout=_lay(width="215px"))
        self.ri_auxbasis = widgets.Text(description="MP2 fit", placeholder="default: the SCF's",
                                        layout=_lay(width="215px"))
        self.memory_limit = widgets.BoundedFloatText(value=DEFAULT_MEMORY_LIMIT_MB, min=1, max=1e7,
                                                     description="memory MB", layout=_lay(width="200px"),
                                                     tooltip="refuse calculations estimated above this")

    def _build_store_and_estimate(self, cache) -> None:
        """Section 3, last part: the result store and the cost estimate."""
        cache = resolve_cache(cache)
        self.cache = widgets.Text(value=os.fspath(cache) if cache else "", description="store",
                                  placeholder="empty: no store (finished calculations are not kept)",
                                  layout=_lay(width="440px"))
        self.seconds_per_calc = widgets.BoundedFloatText(value=1.0, min=0.01, max=1e6, step=0.1,
                                                         description="s / calc.", layout=_lay(width="180px"))
        self.estimate = widgets.HTML()
        self.estimate.add_class("interkit-estimate")

    def _wire(self) -> None:
        """Connect the controls to their handlers."""
        self.source.observe(self._on_source, "value")
        self.demo.observe(lambda _c: self._load_demo(), "value")
        self.upload.observe(self._on_upload, "value")
        self.paste_button.on_click(lambda _b: self.load_xyz_text(self.paste.value, "pasted"))
        for w in (self.fragment_a, *self.charges, *self.mults, self.dimer_mult):
            w.observe(lambda _c: self._reload(), "value")
        for w in (self.coordinate, self.atom_a, self.atom_b):
            w.observe(lambda _c: self._refresh_preview(), "value")
        self.coordinate.observe(self._on_coordinate, "value")
        self.grid_mode.observe(self._on_grid_mode, "value")
        for w in (self.grid, self.levels, self.counterpoise, self.workers, self.seconds_per_calc, self.forces,
                  self.decomposition, self.dispersion, self.scf_fitting, self.frozen_core,
                  self.correlation_fitting, self.grid_level, self.grid_pruning, self.jk_auxbasis,
                  self.ri_auxbasis, self.memory_limit):
            w.observe(lambda _c: self.update_estimate(), "value")
        self.levels.observe(lambda _c: self._guess_seconds(), "value")
        self.run_button.on_click(lambda _b: self.run())
        self.picker = ContactPicker(self)   # two clicks in the preview set atom_a and atom_b
        self.cancel_button.on_click(lambda _b: self.cancel())

    def _layout(self) -> list:
        """The launcher's children: the numbered form beside the preview, then run and outputs."""
        h = widgets.HTML
        form = widgets.VBox([
            h("<b>1 · Dimer</b>"), self.source, self._source_box,
            widgets.HBox([self.fragment_a]), widgets.HBox(self.charges), widgets.HBox(self.mults),
            self.dimer_mult,
            self.dimer_info,
            h("<b>2 · Scan coordinate and grid</b>"), self.coordinate, widgets.HBox([self.atom_a, self.atom_b]),
            h(note_html("atom numbers from 0, as in the API; or click an atom of A, then one of B, "
                        "in the 3D preview")),
            self.grid_mode, self.grid,
            h("<b>3 · Calculation</b>"), self.levels, self.counterpoise, self.workers,
            self.dispersion, widgets.HBox([self.forces, self.decomposition]),
            widgets.HBox([self.scf_fitting, self.frozen_core, self.correlation_fitting]),
            widgets.HBox([self.grid_level, self.grid_pruning]), widgets.HBox([self.jk_auxbasis, self.ri_auxbasis]),
            self.memory_limit, self.cache,
            widgets.HBox([self.seconds_per_calc, self.estimate]),
        ], layout=_lay(width="470px"))
        return [
            widgets.HBox([form, widgets.VBox([self.preview, self.message])]),
            widgets.HBox([self.run_button, self.cancel_button, self.progress, self.progress_label]),
            widgets.HBox([self.spec_path, self.save_spec_button]),
            self.point_table, self.live, self.result_box,
        ]

    # ------------------------------------------------------------------ dimer input
    def _on_source(self, _change=None) -> None:
        src = self.source.value
        if src == "bundled dimer":
            self._source_box.children = [self.demo]
            self._load_demo()
        elif src == "XYZ file":
            self._source_box.children = [self.upload, widgets.HTML(note_html(
                "an XYZ file (angstrom); the two fragments are split by connectivity"))]
        else:
            self._source_box.children = [self.paste, self.paste_button]

    @_shows_errors
    def _load_demo(self) -> None:
        name = self.demo.value
        entry = demo_catalog()[name]
        self._text_source = ""
        self._set_quietly(entry)
        self._set_dimer(load_demo(name))
        contact = entry.get("contact")
        if contact:
            self.coordinate.value = COORDINATES[0]
            a, b = (contact if contact[0] in self.dimer.fragment_a else contact[::-1])
            self.atom_a.value, self.atom_b.value = int(a), int(b)

    def _set_quietly(self, entry: dict) -> None:
        """Put a catalog entry's charges and multiplicities into the form."""
        self._loading = True
        try:
            self.fragment_a.value = ""
            for k in range(2):
                self.charges[k].value = int(entry.get("charges", (0, 0))[k])
                self.mults[k].value = int(entry.get("multiplicities", (1, 1))[k])
            self.dimer_mult.value = ""
        finally:
            self._loading = False

    def _on_upload(self, change) -> None:
        files = change["new"]
        if not files:
            return
        item = files[0]
        try:
            text = bytes(item["content"]).decode("utf-8")
        except UnicodeDecodeError:
            self.message.value = error_html(f"XYZ file {item.get('name', '')!r}: not UTF-8 text")
            return
        self.load_xyz_text(text, os.path.splitext(item.get("name", "uploaded"))[0])

    @_shows_errors
    def load_xyz_text(self, text: str, name: str = "pasted") -> Dimer | None:
        """Read a dimer from XYZ text with the form's fragment, charge and spin fields."""
        self._text_source, self._text_name = text, name
        return self._reload()

    def _fragment_a(self) -> list[int] | None:
        text = self.fragment_a.value.strip()
        if not text:
            return None
        return [int(x) for x in parse_grid(text, "fragment A")]

    def _dimer_multiplicity(self) -> int | None:
        text = self.dimer_mult.value.strip()
        if not text:
            return None
        try:
            return int(text)
        except ValueError:
            raise InputError(f"dimer_multiplicity: {text!r} is not an integer (leave empty for high spin)") from None

    @_shows_errors
    def _reload(self) -> Dimer | None:
        if getattr(self, "_loading", False):
            return None
        kwargs = {"fragment_a": self._fragment_a(), "charges": tuple(w.value for w in self.charges),
                  "multiplicities": tuple(w.value for w in self.mults),
                  "dimer_multiplicity": self._dimer_multiplicity()}
        if self._text_source:
            dimer = Dimer.from_xyz_string(self._text_source, name=self._text_name, **kwargs)
        else:
            if kwargs["fragment_a"] is None:
                kwargs.pop("fragment_a")
            dimer = load_demo(self.demo.value, **kwargs)
        self._set_dimer(dimer)
        return dimer

    def _set_dimer(self, dimer: Dimer) -> None:
        self.dimer = dimer
        self.message.value = ""
        opts = {f: [(f"{i} · {dimer.symbols[i]} · fragment {f}", i) for i in idx]
                for f, idx in (("A", dimer.fragment_a), ("B", dimer.fragment_b))}
        self.atom_a.options, self.atom_b.options = opts["A"], opts["B"]
        self.dimer_info.value = note_html(dimer_summary(dimer))
        if getattr(self, "picker", None) is not None:
            self.picker.reset()
        self._guess_seconds()
        self._refresh_preview()

    # ------------------------------------------------------------------ coordinate, grid, estimate
    def _on_coordinate(self, _change) -> None:
        pair = self.coordinate.value == COORDINATES[0]
        self.atom_a.disabled = self.atom_b.disabled = not pair

    def _on_grid_mode(self, _change) -> None:
        if self.grid_mode.value == GRID_MODES[0]:
            self.grid.value = DEFAULT_FACTORS
        elif self.dimer is not None:
            try:
                ref = self.scan_coordinate().value(self.dimer)
                self.grid.value = ", ".join(f"{f * ref:.2f}" for f in parse_grid(DEFAULT_FACTORS))
            except InterkitError as exc:
                self.message.value = error_html(str(exc))

    def scan_coordinate(self):
        """The coordinate chosen in the form (AtomPair or CentreOfMass)."""
        if self.coordinate.value == COORDINATES[1]:
            return CentreOfMass()
        if self.atom_a.value is None or self.atom_b.value is None:
            raise InputError("coordinate: choose one atom in each fragment")
        return AtomPair(int(self.atom_a.value), int(self.atom_b.value))

    def _refresh_preview(self) -> None:
        if self.dimer is None:
            return
        d = self.dimer
        labels = d.fragment_labels
        anchors, label = None, None
        try:
            coord = self.scan_coordinate()
            coord.check(d)
            anchors = np.stack(coord.anchors(d))
            label = f"{coord.value(d):.3f} Å"
        except InterkitError:
            pass
        self.preview.set_frames([scene_from_arrays(d.symbols, labels, d.coordinates, anchors, label=label)])
        self.update_estimate()

    def _level_list(self) -> list[str]:
        return [t.strip() for t in self.levels.value.split(",") if t.strip()]

    def _guess_seconds(self) -> None:
        if self.dimer is not None:
            self.seconds_per_calc.value = rough_seconds_per_calculation(self.dimer.natoms, self._level_list())

    def n_calculations(self) -> int:
        """Calculations the form's scan needs, counted from its plan
        (``plan_scan(spec, check=False).jobs``) when a dimer is loaded: energies (levels
        × points × 3 with counterpoise, plus the monomers in their own basis), the
        displaced points of numerical forces and one SAPT0 job per point. Without a
        dimer, the rule of :func:`count_calculations`."""
        return sum(self.calculation_counts().values())

    def calculation_counts(self) -> dict[str, int]:
        """The planned calculations by kind: ``energy`` (with analytic gradients when
        forces are on), ``displaced`` (numerical-force points) and ``sapt0``."""
        n_points = len(parse_grid(self.grid.value, self.grid_mode.value.split()[0]))
        n_levels = len(self._level_list())
        if not n_levels:
            raise InputError("levels: no level of theory given")
        if self.dimer is None:
            return {"energy": count_calculations(n_levels, n_points, bool(self.counterpoise.value)),
                    "displaced": 0, "sapt0": 0}
        from ..model.job import DECOMPOSITION_ROLE
        from ..run.plan import plan_scan

        plan = plan_scan(self.build_spec(), check=False)
        displaced = {key for roles in plan.table.values() for role, key in roles.items()
                     if role.endswith(("_plus", "_minus"))}
        sapt = {key for key, job in plan.jobs.items() if DECOMPOSITION_ROLE in job.outputs}
        return {"energy": len(plan.jobs) - len(displaced | sapt), "displaced": len(displaced - sapt),
                "sapt0": len(sapt)}

    def update_estimate(self) -> None:
        """Refresh the cost estimate shown before running."""
        try:
            counts = self.calculation_counts()
            n = sum(counts.values())
        except InterkitError as exc:
            self.estimate.value = error_html(str(exc))
            return
        n_points = len(parse_grid(self.grid.value))
        n_levels = len(self._level_list())
        per = 3 if self.counterpoise.value else 1
        wall = n * self.seconds_per_calc.value / max(1, self.workers.value)
        extras = []
        if self.forces.value:
            wall *= 1.6  # analytic gradients: about 1.5x an energy scan for DFT (benchmarks/forces_cost.py)
            extras.append(f"{counts['displaced']} of them displaced points for numerical forces"
                          if counts["displaced"] else "with gradients")
        if counts["sapt0"]:
            extras.append(f"{counts['sapt0']} of them SAPT0")
        if self.dispersion.value.strip():
            extras.append("every dispersion scheme on the same SCFs")
        detail = f" ({', '.join(extras)})" if extras else ""
        memory = ""
        if self.dimer is not None:
            try:
                from ..run.feasibility import check_feasibility

                spec = self.build_spec()
                peak = max(c["peak_memory_mb"] for c in check_feasibility(spec)["levels"].values())
                memory = f"<br>largest calculation about {peak:.0f} MB (limit {spec.memory_limit_mb:g} MB)"
            except InterkitError as exc:
                self.estimate.value = error_html(str(exc))
                return
        self.estimate.value = (
            f'<div><b>{n}</b> calculations{detail}: {n_levels} level(s) × {n_points} points × {per} '
            "+ the monomers in their own basis" + (" + displaced points" if counts["displaced"] else "")
            + (" + SAPT0" if counts["sapt0"] else "")
            + f"<br>about {_duration(wall)} with {self.workers.value} worker(s) "
            f"(rough: {self.seconds_per_calc.value:g} s per calculation){memory}</div>")

    def build_spec(self) -> ScanSpec:
        """The ScanSpec the form describes (raises InterkitError on bad input)."""
        if self.dimer is None:
            raise InputError("dimer: load a bundled dimer, an XYZ file or pasted XYZ first")
        grid = parse_grid(self.grid.value, self.grid_mode.value.split()[0])
        kwargs = {"factors": grid} if self.grid_mode.value == GRID_MODES[0] else {"distances": grid}
        settings = {"density_fitting": bool(self.scf_fitting.value), "frozen_core": bool(self.frozen_core.value),
                    "correlation_fitting": bool(self.correlation_fitting.value),
                    "grid_level": int(self.grid_level.value), "grid_pruning": self.grid_pruning.value,
                    "jk_auxbasis": self.jk_auxbasis.value.strip() or None,
                    "ri_auxbasis": self.ri_auxbasis.value.strip() or None}
        levels = [parse_level(text, **settings) for text in self._level_list()]
        return ScanSpec(dimer=self.dimer, coordinate=self.scan_coordinate(), levels=levels,
                        memory_limit_mb=float(self.memory_limit.value),
                        counterpoise=bool(self.counterpoise.value), forces=bool(self.forces.value),
                        decomposition="sapt0" if self.decomposition.value else None,
                        dispersion=[t.strip() for t in self.dispersion.value.split(",") if t.strip()] or None,
                        name=self.dimer.name, **kwargs)
