"""Text helpers of the scan launcher's form: choices, parsing, cost guess and wording.

Nothing here holds widgets; :mod:`.launcher` builds the form from these pieces.
"""

from __future__ import annotations

import functools
import re

from ..errors import InputError, InterkitError
from .style import error_html

SOURCES = ("bundled dimer", "XYZ file", "pasted XYZ")
COORDINATES = ("atom pair", "centre of mass")
GRID_MODES = ("factors", "distances (Å)")
DEFAULT_FACTORS = "0.9, 1.0, 1.1, 1.25, 1.5, 2.0"
#: very rough seconds per calculation for a 9-atom dimer on one core, by basis family
_BASE_SECONDS = {"sto-3g": 0.15, "svp": 0.6, "6-31g": 0.5, "tzvp": 4.0, "cc-pvdz": 1.0,
                 "cc-pvtz": 8.0, "qzvp": 30.0}
_METHOD_FACTOR = {"hf": 1.0, "mp2": 3.0, "ccsd(t)": 60.0}


def rough_seconds_per_calculation(natoms: int, levels) -> float:
    """A crude guess of the seconds one calculation takes (shown as 'rough')."""
    worst = 0.0
    for text in levels:
        method, _, basis = str(text).lower().partition("/")
        base = next((v for k, v in _BASE_SECONDS.items() if k in basis), 2.0)
        factor = _METHOD_FACTOR.get(method.split("-")[0], 2.0)
        if "aug-" in basis:
            base *= 3.0
        worst = max(worst, base * factor * (max(natoms, 2) / 9.0) ** 3)
    return round(max(worst, 0.05), 2)


def parse_grid(text: str, name: str = "grid") -> list[float]:
    """Numbers separated by commas or spaces; raise InputError naming a bad entry."""
    items = [t for t in re.split(r"[,\s;]+", str(text).strip()) if t]
    if not items:
        raise InputError(f"{name}: no values given")
    out = []
    for k, item in enumerate(items):
        try:
            out.append(float(item))
        except ValueError:
            raise InputError(f"{name}[{k}]: {item!r} is not a number") from None
    return out


def _formula(symbols) -> str:
    """Hill-order formula, e.g. ['O', 'H', 'H'] -> 'H2O'."""
    counts = {s: list(symbols).count(s) for s in set(symbols)}
    order = (["C", "H"] if "C" in counts else []) + sorted(s for s in counts if s not in ("C", "H") or "C" not in counts)
    return "".join(f"{s}{counts[s] if counts[s] > 1 else ''}" for s in order)


def _duration(seconds: float) -> str:
    if seconds < 90:
        return f"{seconds:.0f} s"
    if seconds < 5400:
        return f"{seconds / 60:.0f} min"
    return f"{seconds / 3600:.1f} h"


def _shows_errors(method):
    """Run a handler; an InterkitError becomes a message in the form, never a traceback."""
    @functools.wraps(method)
    def wrapper(self, *args, **kwargs):
        try:
            return method(self, *args, **kwargs)
        except InterkitError as exc:
            self.message.value = error_html(str(exc))
            return None
    return wrapper


def dimer_summary(dimer) -> str:
    """One line on the dimer's fragments, charges and spins."""
    formula = {f: _formula([dimer.symbols[i] for i in idx])
               for f, idx in (("A", dimer.fragment_a), ("B", dimer.fragment_b))}
    return (f"{dimer.name}: {dimer.natoms} atoms · A {len(dimer.fragment_a)} atoms ({formula['A']}, charge "
            f"{dimer.charges[0]}, 2S+1 = {dimer.multiplicities[0]}) · B {len(dimer.fragment_b)} atoms "
            f"({formula['B']}, charge {dimer.charges[1]}, 2S+1 = {dimer.multiplicities[1]}) · dimer "
            f"2S+1 = {dimer.spin + 1}" + (" (broken symmetry)" if dimer.broken_symmetry else
                                           " (high spin)" if sum(dimer.spins) else ""))
