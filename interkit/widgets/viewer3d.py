"""Offline 3D view of a dimer: an anywidget around the packaged 3Dmol.js.

How it works (the same in JupyterLab and Voilà):

* ``interkit/widgets/static/3Dmol-min.js`` (fetched at install time, never committed)
  is inlined in the widget's ES module (``static/viewer3d.js`` follows it); the module
  runs it once per page, so nothing is loaded from the network.
* Every scan point is a frame; moving to another point sets the ``frame`` trait
  (a few bytes), the viewer keeps its camera.
* Atoms are coloured by element (:data:`~interkit.widgets.style.ELEMENT_COLOURS`),
  their fragment shows as the bond colour and a light halo, and each atom carries a
  label such as ``O0``: element and atom number, **numbered from 0 as in the API**.
* Clicks on atoms come back to Python in ``picked`` (the last two atom numbers, 0-based)
  when ``pickable`` is on: the launcher chooses its contact this way.
* ``volume`` (cube text) draws two isosurfaces at ± ``isovalue`` (gain and loss of
  charge); the page reports how many it drew in ``surfaces``.
* Without the library file the view shows a visible message instead of a blank box.
"""

from __future__ import annotations

import functools
import itertools
import json
from pathlib import Path

import anywidget
import ipywidgets as widgets
import numpy as np
import traitlets

from .style import (
    ARROW_COLOUR,
    BACKGROUND_3D,
    ELEMENT_COLOURS,
    FRAGMENT_COLOURS,
    GAIN_COLOUR,
    LOSS_COLOUR,
    NUMBERING_NOTE,
    OTHER_ELEMENT_COLOUR,
    PICK_COLOUR,
    SCAN_LINE_COLOUR,
)

STATIC = Path(__file__).resolve().parent / "static"
LIBRARY_PATH = STATIC / "3Dmol-min.js"
MODULE_PATH = STATIC / "viewer3d.js"
MISSING_MESSAGE = (
    "3D view unavailable: the 3Dmol.js library file is not installed "
    "(expected interkit/widgets/static/3Dmol-min.js). Run "
    "<code>make interkit/widgets/static/3Dmol-min.js</code> or "
    "<code>python -m interkit.widgets.fetch_3dmol</code> once, then re-run this cell."
)
#: caption under every view
CAPTION = f"Labels: element and atom number ({NUMBERING_NOTE}); colours by element, halo by fragment."

_ids = itertools.count(1)


def library_available() -> bool:
    """True when the offline copy of 3Dmol.js is installed."""
    return LIBRARY_PATH.is_file() and LIBRARY_PATH.stat().st_size > 100_000


@functools.lru_cache(maxsize=2)
def _module_text(library_mtime: float | None) -> str:
    library = LIBRARY_PATH.read_text(encoding="utf-8") if library_mtime is not None else None
    return f"const LIB = {json.dumps(library)};\n" + MODULE_PATH.read_text(encoding="utf-8")


def module_text() -> str:
    """The widget's ES module: the library text (or null) and the view code."""
    return _module_text(LIBRARY_PATH.stat().st_mtime if library_available() else None)


