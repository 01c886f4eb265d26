"""The static HTML report in a real headless Chromium, opened from file:// with every
network request blocked: its figures decode and show, and a label carrying a script
stays text (no dialog, no script element)."""

from __future__ import annotations

import contextlib
from pathlib import Path

import pytest
from conftest import hf_dimer
from offline_chromium import LOCAL_FILE, offline_context, playwright_api

pytestmark = pytest.mark.browser

ROOT = Path(__file__).resolve().parents[2]
ARTIFACTS = ROOT / "test-artifacts"
HOSTILE = "water <script>alert(1)</script> dimer"

playwright_api()


@pytest.fixture(scope="module")
def report_file(tmp_path_factory):
    import interkit as ik
    from interkit.share.report import write_report

    dimer = hf_dimer()
    spec = ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(1, 2), factors=[0.95, 1.0, 1.1, 1.3],
                       levels=["hf/sto-3g", "hf/def2-svp"], forces=True, name=HOSTILE)
    ds = ik.run_scan(spec, executor="serial", progress=False)
    path = tmp_path_factory.mktemp("report") / "report.html"
    write_report(ds, path)
    return path


def test_report_renders_offline_with_figures_and_inert_labels(report_file, tmp_path):
    requests, dialogs = [], []
    with offline_context(tmp_path / "profile", LOCAL_FILE, {"width": 1200, "height": 1600}) as (ctx, blocked):
        page = ctx.new_page()
        page.on("request", lambda req: requests.append(req.url))
        page.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))
        page.goto(report_file.as_uri(), wait_until="load")
        images = page.eval_on_selector_all(
            "img", """els => els.map(e => ({complete: e.complete, w: e.naturalWidth, h: e.naturalHeight,
                                           shown: e.getBoundingClientRect().width,
                                           src: e.src.slice(0, 22)}))""")
        h1 = page.inner_text("h1")
        body = page.inner_text("body")
        n_scripts = page.eval_on_selector_all("script", "els => els.length")
        try:
            assert len(images) >= 3, images                 # curves, forces, force split
            for img in images:
                assert img["src"] == "data:image/png;base64,", img
                assert img["complete"] and img["w"] > 0 and img["h"] > 0, f"an image did not decode: {img}"
                assert img["shown"] > 100, f"an image is not visible on the page: {img}"
            assert HOSTILE in h1, h1                         # shown as text, tags and all
            assert "Provenance" in body and "Caution." in body
            assert n_scripts == 0
            assert dialogs == [], dialogs
            assert blocked == [], f"the report tried to reach the network: {blocked}"
            assert all(u.startswith(LOCAL_FILE) for u in requests), requests
        except AssertionError:
            ARTIFACTS.mkdir(exist_ok=True)
            with contextlib.suppress(Exception):
                page.screenshot(path=str(ARTIFACTS / "report-failure.png"), full_page=True)
            raise
