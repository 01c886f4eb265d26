"""interkit: counterpoise-corrected interaction-energy scans of molecular dimers.

Public API::

    import interkit as ik
    dimer = ik.Dimer.from_xyz("demo_systems/water_methanol.xyz")
    spec = ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(1, 5),
                       factors=[0.9, 1.0, 1.2, 1.5, 2.0], levels=["hf/def2-svp"])
    ds = ik.run_scan(spec)                      # keeps a store in .interkit-cache (cache=None: none)
    ik.save_scan(ds, "scan.nc")
    ik.verify_scan("scan.nc", sample=3)        # recompute 3 points from scratch, compare
    ik.write_report(ds, "report.html")         # self-contained HTML, opens offline
    ik.export_scan(ds, "scan.csv")             # tidy CSV; .json: QCSchema molecules
    ik.write_spec(spec, "scan.toml")           # a spec file for `interkit scan` (same calculations)

Computed interaction energies are model results with method and basis-set errors;
validate them before using them in design decisions.
"""

from __future__ import annotations

from . import analysis
from .analysis import comparison, fits
from .analysis.refine import refine_minimum
from .analysis.site_fits import fit_site_site
from .analysis.study_stats import rank_methods, study_errors, study_statistics
from .data.grid import cell_dimer, open_grid, save_grid
from .data.rigid_trajectory import open_trajectory, save_trajectory, trajectory_dimer
from .data.schema import open_scan, save_scan, spec_of, validate
from .data.study_tree import open_study, save_study
from .errors import (
    ConvergenceError,
    InputError,
    InterkitError,
    InterkitWarning,
    NotAvailableError,
    ResourceError,
    StoreError,
)
from .model.composite import CompositeLevel, parse_level
from .model.coordinates import AtomPair, CentreOfMass, Frames, ScanCoordinate, Vector
from .model.demo import demo_catalog, list_demos, load_demo
from .model.geometry import Dimer
from .model.levels import LevelOfTheory
from .model.orientation import Offset, OrientationGrid, Rotation, Separation
from .model.orientation_sampling import OrientationSample
from .model.s22 import s22_study
from .model.spec import ScanSpec
from .model.spec_file import load_spec_toml
from .model.study import ReferenceValue, Study, StudySystem
from .model.study_file import load_study_toml
from .model.study_folder import read_study_folder
from .run.densities import DensitiesNotStoredError, compute_point_densities, load_point_densities
from .run.feasibility import check_feasibility
from .run.optimise import optimise_dimer
from .run.orientation import run_orientation_scan
from .run.scan import run_scan
from .run.store import DEFAULT_STORE
from .run.study import run_study
from .share.export import export_scan
from .share.grid_export import export_grid
from .share.grid_replay import rerun_grid, verify_grid
from .share.grid_report import write_grid_report
from .share.methods import methods_bibtex, methods_text
from .share.replay import rerun_scan, verify_scan
from .share.report import write_report
from .share.spec_writer import write_spec
from .share.study_replay import rerun_study, verify_study
from .share.study_report import write_study_report
from .units import convert_energy
from .version import __version__

__all__ = [
    "AtomPair", "CentreOfMass", "analysis", "check_feasibility", "comparison", "ConvergenceError", "DEFAULT_STORE", "fits", "Dimer", "Frames", "InputError",
    "CompositeLevel", "InterkitError", "InterkitWarning", "LevelOfTheory", "NotAvailableError", "ResourceError",
    "ScanCoordinate", "ScanSpec", "StoreError", "Vector", "__version__", "convert_energy",
    "demo_catalog", "export_scan", "list_demos", "load_demo", "load_spec_toml", "methods_bibtex", "methods_text",
    "open_scan", "parse_level", "rerun_scan", "run_scan", "save_scan", "spec_of", "validate", "verify_scan",
    "write_report", "write_spec", "compute_point_densities", "DensitiesNotStoredError", "load_point_densities",
    # studies: many dimers, one comparison
    "ReferenceValue", "Study", "StudySystem", "load_study_toml", "open_study", "rank_methods", "read_study_folder",
    "rerun_study", "run_study", "s22_study", "save_study", "study_errors", "study_statistics", "verify_study",
    "write_study_report",
    # orientations: rotations, offsets, two-axis grids and orientation samples
    "Offset", "OrientationGrid", "OrientationSample", "Rotation", "Separation", "cell_dimer", "open_grid",
    "run_orientation_scan", "save_grid", "export_grid", "rerun_grid", "verify_grid", "write_grid_report",
    # the bound geometry and site-site fits
    "fit_site_site", "open_trajectory", "optimise_dimer", "refine_minimum", "save_trajectory", "trajectory_dimer",
]


#: stages imported on first use: plotting pulls in matplotlib, the notebook layer ipywidgets
_ON_FIRST_USE = ("plot", "widgets")


def __getattr__(name: str):
    if name in _ON_FIRST_USE:
        import importlib

        return importlib.import_module(f".{name}", __name__)
    raise AttributeError(f"module 'interkit' has no attribute {name!r}")
