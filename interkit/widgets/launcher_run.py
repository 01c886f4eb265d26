"""Running the launcher's scan: start, cancel, wait, and the progress, live curve and result views.

:class:`RunPanel` is a mixin of :class:`.launcher.ScanLauncher`; it uses the form's
``build_spec`` and the run widgets the launcher builds (``run_button``, ``progress``, ...).
"""

from __future__ import annotations

import html
import os
import time

import ipywidgets as widgets
import numpy as np

from ..errors import InputError
from .curves import CurvePanel
from .explorer import ScanExplorer
from .launcher_form import _shows_errors
from .runner import BackgroundScan
from .style import STATUS_STYLE, error_html, note_html


def point_status_html(level_labels, distances_angstrom, states) -> str:
    """The per-point status table: one row per level, one column per distance (Å)."""
    head = "".join(f'<th style="padding:0 6px;font-weight:normal">{d:.2f}</th>' for d in distances_angstrom)
    rows = []
    for li, label in enumerate(level_labels):
        cells = []
        for pi in range(len(distances_angstrom)):
            mark, colour = STATUS_STYLE[states[li, pi]]
            cells.append(f'<td title="{states[li, pi]}" data-state="{states[li, pi]}" '
                         f'style="color:{colour};text-align:center">{mark}</td>')
        rows.append(f"<tr><td>{html.escape(label)}</td>{''.join(cells)}</tr>")
    legend = " ".join(f'<span style="color:{c}">{m}</span> {k}' for k, (m, c) in STATUS_STYLE.items())
    return (f'<table style="font-size:90%"><tr><th>point / Å</th>{head}</tr>'
            f'{"".join(rows)}</table><div style="font-size:80%;color:#555">{legend}</div>')


class RunPanel:
    """The launcher's run controls and outputs (a mixin: needs the launcher's widgets)."""

    def _build_run_controls(self) -> None:
        """Run/cancel buttons and the progress, per-point, live-curve and result outputs."""
        self.run_button = widgets.Button(description="Run scan", button_style="primary", icon="play")
        self.run_button.add_class("interkit-run")
        self.cancel_button = widgets.Button(description="Cancel", icon="stop", disabled=True)
        self.cancel_button.add_class("interkit-cancel")
        self.progress = widgets.IntProgress(value=0, min=0, max=1, description="progress")
        self.progress.add_class("interkit-progress")
        self.progress_label = widgets.HTML()
        self.progress_label.add_class("interkit-progress-label")
        self.point_table = widgets.HTML()
        self.point_table.add_class("interkit-point-status")
        self.live = widgets.VBox()
        self.result_box = widgets.VBox()
        self.result_box.add_class("interkit-result")
        self.spec_path = widgets.Text(value="scan.toml", description="spec file",
                                      layout=widgets.Layout(width="300px"))
        self.save_spec_button = widgets.Button(description="Save spec", icon="save",
                                               tooltip="write the form's spec as a TOML file for interkit scan")
        self.save_spec_button.add_class("interkit-save-spec")
        self.save_spec_button.on_click(lambda _b: self.save_spec())

    @_shows_errors
    def save_spec(self, path=None) -> str:
        """Write the spec the form describes as a TOML spec file (``path``, default the
        "spec file" field); ``interkit scan FILE -o scan.nc`` runs the same calculations."""
        from ..share.spec_writer import write_spec

        target = os.fspath(path) if path is not None else self.spec_path.value.strip()
        if not target:
            raise InputError("spec file: give a file name ending in .toml")
        written = write_spec(self.build_spec(), target)
        self.message.value = note_html(f"spec written to {written}; run it with: "
                                       f"interkit scan {written} -o scan.nc")
        return written

    @_shows_errors
    def run(self, wait: bool = False) -> BackgroundScan | None:
        """Start the scan in a background thread (``wait=True`` blocks until it ends)."""
        if self.scan is not None and self.scan.running:
            raise InputError("run: a scan is already running; cancel it or wait")
        spec = self.build_spec()
        self.message.value = ""
        executor = "serial" if self.workers.value == 1 else self.executor
        self.result, self.explorer = None, None
        self.result_box.children = []
        self.scan = BackgroundScan(spec, executor=executor, cache=self.cache.value.strip() or None,
                                   workers=self.workers.value, on_progress=self._on_progress,
                                   on_done=self._on_done)
        self.progress.max, self.progress.value = self.scan.total, self.scan.done
        self.progress.bar_style = ""
        self.progress_label.value = f"0 of {self.scan.total} calculations"
        self.run_button.disabled, self.cancel_button.disabled = True, False
        self._show_points()
        self.scan.start()
        if wait:
            self.scan.wait()
        return self.scan

    def cancel(self) -> None:
        """Stop after the running calculations; what finished is kept in the result."""
        if self.scan is not None and self.scan.running:
            self.scan.cancel()
            self.cancel_button.disabled = True
            self.progress_label.value = "cancelling: waiting for the running calculations…"

    def wait(self, timeout: float | None = None) -> bool:
        """Block until the running scan ends; True if it has ended."""
        return True if self.scan is None else self.scan.wait(timeout)

    def _on_progress(self, scan: BackgroundScan) -> None:
        self.progress.value = scan.done
        self.progress_label.value = f"{scan.done} of {scan.total} calculations"
        self._show_points()
        now = time.perf_counter()
        if now - self._last_live > 0.5:
            self._last_live = now
            self._show_live(scan.partial())

    def _on_done(self, scan: BackgroundScan) -> None:
        self.run_button.disabled, self.cancel_button.disabled = False, True
        if scan.error is not None:
            self.progress.bar_style = "danger"
            self.message.value = error_html(scan.error)
            self.progress_label.value = "stopped by an error"
            return
        self.result = scan.result
        cancelled = scan.cancel_event.is_set()
        self.progress.value = scan.done
        self.progress.bar_style = "warning" if cancelled else "success"
        seconds = (scan.finished or 0) - (scan.started or 0)
        self.progress_label.value = (f"{'cancelled' if cancelled else 'finished'} after {seconds:.1f} s · "
                                     f"{scan.done} of {scan.total} calculations")
        self._show_points()
        self.live.children = []
        self.explorer = ScanExplorer(self.result, cache=self.cache.value.strip() or None)
        self.result_box.children = [widgets.HTML("<b>Result</b> (also in <code>launcher.result</code>)"),
                                    self.explorer]

    def _show_points(self) -> None:
        if self.scan is None:
            return
        self.point_table.value = point_status_html([level.label for level in self.scan.spec.levels],
                                                   [p.distance for p in self.scan.spec.points],
                                                   self.scan.point_states())

    def _show_live(self, ds) -> None:
        panel = CurvePanel(ds, width=5.0, height=3.2, interactive=False)   # redrawn per result: an image
        if not np.isfinite(ds["e_int"].values).any() and not np.isfinite(ds["e_int_nocp"].values).any():
            return
        panel.redraw([str(x) for x in panel.ds["level"].values], "kcal/mol", False, False, 0)
        panel.image.add_class("interkit-live-curve")
        self.live.children = [widgets.HTML("<i>curve so far</i>"), panel.image]
