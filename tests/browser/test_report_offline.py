"""The static HTML report in a real headless Chromium, opened from file:// with every
network request blocked: its figures decode and show, and a label carrying a script
stays text (no dialog, no script element)."""

from __future__ import annotations

import contextlib
import os
from pathlib import Path

import pytest
from conftest import hf_dimer

pytestmark = pytest.mark.browser

CHROMIUM = "/usr/bin/chromium"
ROOT = Path(__file__).resolve().parents[2]
ARTIFACTS = ROOT / "test-artifacts"
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync"]
#: what a self-contained report may load: itself and its inline data
ALLOWED = ("file://", "data:", "about:")
HOSTILE = "water <script>alert(1)</script> dimer"

if not os.path.exists(CHROMIUM):
    pytest.skip(f"{CHROMIUM} is missing (Debian package chromium)", allow_module_level=True)
playwright_api = pytest.importorskip("playwright.sync_api")


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
    requests, blocked, dialogs = [], [], []
    with playwright_api.sync_playwright() as p:
        ctx = p.chromium.launch_persistent_context(
            str(tmp_path / "profile"), executable_path=CHROMIUM, headless=True, args=CHROMIUM_ARGS,
            viewport={"width": 1200, "height": 1600})
        try:
            page = ctx.new_page()

            def route(r):
                if r.request.url.startswith(ALLOWED):
                    r.continue_()
                else:
                    blocked.append(r.request.url)
                    r.abort()

            ctx.route("**/*", route)
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
                assert all(u.startswith(ALLOWED) for u in requests), requests
            except AssertionError:
                ARTIFACTS.mkdir(exist_ok=True)
                with contextlib.suppress(Exception):
                    page.screenshot(path=str(ARTIFACTS / "report-failure.png"), full_page=True)
                raise
        finally:
            ctx.close()
