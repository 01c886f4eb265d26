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
