"""The study section of the HTML report, and a self-contained report of a whole study.

Same rules as :mod:`interkit.share.report`: one file, figures inline, no scripts, no
network, every text from the file escaped. The section holds the ranking of the methods
against the reference, the statistics by category, the error distribution, the method
x system error map, the per-category bars and the systems without results.
"""

from __future__ import annotations

import json
import os
from datetime import datetime, timezone

import xarray as xr

from ..errors import InputError
from ..fileio import existing_folder
from .report import STYLE, _e, _figure, _num, _table

_RANK_HEADER = ["rank", "method", "points", "MAE", "mean signed", "RMSE", "largest", "where", "MARE / %"]


def _stat_rows(table, with_category: bool = False) -> list[list]:
    rows = []
    for _, r in table.iterrows():
        where = f"{r['max_error_system']} at {r['max_error_distance_angstrom']:.3f} Å"
        row = [str(r["curve"]), str(r["n_points"]), _num(r["mae_kcal_per_mol"]),
               _num(r["mean_signed_error_kcal_per_mol"], "+.3f"), _num(r["rmse_kcal_per_mol"]),
               _num(r["max_error_kcal_per_mol"], "+.3f"), where, _num(r["mean_abs_relative_error_percent"], ".1f")]
        rows.append(([str(r["category"])] if with_category else [str(r["rank"])]) + row)
    return rows


def study_section(tree: xr.DataTree, reference=None, region: str = "all") -> str:
    """HTML of the study section (ranking, statistics by category, three figures)."""
    from ..analysis.study_stats import rank_methods, study_statistics
    from ..plot.study import plot_category_bars, plot_error_distribution, plot_error_map

    parts = ["<h2>Methods compared over the study</h2>"]
    try:
        ranking = rank_methods(tree, reference, region, "curve")
    except InputError as exc:
        return "\n".join(parts + [f'<p class="note">No comparison: {_e(exc)}</p>'])
    ref = ranking.attrs["reference"]
    ref_text = "the study's reference values" if ref == "stored" else ref
    parts.append(f'<p class="note">Errors are method − reference in kcal/mol against {_e(ref_text)} '
                 f"(region: {_e(region)}); a negative signed error means the method binds more strongly. "
                 "Relative errors only where |reference| ≥ "
                 f"{ranking.attrs['relative_floor_kcal_per_mol']:g} kcal/mol.</p>")
    parts.append("<p>Ranking over every compared point (lowest MAE first):</p>")
    parts.append(_table(_RANK_HEADER, _stat_rows(ranking), text=(1, 7)))
    eq = rank_methods(tree, reference, region, "equilibrium")
    parts.append("<p>At each system's equilibrium point only:</p>")
    parts.append(_table(_RANK_HEADER, _stat_rows(eq), text=(1, 7)))
    stats = study_statistics(tree, reference, region, "curve", by_category=True)
    parts.append("<p>By category (kcal/mol):</p>")
    parts.append(_table(["category"] + _RANK_HEADER[1:], _stat_rows(stats, with_category=True), text=(0, 1, 7)))
    parts.append(_figure(lambda ax: plot_error_distribution(tree, reference, region, "curve", ax=ax),
                         "Signed errors per method: below zero the method overbinds.",
                         "error distribution per method"))
    parts.append(_figure(lambda ax: plot_error_map(tree, reference, region, "equilibrium", ax=ax),
                         "Signed error at the equilibrium point, per system and method.", "method by system error map"))
    parts.append(_figure(lambda ax: plot_category_bars(tree, reference, region, "curve", ax=ax),
                         "Mean absolute error per category and method.", "per-category bars"))
    missing = json.loads(tree.attrs.get("systems_without_results_json", "{}"))
    if missing:
        parts.append("<p>Systems without results:</p>")
        parts.append(_table(["system", "reason"], [[k, v] for k, v in missing.items()], text=(0, 1)))
    return "\n".join(parts)


def _systems_table(tree: xr.DataTree) -> str:
    rows = []
    for k, name in enumerate(tree["system"].values):
        rows.append([str(name), str(tree["category"].values[k]) or "-", str(int(tree["n_points"].values[k])),
                     _num(tree["equilibrium_distance"].values[k]), str(int(tree["n_failed_points"].values[k]))])
    return _table(["system", "category", "points", "equilibrium R / Å", "failed points"], rows, text=(0, 1))


def render_study_report(tree: xr.DataTree, reference=None, region: str = "all") -> str:
    """The HTML text of the report of a study (a complete document)."""
    from ..data.schema import CAUTION
    from ..data.study_tree import validate_study
    from ..version import __version__

    validate_study(tree)
    name = str(tree.attrs.get("study_name", "study"))
    curves = [str(c) for c in tree["curve"].values]
    made = datetime.now(timezone.utc).isoformat(timespec="seconds")
    sections = [
        f"<h1>{_e(name)}</h1>",
        f'<p class="subtitle">study of {tree.sizes["system"]} systems · {len(curves)} method(s): '
        f"{_e(', '.join(curves))}</p>",
        f'<div class="caution"><b>Caution.</b> {_e(CAUTION)}</div>',
        "<h2>Systems</h2>", _systems_table(tree),
        study_section(tree, reference, region),
        "<h2>Provenance</h2>",
        f"<p>interkit {_e(tree.attrs.get('interkit_version', ''))}, pyscf {_e(tree.attrs.get('pyscf_version', ''))}, "
        f"created {_e(tree.attrs.get('created', ''))}; each system's spec and store keys are in its node "
        "(<code>interkit study verify</code> recomputes sampled points).</p>",
    ]
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<title>{_e(name)} – interkit study report</title>"
            f"<style>{STYLE}</style></head><body>" + "\n".join(sections)
            + f"<footer>Report written by interkit {_e(__version__)} on {_e(made)} from the saved study; "
            "no number in it was recomputed.</footer></body></html>\n")


def write_study_report(tree, path: str | os.PathLike, reference=None, region: str = "all") -> str:
    """Write the self-contained HTML report of a study (tree or ``.nc`` path); returns the path."""
    path = os.fspath(path)
    existing_folder(path, "path")
    if not isinstance(tree, xr.DataTree):
        from ..data.study_tree import open_study

        tree = open_study(tree)
    text = render_study_report(tree, reference, region)
    from ..fileio import atomic_write_text

    return atomic_write_text(path, text)
