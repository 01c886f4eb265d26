"""Offline 3D view of a dimer: 3Dmol.js inlined once per page, scenes sent as data.

How it works (the same in JupyterLab and Voilà):

* ``interkit/widgets/static/3Dmol-min.js`` (fetched at install time, never committed)
  is placed, once per kernel, into one :class:`ipywidgets.Output` as an HTML output
  with an inline ``<script>``. Every view shows that same widget; the script defines
  ``window.$3Dmol`` on its first run and does nothing on later runs, so the library
  arrives once per page and nothing is loaded from the network.
* A view is an ``Output`` holding a ``<div>`` and a script that creates a 3Dmol
  viewer and registers it in ``window.interkitViews[<id>]``.
* Moving to another scan point replaces the outputs of a small hidden command
  ``Output`` with a script that calls ``interkitViews[<id>].show(scene)``: the viewer
  keeps its camera, only the models and shapes are replaced (a few milliseconds).
* Without the library file the view shows a visible message instead of a blank box.
"""

from __future__ import annotations

import itertools
import json
from pathlib import Path

import ipywidgets as widgets
import numpy as np

from .style import ARROW_COLOUR, BACKGROUND_3D, FRAGMENT_COLOURS, SCAN_LINE_COLOUR

LIBRARY_PATH = Path(__file__).resolve().parent / "static" / "3Dmol-min.js"
MISSING_MESSAGE = (
    "3D view unavailable: the 3Dmol.js library file is not installed "
    "(expected interkit/widgets/static/3Dmol-min.js). Run "
    "<code>make interkit/widgets/static/3Dmol-min.js</code> or "
    "<code>python -m interkit.widgets.fetch_3dmol</code> once, then re-run this cell."
)

_library_output: widgets.Output | None = None
_ids = itertools.count(1)


def library_available() -> bool:
    """True when the offline copy of 3Dmol.js is installed."""
    return LIBRARY_PATH.is_file() and LIBRARY_PATH.stat().st_size > 100_000


def _html_output(html: str) -> dict:
    return {"output_type": "display_data", "data": {"text/html": html}, "metadata": {}}


def library_widget() -> widgets.Output:
    """The (per-kernel) Output widget that carries 3Dmol.js inline to the page."""
    global _library_output
    if _library_output is None:
        out = widgets.Output(layout=widgets.Layout(display="none"))
        if library_available():
            code = LIBRARY_PATH.read_text(encoding="utf-8")
            # hide AMD/CommonJS globals so the bundle attaches itself to window
            script = (
                "<script>\nif (typeof window.$3Dmol === 'undefined') {\n"
                "(function (define, exports, module) {\n" + code +
                "\n}).call(window, undefined, undefined, undefined);\n}\n</script>"
            )
            out.outputs = (_html_output(script),)
        _library_output = out
    return _library_output


def scene_from_arrays(symbols, fragment, coordinates, anchors=None, arrows=None,
                      label: str | None = None) -> dict:
    """A JSON-ready scene: one XYZ block per fragment, the scan line and optional arrows.

    Parameters
    ----------
    symbols, fragment : sequence of str
        Element and fragment label ("A"/"B") of every atom.
    coordinates : array-like, shape (natoms, 3)
        Positions in angstrom.
    anchors : array-like, shape (2, 3), optional
        End points of the scan coordinate (angstrom).
    arrows : sequence of ((x, y, z), (x, y, z)), optional
        Start and end of arrows to draw (e.g. forces), angstrom.
    label : str, optional
        Text shown at the middle of the scan line (include the unit).
    """
    xyz = np.asarray(coordinates, dtype=float)
    blocks = {}
    for frag in ("A", "B"):
        idx = [i for i, f in enumerate(fragment) if str(f) == frag]
        lines = [str(len(idx)), f"fragment {frag}"]
        lines += [f"{symbols[i]} {xyz[i, 0]:.6f} {xyz[i, 1]:.6f} {xyz[i, 2]:.6f}" for i in idx]
        blocks[frag] = "\n".join(lines) + "\n"
    scene = {"A": blocks["A"], "B": blocks["B"], "line": None, "arrows": [], "label": label}
    if anchors is not None:
        a = np.asarray(anchors, dtype=float)
        scene["line"] = [a[0].round(5).tolist(), a[1].round(5).tolist()]
    if arrows:
        scene["arrows"] = [[np.round(s, 5).tolist(), np.round(e, 5).tolist()] for s, e in arrows]
    return scene


