"""Colours and wording shared by the notebook widgets (our own palette)."""

from __future__ import annotations

#: fragment colours in the 3D view: A slate blue, B ochre
FRAGMENT_COLOURS = {"A": "#3d6fb6", "B": "#d08c1f"}
#: the scan coordinate drawn between its anchor points
SCAN_LINE_COLOUR = "#b0247c"
#: force arrows (shown when the Dataset holds ``forces``)
ARROW_COLOUR = "#2f8f4e"
#: 3D background (a very light grey-blue, so drawn pixels are easy to tell apart)
BACKGROUND_3D = "#f4f6f9"
#: energy units offered by the unit selector
DISPLAY_UNITS = ("kcal/mol", "kJ/mol", "eV", "cm-1")
#: status marks in the launcher's per-point table
STATUS_STYLE = {
    "waiting": ("·", "#8b8b8b"),
    "partial": ("◐", "#3d6fb6"),
    "ok": ("●", "#2f8f4e"),
    "retried": ("●", "#c7961c"),
    "spin-contaminated": ("▲", "#c7961c"),
    "failed": ("✕", "#b3261e"),
}


def error_html(message: str) -> str:
    """An inline error box (no traceback) for a user-facing message."""
    import html

    return ('<div class="interkit-error" style="color:#7a1010;background:#fdeceb;'
            'border-left:4px solid #b3261e;padding:6px 10px;white-space:pre-wrap">'
            f"{html.escape(str(message))}</div>")


def note_html(message: str) -> str:
    """A small grey note (escaped)."""
    import html

    return f'<div style="color:#555;font-size:90%">{html.escape(str(message))}</div>'

#: element colours in the 3D view (a CPK-style convention; other elements grey-pink)
ELEMENT_COLOURS = {
    "H": "#e8e8e8", "He": "#d9ffff", "Li": "#b36bd6", "B": "#f5b5b5", "C": "#5a5a5a", "N": "#3050f8",
    "O": "#e02020", "F": "#80d850", "Ne": "#b3e3f5", "Na": "#ab5cf2", "Mg": "#4fc24f", "Al": "#bfa6a6",
    "Si": "#d9b27a", "P": "#ff8000", "S": "#e6c620", "Cl": "#1fb81f", "Ar": "#80d1e3", "K": "#8f40d4",
    "Ca": "#3dcc3d", "Br": "#a62929", "I": "#940094", "Fe": "#e06633", "Zn": "#7d80b0",
}
OTHER_ELEMENT_COLOUR = "#d68fb0"
#: picked atoms (launcher: choosing the contact by clicking)
PICK_COLOUR = "#16a3a3"
#: deformation density: charge gained (Δρ > 0) and lost (Δρ < 0)
GAIN_COLOUR = "#1f6fd1"
LOSS_COLOUR = "#d1492a"
#: numbering of atoms in every human-facing text
NUMBERING_NOTE = "atom numbers from 0, as in the API"
