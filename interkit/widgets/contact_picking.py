"""Choosing the launcher's contact by clicking two atoms in its 3D preview.

The first click must hit an atom of fragment A, the second one of fragment B; the
launcher's ``atom in A`` / ``atom in B`` fields follow. A click in the wrong fragment
leaves the fields as they are and says so in one line under the view. Atom numbers
are 0-based, as in the API.
"""

from __future__ import annotations

import html

from .style import NUMBERING_NOTE, PICK_COLOUR

#: the launcher's coordinate choice that uses two atoms
ATOM_PAIR = "atom pair"


def _note(text: str, problem: bool = False) -> str:
    colour = "#8a1c1c" if problem else "#1d4f4f"
    return (f'<div class="interkit-pick-note" data-problem="{str(problem).lower()}" '
            f'style="font-size:88%;color:{colour};border-left:3px solid {PICK_COLOUR};padding:2px 8px">'
            f"{html.escape(text)}</div>")


class ContactPicker:
    """Turns clicks on the launcher's preview (``picked``) into its contact fields.

    Parameters
    ----------
    launcher : ScanLauncher
        Needs ``preview`` (a :class:`~interkit.widgets.viewer3d.Molecule3D`), ``dimer``,
        ``coordinate``, ``atom_a`` and ``atom_b``.
    """

    def __init__(self, launcher):
        self.launcher = launcher
        self.expect = "A"
        view = launcher.preview
        if view.canvas is not None:
            view.canvas.pickable = True
            view.canvas.observe(self._on_picked, "picked")
        self.reset()

    def reset(self) -> None:
        """Start again with a click in fragment A (e.g. after a new dimer)."""
        self.expect = "A"
        self.launcher.preview.note.value = _note(
            f"Click an atom of fragment A, then one of fragment B, to choose the contact ({NUMBERING_NOTE}).")

    def _on_picked(self, change) -> None:
        if change["new"]:
            self.click(int(change["new"][-1]))

    def click(self, atom: int) -> None:
        """Handle a click on atom ``atom`` (0-based)."""
        lau = self.launcher
        d = lau.dimer
        if d is None or not 0 <= atom < len(d.symbols):
            return
        frag = "A" if atom in d.fragment_a else "B"
        name = f"{d.symbols[atom]}{atom}"
        if frag != self.expect:
            lau.preview.note.value = _note(
                f"{name} is in fragment {frag}: click an atom of fragment {self.expect} "
                f"({'first' if self.expect == 'A' else 'second'}).", problem=True)
            return
        if lau.coordinate.value != ATOM_PAIR:
            lau.coordinate.value = ATOM_PAIR
        if frag == "A":
            lau.atom_a.value = atom
            self.expect = "B"
            lau.preview.note.value = _note(f"atom in A: {name}; now click an atom of fragment B.")
        else:
            lau.atom_b.value = atom
            self.expect = "A"
            a = lau.atom_a.value
            lau.preview.note.value = _note(
                f"contact: {d.symbols[a]}{a} (A) – {name} (B) ({NUMBERING_NOTE}); click in A to choose again.")