_VIEW_JS = """
<div id="%(div)s" class="interkit-3d" style="position: relative; width: %(width)dpx; height: %(height)dpx;"></div>
<script>
(function () {
  var uid = "%(div)s";
  var style = %(style)s;
  window.interkitViews = window.interkitViews || {};
  window.interkitPending = window.interkitPending || {};
  function pt(c) { return {x: c[0], y: c[1], z: c[2]}; }
  function build(v, frames) {
    /* every scan point is a frame: switching points is setFrame + one render */
    v.removeAllModels(); v.removeAllShapes(); v.removeAllLabels();
    ["A", "B"].forEach(function (f) {
      var m = v.addModelsAsFrames(frames.map(function (s) { return s[f]; }).join(""), "xyz");
      m.setStyle({}, {stick: {radius: 0.14, color: style.colours[f]},
                      sphere: {scale: 0.24, color: style.colours[f]}});
    });
    frames.forEach(function (scene, k) {
      if (scene.line) {
        var p = pt(scene.line[0]), q = pt(scene.line[1]);
        v.addCylinder({start: p, end: q, radius: 0.05, color: style.line, dashed: true,
                       fromCap: 1, toCap: 1, frame: k});
        [p, q].forEach(function (c) { v.addSphere({center: c, radius: 0.11, color: style.line, frame: k}); });
        if (scene.label) {
          v.addLabel(scene.label, {position: {x: (p.x + q.x) / 2, y: (p.y + q.y) / 2, z: (p.z + q.z) / 2},
                     fontSize: 12, fontColor: "#1d1d1d", backgroundColor: "#ffffff",
                     backgroundOpacity: 0.75, showBackground: true, inFront: true, frame: k}, undefined, true);
        }
      }
      (scene.arrows || []).forEach(function (a) {
        v.addArrow({start: pt(a[0]), end: pt(a[1]), radius: 0.06, color: style.arrow, frame: k});
      });
    });
  }
  function create(tries) {
    var el = document.getElementById(uid);
    if (!el) { if (tries < 100) setTimeout(function () { create(tries + 1); }, 30); return; }
    if (typeof window.$3Dmol === "undefined") {
      if (tries < 100) { setTimeout(function () { create(tries + 1); }, 30); return; }
      el.innerHTML = '<p style="color:#8a1c1c;background:#fff1e6;padding:6px">' +
                     '3D view unavailable: the 3Dmol.js library did not load in this page.</p>';
      return;
    }
    var v = window.$3Dmol.createViewer(el, {backgroundColor: style.background});
    var entry = {viewer: v, frame: null, shown: 0, zoomed: false};
    entry.go = function (frame) {
      var done = function () {
        v.render();
        entry.frame = frame; entry.shown += 1;
        el.setAttribute("data-frame", String(frame));
      };
      var r = v.setFrame(frame);
      if (r && r.then) { r.then(done); } else { done(); }
    };
    entry.load = function (frames, frame) {
      build(v, frames);
      if (!entry.zoomed) { v.setFrame(frame); v.zoomTo(); entry.zoomed = true; }
      entry.go(frame);
    };
    window.interkitViews[uid] = entry;
    var pending = window.interkitPending[uid];
    entry.load(pending ? pending.frames : %(frames)s, pending ? pending.frame : %(frame)s);
  }
  create(0);
})();
</script>
"""

_COMMAND_JS = """<script>
/* update %(seq)d */
(function () {
  var uid = "%(div)s", frames = %(frames)s, frame = %(frame)s;
  window.interkitPending = window.interkitPending || {};
  var pending = window.interkitPending[uid] || {frames: null};
  if (frames !== null) { pending.frames = frames; }
  pending.frame = frame;
  window.interkitPending[uid] = pending;
  var entry = (window.interkitViews || {})[uid];
  if (entry) { if (frames !== null) { entry.load(frames, frame); } else { entry.go(frame); } }
})();
</script>"""


class Molecule3D(widgets.VBox):
    """A 3D view of a dimer with one frame per scan point.

    Switching frames sends a few bytes (``setFrame`` in the page); the viewer keeps its
    camera. Replacing the frames (e.g. other force arrows) rebuilds the scene.

    Parameters
    ----------
    frames : list of dict
        Scenes from :func:`scene_from_arrays`, one per frame.
    frame : int
        The frame shown first; the page exposes it as the ``data-frame`` attribute.
    width, height : int
        Size in pixels.
    """

    def __init__(self, frames: list[dict], frame: int = 0, width: int = 420, height: int = 340):
        self.div_id = f"interkit-3d-{next(_ids)}"
        self.width, self.height = int(width), int(height)
        self.frames = list(frames)
        self.frame = int(frame)
        self._seq = 0
        self._view = widgets.Output(layout=widgets.Layout(width=f"{self.width + 4}px",
                                                          height=f"{self.height + 4}px"))
        self._command = widgets.Output(layout=widgets.Layout(display="none"))
        self.message = widgets.HTML()
        if library_available():
            self._view.outputs = (_html_output(self._view_html()),)
            children = [library_widget(), self._view, self._command]
        else:
            self.message.value = (f'<div class="interkit-3d-missing" style="width:{self.width}px;'
                                  'color:#8a1c1c;background:#fff1e6;border:1px solid #d9a47a;'
                                  f'padding:8px">{MISSING_MESSAGE}</div>')
            children = [self.message]
        super().__init__(children=children)
        self.add_class("interkit-3d-box")

    @property
    def available(self) -> bool:
        """True when the view can draw (the library file is installed)."""
        return library_available()

    def _view_html(self) -> str:
        style = {"colours": FRAGMENT_COLOURS, "line": SCAN_LINE_COLOUR, "arrow": ARROW_COLOUR,
                 "background": BACKGROUND_3D}
        return _VIEW_JS % {"div": self.div_id, "width": self.width, "height": self.height,
                           "style": json.dumps(style), "frames": json.dumps(self.frames),
                           "frame": self.frame}

    def _push(self, frames: list[dict] | None) -> None:
        if not library_available():
            return
        self._seq += 1
        js = _COMMAND_JS % {"div": self.div_id, "frames": json.dumps(frames), "frame": self.frame,
                            "seq": self._seq}
        self._command.outputs = (_html_output(js),)

    def show_frame(self, frame: int) -> None:
        """Show frame ``frame`` (a few bytes to the page; the camera stays)."""
        if not 0 <= int(frame) < len(self.frames):
            raise IndexError(f"frame {frame} is outside 0..{len(self.frames) - 1}")
        self.frame = int(frame)
        self._push(None)

    def set_frames(self, frames: list[dict], frame: int = 0) -> None:
        """Replace every frame (rebuilds the scene, keeps the camera)."""
        self.frames, self.frame = list(frames), int(frame)
        self._push(self.frames)