def scene_from_arrays(symbols, fragment, coordinates, anchors=None, arrows=None,
                      label: str | None = None) -> dict:
    """A JSON-ready scene: one XYZ block per fragment, the atoms, the scan line and arrows.

    Parameters
    ----------
    symbols, fragment : sequence of str
        Element and fragment label ("A"/"B") of every atom (atom numbers from 0).
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
    frags = [str(f) for f in fragment]
    blocks, index = {}, {}
    for frag in ("A", "B"):
        idx = [i for i, f in enumerate(frags) if f == frag]
        lines = [str(len(idx)), f"fragment {frag}"]
        lines += [f"{symbols[i]} {xyz[i, 0]:.6f} {xyz[i, 1]:.6f} {xyz[i, 2]:.6f}" for i in idx]
        blocks[frag] = "\n".join(lines) + "\n"
        index[frag] = idx
    scene = {"A": blocks["A"], "B": blocks["B"], "index": index, "symbols": [str(s) for s in symbols],
             "fragment": frags, "xyz": xyz.round(5).tolist(), "line": None, "arrows": [], "label": label}
    if anchors is not None:
        a = np.asarray(anchors, dtype=float)
        scene["line"] = [a[0].round(5).tolist(), a[1].round(5).tolist()]
    if arrows:
        scene["arrows"] = [[np.round(s, 5).tolist(), np.round(e, 5).tolist()] for s, e in arrows]
    return scene


def _style() -> dict:
    elements = dict(ELEMENT_COLOURS)
    return {"fragments": FRAGMENT_COLOURS, "line": SCAN_LINE_COLOUR, "arrow": ARROW_COLOUR,
            "background": BACKGROUND_3D, "elements": elements, "other": OTHER_ELEMENT_COLOUR,
            "pick": PICK_COLOUR, "gain": GAIN_COLOUR, "loss": LOSS_COLOUR}


class ViewCanvas(anywidget.AnyWidget):
    """The drawing part of :class:`Molecule3D` (an anywidget; traits sync with the page).

    Attributes
    ----------
    frames : list of dict
        Scenes from :func:`scene_from_arrays`.
    frame : int
        Frame shown.
    picked : list of int
        The last two clicked atoms (atom numbers from 0, as in the API).
    clicks : int
        Clicks on atoms so far (a new click on the same atom still counts).
    pickable : bool
        Report clicks on atoms.
    volume : dict
        ``{"cube": <cube text>}`` to draw as ± ``isovalue`` isosurfaces, or ``{}``.
    isovalue : float
        Isovalue of the surfaces (electrons/bohr³).
    surfaces : int
        Isosurfaces the page drew (reported by the page).
    status : str
        ``"ready"`` once the page drew the view, ``"library missing"`` without 3Dmol.js.
    """

    @property
    def _esm(self) -> str:
        return module_text()

    uid = traitlets.Unicode("").tag(sync=True)
    width = traitlets.Int(420).tag(sync=True)
    height = traitlets.Int(340).tag(sync=True)
    palette = traitlets.Dict().tag(sync=True)
    caption = traitlets.Unicode(CAPTION).tag(sync=True)
    frames = traitlets.List(traitlets.Dict()).tag(sync=True)
    frame = traitlets.Int(0).tag(sync=True)
    labels = traitlets.Bool(True).tag(sync=True)
    pickable = traitlets.Bool(False).tag(sync=True)
    picked = traitlets.List(traitlets.Int()).tag(sync=True)
    clicks = traitlets.Int(0).tag(sync=True)
    volume = traitlets.Dict().tag(sync=True)
    isovalue = traitlets.Float(0.002).tag(sync=True)
    surfaces = traitlets.Int(0).tag(sync=True)
    status = traitlets.Unicode("").tag(sync=True)


class Molecule3D(widgets.VBox):
    """A 3D view of a dimer with one frame per scan point.

    Parameters
    ----------
    frames : list of dict
        Scenes from :func:`scene_from_arrays`, one per frame.
    frame : int
        The frame shown first; the page exposes it as the ``data-frame`` attribute.
    width, height : int
        Size in pixels.
    pickable : bool
        Report clicked atoms in :attr:`picked` (atom numbers from 0, as in the API).

    Attributes
    ----------
    canvas : ViewCanvas or None
        The anywidget that draws (None when 3Dmol.js is missing).
    note : ipywidgets.HTML
        One-line messages under the view (e.g. from the launcher's contact picking).
    """

    def __init__(self, frames: list[dict], frame: int = 0, width: int = 420, height: int = 340,
                 pickable: bool = False):
        self.div_id = f"interkit-3d-{next(_ids)}"
        self.width, self.height = int(width), int(height)
        self.frames = list(frames)
        self.frame = int(frame)
        self.message = widgets.HTML()
        self.note = widgets.HTML()
        self.note.add_class("interkit-3d-note")
        self.canvas = None
        if library_available():
            self.canvas = ViewCanvas(uid=self.div_id, width=self.width, height=self.height, palette=_style(),
                                     frames=self.frames, frame=self.frame, pickable=bool(pickable))
            children = [self.canvas, self.note]
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
        return self.canvas is not None

    @property
    def picked(self) -> list[int]:
        """The last two clicked atoms (atom numbers from 0, as in the API)."""
        return list(self.canvas.picked) if self.canvas is not None else []

    def show_frame(self, frame: int) -> None:
        """Show frame ``frame`` (a few bytes to the page; the camera stays)."""
        if not 0 <= int(frame) < len(self.frames):
            raise IndexError(f"frame {frame} is outside 0..{len(self.frames) - 1}")
        self.frame = int(frame)
        if self.canvas is not None:
            self.canvas.frame = self.frame

    def set_frames(self, frames: list[dict], frame: int = 0) -> None:
        """Replace every frame (rebuilds the scene, keeps the camera)."""
        self.frames, self.frame = list(frames), int(frame)
        if self.canvas is not None:
            with self.canvas.hold_sync():
                self.canvas.frame = self.frame
                self.canvas.frames = self.frames

    def set_volume(self, cube: str | None, isovalue: float | None = None) -> None:
        """Draw ``cube`` (cube text) as gain/loss isosurfaces at ± ``isovalue``; None clears."""
        if self.canvas is None:
            return
        with self.canvas.hold_sync():
            if isovalue is not None:
                self.canvas.isovalue = float(isovalue)
            self.canvas.volume = {"cube": cube} if cube else {}
