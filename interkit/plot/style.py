"""One palette and one set of axis labels for every interkit plot and widget.

Level colours are the Okabe–Ito colour-blind-safe set (M. Okabe and K. Ito, "Color
Universal Design (CUD): how to make figures and presentations that are friendly to
colorblind people", 2008; also B. Wong, Nat. Methods 8, 441 (2011)), without its yellow
(too pale on white). Seven colours alone repeat at the eighth curve, so each level also
gets a line style and a marker, chosen so that 14 levels have distinct
(colour, line style) pairs and neighbours in the legend differ in marker as well.
"""

from __future__ import annotations

from ..model.level_names import display_label
from ..units import unit_text

#: Okabe–Ito colours by name (hex sRGB)
OKABE_ITO = {"blue": "#0072B2", "vermillion": "#D55E00", "bluish green": "#009E73",
             "reddish purple": "#CC79A7", "orange": "#E69F00", "sky blue": "#56B4E9",
             "black": "#000000", "yellow": "#F0E442"}
#: level colours, in the order levels get them
LEVEL_COLOURS = tuple(OKABE_ITO[name] for name in ("blue", "vermillion", "bluish green", "reddish purple",
                                                   "orange", "sky blue", "black"))
#: line style of the levels: solid for the first seven, then a long dash-dot
LEVEL_LINESTYLES = ("solid", (0, (7, 2, 1.5, 2)))
#: point markers of the levels (six, so they shift against the seven colours)
LEVEL_MARKERS = ("o", "s", "^", "D", "v", "P")
#: line styles of the extra curves drawn beside a level's own (same colour)
UNCORRECTED_LINESTYLE = (0, (3, 2))
BSSE_LINESTYLE = (0, (1, 1.5))
#: the interpolant through a curve's points, and the marked minimum
MINIMUM_MARKER = "*"


def level_style(k: int) -> dict:
    """Matplotlib keywords (``color``, ``ls``, ``marker``) of the ``k``-th level (0-based)."""
    n = len(LEVEL_COLOURS)
    return {"color": LEVEL_COLOURS[k % n], "ls": LEVEL_LINESTYLES[(k // n) % len(LEVEL_LINESTYLES)],
            "marker": LEVEL_MARKERS[k % len(LEVEL_MARKERS)]}


def level_colour(k: int) -> str:
    """Colour of the ``k``-th level (0-based)."""
    return LEVEL_COLOURS[k % len(LEVEL_COLOURS)]


def energy_axis_label(unit: str, symbol: str = "E_int") -> str:
    """Energy axis label as the trade writes it: ``'E_int / kJ mol⁻¹'`` (mathtext subscript)."""
    head, _, sub = symbol.partition("_")
    text = f"${head}_{{\\mathrm{{{sub}}}}}$" if sub else symbol
    return f"{text} / {unit_text(unit)}"


def force_axis_label(force_unit: str) -> str:
    """Force axis label: ``'F_R / kJ mol⁻¹ Å⁻¹ (+ repulsive)'``."""
    return f"$F_{{R}}$ on B / {unit_text(force_unit)}  (+ repulsive)"


def legend_label(level_label: str, suffix: str = "") -> str:
    """A legend entry for a level (trade spelling, ``$`` escaped for matplotlib)."""
    text = display_label(level_label) + (f", {suffix}" if suffix else "")
    return text.replace("\\$", "$").replace("$", "\\$")
