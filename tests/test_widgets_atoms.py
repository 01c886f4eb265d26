"""The clickable offline 3D view (anywidget), contact picking and the deformation-density panel."""

from __future__ import annotations

import re

import pytest
from conftest import require

import interkit as ik
import interkit.widgets as W
from interkit.data.cube import read_cube
from interkit.model.demo import load_demo
from interkit.widgets import viewer3d

CDN_HOSTS = ("cdn", "jsdelivr", "unpkg", "cdnjs", "googleapis", "3dmol.org", "3dmol.csb.pitt.edu")


@pytest.fixture(scope="module")
def stored_scan(tmp_path_factory):
    """hf/sto-3g water–methanol, two points, densities kept in a store (about 1 s)."""
    cache = tmp_path_factory.mktemp("store") / "cache"
    spec = ik.ScanSpec(dimer=load_demo("water_methanol"), coordinate=ik.CentreOfMass(), factors=[1.0, 1.4],
                       levels=["hf/sto-3g"], keep_densities=True)
    return ik.run_scan(spec, executor="serial", cache=cache, progress=False), cache


def test_3d_module_loads_nothing_from_the_network():
    require(viewer3d.library_available(), "3Dmol.js is not installed (make interkit/widgets/static/3Dmol-min.js)")
    module = viewer3d.module_text()
    # the library arrives inline; our own view code names no URL at all
    code = viewer3d.MODULE_PATH.read_text()
    assert "http" not in code and "import " not in code.replace("import)", "")
    urls = re.findall(r"https?://[^\s\"'`)]+", module)
    assert not [u for u in urls if any(h in u.lower() for h in CDN_HOSTS)], urls
    assert not re.search(r"""(src=|import\s*\(|from\s+)["']https?:""", module)
    assert module.startswith("const LIB = \"") and "createViewer" in module


def test_view_labels_atoms_with_element_and_0_based_number():
    scene = viewer3d.scene_from_arrays(["O", "H", "H", "N"], ["A", "A", "A", "B"],
                                       [[0, 0, 0], [0.9, 0, 0], [0, 0.9, 0], [3, 0, 0]])
    assert scene["index"] == {"A": [0, 1, 2], "B": [3]} and scene["symbols"][3] == "N"
    view = viewer3d.Molecule3D([scene])
    require(view.canvas is not None, "3Dmol.js is not installed (make install)")
    # labels are "element + 0-based atom number" ("O0", "N3"), and the caption says so
    assert "scene.symbols[i] + i" in viewer3d.MODULE_PATH.read_text()
    assert "atom numbers from 0, as in the API" in view.canvas.caption
    # CPK-style element colours (trade convention: O red, N blue, H white-grey)
    assert view.canvas.palette["elements"]["O"].lower().startswith("#e0")
    assert view.canvas.palette["elements"]["N"] == "#3050f8"


def test_two_clicks_set_the_launcher_contact_and_a_wrong_fragment_says_so():
    lau = W.ScanLauncher(executor="serial")
    require(lau.preview.canvas is not None, "3Dmol.js is not installed (make install)")
    assert lau.dimer.fragment_a == (0, 1, 2) and lau.preview.canvas.pickable
    before = (lau.atom_a.value, lau.atom_b.value)
    lau.preview.canvas.picked = [4]               # fragment B first: refused in one line
    note = lau.preview.note.value
    assert 'data-problem="true"' in note and "H4 is in fragment B" in note
    assert (lau.atom_a.value, lau.atom_b.value) == before
    lau.preview.canvas.picked = [4, 1]            # the page sends the last two clicks
    assert lau.atom_a.value == 1 and "now click an atom of fragment B" in lau.preview.note.value
    lau.preview.canvas.picked = [1, 1]            # A again while B is expected
    assert 'data-problem="true"' in lau.preview.note.value
    lau.preview.canvas.picked = [1, 6]
    assert (lau.atom_a.value, lau.atom_b.value) == (1, 6)
    assert lau.scan_coordinate() == ik.AtomPair(1, 6)
    assert "H1 (A) – H6 (B)" in lau.preview.note.value and "from 0" in lau.preview.note.value


def test_density_panel_draws_a_stored_point(stored_scan):
    ds, cache = stored_scan
    ex = W.ScanExplorer(ds, cache=cache)
    require(ex.view3d.canvas is not None, "3Dmol.js is not installed (make install)")
    assert ex.view3d.canvas.volume == {}
    ex.density.show.value = True
    cube = read_cube(ex.view3d.canvas.volume["cube"])
    assert cube.atomic_numbers.size == 9 and cube.values.min() < 0 < cube.values.max()
    assert ex.density.profile.value[:4] == b"\x89PNG" and "point 0" in ex.density.status.value
    ex.density.isovalue.value = 0.01
    assert ex.view3d.canvas.isovalue == pytest.approx(0.01)
    old = ex.view3d.canvas.volume["cube"]
    ex.slider.value = 1                            # the surfaces follow the point
    assert ex.view3d.canvas.volume["cube"] != old
    ex.density.show.value = False
    assert ex.view3d.canvas.volume == {}


def test_density_panel_offers_one_point_when_nothing_is_stored(tmp_path):
    cache = tmp_path / "cache"
    spec = ik.ScanSpec(dimer=load_demo("water_methanol"), coordinate=ik.CentreOfMass(), factors=[1.0, 1.4],
                       levels=["hf/sto-3g"])
    ds = ik.run_scan(spec, executor="serial", cache=cache, progress=False)
    ex = W.ScanExplorer(ds, cache=cache)
    ex.density.show.value = True
    assert "compute_point_densities" in ex.density.status.value
    assert ex.density.compute_button.layout.display is None      # the button shows
    ex.density.compute_button.click()
    if ex.view3d.canvas is not None:
        assert "cube" in ex.view3d.canvas.volume
    assert ex.density.densities is not None and ex.density.densities.point == 0
