"""The explorer's headline numbers: per level R_min, well depth, force zero and BSSE at
the minimum, from :func:`interkit.analysis.minima.headline_table` (the functions
``interkit show`` prints from)."""

from __future__ import annotations

import html

import numpy as np

from ..model.level_names import display_label
from ..plot.style import level_colour
from ..units import convert_energy, unit_text


def _cell(value: float, digits: int, key: str) -> str:
    text = f"{value:.{digits}f}" if np.isfinite(value) else "—"
    return f'<td data-key="{key}" style="padding:1px 10px;text-align:right">{text}</td>'


def headline_html(rows: list[dict], unit: str, all_levels: list[str], shown: list[str]) -> str:
    """An HTML table of the headline rows of the ``shown`` levels, energies in ``unit``."""
    digits = 1 if unit == "cm-1" else (4 if unit == "eV" else 3)
    u = html.escape(unit_text(unit))
    head = ("<tr><th style='text-align:left;padding:1px 10px'>level</th>"
            "<th style='padding:1px 10px'>R<sub>min</sub> / Å</th>"
            f"<th style='padding:1px 10px'>well depth / {u}</th>"
            "<th style='padding:1px 10px'>force zero / Å</th>"
            f"<th style='padding:1px 10px'>BSSE at R<sub>min</sub> / {u}</th>"
            "<th style='text-align:left;padding:1px 10px'>note</th></tr>")
    body = []
    for row in rows:
        level = row["level"]
        if level not in shown:
            continue
        k = all_levels.index(level)
        notes = [] if row["interior"] else ["minimum at the edge of the grid"]
        if row["failed_points"]:
            notes.append(f"{row['failed_points']} failed point(s)")
        if row["variable"] == "e_int_nocp":
            notes.append("uncorrected (no counterpoise)")
        body.append(
            f'<tr data-level="{html.escape(level)}">'
            f'<td style="padding:1px 10px;color:{level_colour(k)};font-weight:600">'
            f"{html.escape(display_label(level))}</td>"
            + _cell(row["r_min_angstrom"], 3, "r_min")
            + _cell(convert_energy(row["well_depth_kcal_per_mol"], "kcal/mol", unit), digits, "well_depth")
            + _cell(row["force_zero_angstrom"], 3, "force_zero")
            + _cell(convert_energy(row["bsse_at_minimum_kcal_per_mol"], "kcal/mol", unit), digits, "bsse")
            + f'<td style="padding:1px 10px;color:#555">{html.escape("; ".join(notes))}</td></tr>')
    return (f'<table class="interkit-headline-table" style="font-size:92%">{head}{"".join(body)}</table>'
            '<div style="font-size:85%;color:#555">minimum, force zero and BSSE from a natural cubic '
            "spline through the computed points (drawn as the curve; the star marks the minimum)</div>")
