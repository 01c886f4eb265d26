"""Clicking atoms and drawing the deformation density in a real headless Chromium, offline,
in Voilà and in JupyterLab (every request that does not go to 127.0.0.1 is aborted).

Screenshots go to ``test-artifacts/`` (git-ignored), on success as well as on failure.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest

pytestmark = pytest.mark.browser

# the server, driver and screenshot helpers of the other browser tests (and their
# `page` fixture: a fresh Chromium profile with every non-local request aborted)
from test_browser import (  # noqa: E402
    _drawn_fraction,
    _free_port,
    _shot,
    page,  # noqa: E402,F401
)

NOTEBOOK = """\
import os
import interkit as ik
import interkit.widgets
lau = ik.widgets.ScanLauncher(executor="serial")
ex = ik.widgets.ScanExplorer(os.environ["INTERKIT_DENSITY_SCAN"], cache=os.environ["INTERKIT_DENSITY_CACHE"])
ex.density.show.value = True
import ipywidgets
ipywidgets.VBox([lau, ex])
"""


@pytest.fixture(scope="module")
def served_folder(tmp_path_factory):
    """A folder with the test notebook and an env for its kernel (a scan with stored densities)."""
    import nbformat

    import interkit as ik

    folder = tmp_path_factory.mktemp("atoms")
    cache = folder / "cache"
    spec = ik.ScanSpec(dimer=ik.load_demo("water_methanol"), coordinate=ik.AtomPair(1, 3),
                       factors=[1.0, 1.3], levels=["hf/sto-3g"], keep_densities=True)
    ik.save_scan(ik.run_scan(spec, executor="serial", cache=cache, progress=False), folder / "dens.nc")
    nb = nbformat.v4.new_notebook(cells=[nbformat.v4.new_code_cell(NOTEBOOK)],
                                  metadata={"kernelspec": {"name": "python3", "language": "python",
                                                           "display_name": "Python 3"}})
    nbformat.write(nb, folder / "atoms.ipynb")
    env = dict(os.environ, INTERKIT_DENSITY_SCAN=str(folder / "dens.nc"), INTERKIT_DENSITY_CACHE=str(cache),
               JUPYTER_CONFIG_DIR=str(folder / "jupyter-config"), OMP_NUM_THREADS="1")
    return folder, env


def _serve(args, folder, env, name):
    port = _free_port()
    log = open(folder / f"{name}.log", "w")
    proc = subprocess.Popen([sys.executable, "-m", *args, f"--port={port}"], cwd=folder, env=env,
                            stdout=log, stderr=subprocess.STDOUT)
    base = f"http://127.0.0.1:{port}"
    deadline = time.time() + 90
    while True:
        try:
            urllib.request.urlopen(base + "/", timeout=2)
            return proc, log, base
        except OSError:
            if time.time() > deadline or proc.poll() is not None:
                proc.kill()
                pytest.fail(f"{name} did not start: {(folder / f'{name}.log').read_text()[-2000:]}")
            time.sleep(0.3)


def _stop(proc, log):
    proc.terminate()
    try:
        proc.wait(timeout=15)
    except subprocess.TimeoutExpired:
        proc.kill()
    log.close()


@pytest.fixture(scope="module", params=["voila", "jupyterlab"])
def notebook_page_url(request, served_folder):
    """(kind, URL) of the test notebook, served by Voilà or by JupyterLab on 127.0.0.1."""
    folder, env = served_folder
    work = folder / request.param
    work.mkdir()
    shutil.copy(folder / "atoms.ipynb", work / "atoms.ipynb")   # JupyterLab autosaves its copy
    if request.param == "voila":
        # Voila's lab page without the icon-font stylesheets its own templates load from a
        # CDN (tests/browser/voila_offline), as in test_browser.py
        templates = str(Path(__file__).parent / "voila_offline")
        env = dict(env, JUPYTER_PATH=os.pathsep.join(filter(None, [templates, env.get("JUPYTER_PATH")])))
        args = ["voila", "--no-browser", "--Voila.ip=127.0.0.1", "--ServerApp.ip=127.0.0.1",
                "--template=offline-lab", str(work)]
        proc, log, base = _serve(args, folder, env, "voila")
        url = base + "/voila/render/atoms.ipynb"
    else:
        args = ["jupyterlab", "--no-browser", "--allow-root", "--ServerApp.ip=127.0.0.1", "--IdentityProvider.token=",
                "--ServerApp.password=", "--ServerApp.disable_check_xsrf=True",
                f"--ServerApp.root_dir={work}", f"--LabApp.workspaces_dir={folder / 'workspaces'}",
                "--LabApp.news_url=", "--LabApp.extension_manager=readonly",
                "--LabApp.check_for_updates_class=jupyterlab.NeverCheckForUpdate"]
        proc, log, base = _serve(args, folder, env, "jupyterlab")
        url = base + "/lab/tree/atoms.ipynb"
    try:
        yield request.param, url
    finally:
        _stop(proc, log)


def _open(pg, kind, url):
    pg.goto(url, timeout=120_000)
    if kind == "jupyterlab":
        pg.wait_for_selector(".jp-Notebook .jp-Cell", timeout=120_000)
        pg.wait_for_function("() => document.querySelector('.jp-Notebook-ExecutionIndicator, "
                               ".jp-Notebook') !== null")
        pg.wait_for_timeout(1500)   # kernel start
        pg.click(".lm-MenuBar-item:has-text('Run')")
        pg.click(".lm-Menu-item:has-text('Run All Cells')")
    pg.wait_for_function("() => Object.values(window.interkitViews || {}).filter(v => v.shown > 0).length >= 2",
                           timeout=180_000)


PICK_JS = """([uid, fragment, avoid]) => {
    /* the atom of `fragment` (global numbers, 0-based) farthest on screen from every other atom */
    const entry = window.interkitViews[uid], v = entry.viewer;
    const scene = window.interkitScenes[uid];
    const screen = scene.xyz.map(c => v.modelToScreen({x: c[0], y: c[1], z: c[2]}));
    let best = null, bestGap = -1;
    scene.index[fragment].forEach(i => {
        if (i === avoid) return;
        let gap = Infinity;
        screen.forEach((p, j) => { if (j !== i) gap = Math.min(gap, Math.hypot(p.x - screen[i].x, p.y - screen[i].y)); });
        if (gap > bestGap) { bestGap = gap; best = i; }
    });
    return {atom: best, x: screen[best].x, y: screen[best].y};   /* page coordinates */
}"""


def _number(option_text: str) -> int:
    return int(re.match(r"\d+", option_text.strip()).group())


def _selected(pg, cls):
    return pg.eval_on_selector(f".interkit-launcher .{cls} select", "el => el.selectedOptions[0].textContent")


def _click_atom(pg, uid, fragment, avoid):
    """Click the most isolated atom of ``fragment`` on screen; return the atom the view reports."""
    pg.eval_on_selector(f"#{uid}", "el => el.scrollIntoView({block: 'center'})")
    pg.wait_for_timeout(300)
    target = pg.evaluate(PICK_JS, [uid, fragment, avoid])
    clicks = pg.evaluate("uid => window.interkitViews[uid].clicks", uid)
    pg.mouse.click(target["x"], target["y"])
    pg.wait_for_function("([uid, n]) => window.interkitViews[uid].clicks > n", arg=[uid, clicks], timeout=20_000)
    return pg.evaluate("uid => window.interkitViews[uid].lastPicked", uid)


def test_clicking_two_atoms_sets_the_contact_and_density_surfaces_draw(notebook_page_url, page):  # noqa: F811
    kind, url = notebook_page_url
    try:
        _open(page, kind, url)
        uid = page.eval_on_selector(".interkit-launcher .interkit-3d", "el => el.id")
        page.evaluate("""uid => { window.interkitScenes = window.interkitScenes || {};
            window.interkitScenes[uid] = window.interkitViews[uid].scene(); }""", uid)
        scene = page.evaluate("uid => window.interkitScenes[uid]", uid)
        before_a, before_b = _selected(page, "interkit-atom-a"), _selected(page, "interkit-atom-b")
        # a click in fragment B first: a visible one-line message, the fields stay
        hit = _click_atom(page, uid, "B", _number(before_b))
        assert hit in scene["index"]["B"]
        page.wait_for_selector(".interkit-launcher .interkit-pick-note[data-problem='true']", timeout=20_000)
        assert _selected(page, "interkit-atom-a") == before_a
        atom_a = _click_atom(page, uid, "A", _number(before_a))
        assert atom_a in scene["index"]["A"]
        page.wait_for_function("n => parseInt(document.querySelector('.interkit-launcher .interkit-atom-a select')"
                               ".selectedOptions[0].textContent) === n", arg=atom_a, timeout=20_000)
        atom_b = _click_atom(page, uid, "B", _number(before_b))
        assert atom_b in scene["index"]["B"]
        page.wait_for_function("n => parseInt(document.querySelector('.interkit-launcher .interkit-atom-b select')"
                               ".selectedOptions[0].textContent) === n", arg=atom_b, timeout=20_000)
        # the note is its own synced trait: wait for it, not only for the two fields
        expected = f"{scene['symbols'][atom_a]}{atom_a} (A)"
        page.wait_for_function("t => document.querySelector('.interkit-launcher .interkit-pick-note')"
                               ".textContent.includes(t)", arg=expected, timeout=20_000)
        note = page.text_content(".interkit-launcher .interkit-pick-note")
        assert expected in note and "from 0" in note, note
        _shot(page, f"atoms-picked-{kind}.png")
        # the explorer's deformation-density isosurfaces (gain and loss) are drawn
        surf = page.wait_for_selector(".interkit-explorer .interkit-3d[data-surfaces='2']", timeout=60_000)
        surf.scroll_into_view_if_needed()
        canvas = surf.query_selector("canvas")
        with_surfaces = canvas.screenshot()
        assert _drawn_fraction(with_surfaces) > 0.02
        page.click(".interkit-explorer .interkit-density-show input")
        page.wait_for_selector(".interkit-explorer .interkit-3d[data-surfaces='0']", timeout=30_000)
        page.wait_for_timeout(300)
        assert canvas.screenshot() != with_surfaces, "switching the surfaces off changed nothing"
        page.click(".interkit-explorer .interkit-density-show input")
        page.wait_for_selector(".interkit-explorer .interkit-3d[data-surfaces='2']", timeout=60_000)
        page.wait_for_function("() => document.querySelector('.interkit-density-profile').naturalWidth > 0")
        _shot(page, f"density-surfaces-{kind}.png")
        assert not any("3dmol" in u.lower() for u in page.blocked), page.blocked
    except Exception:
        _shot(page, f"atoms-density-failure-{kind}.png")
        raise
