"""Notebook widgets: explore a scan Dataset and launch scans from Jupyter or Voilà.

Presentation only: the widgets read the scan Dataset and call :func:`interkit.run_scan`;
nothing here computes energies. 3D views use an offline copy of 3Dmol.js
(``python -m interkit.widgets.fetch_3dmol`` at install time).

Examples
--------
>>> import interkit as ik
>>> import interkit.widgets
>>> ik.widgets.ScanExplorer(ik.open_scan("scan.nc"))       # doctest: +SKIP
>>> launcher = ik.widgets.ScanLauncher()                   # doctest: +SKIP
>>> ik.widgets.CorrectionComparison("scan.nc")             # doctest: +SKIP
"""

from __future__ import annotations

from .comparison import CorrectionComparison
from .explorer import ScanExplorer
from .launcher import ScanLauncher
from .map_explorer import MapExplorer
from .study import StudyExplorer
from .viewer3d import Molecule3D, library_available

__all__ = ["CorrectionComparison", "MapExplorer", "Molecule3D", "ScanExplorer", "ScanLauncher", "StudyExplorer", "library_available"]
