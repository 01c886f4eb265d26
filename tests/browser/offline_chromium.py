"""Headless Chromium for the browser tests, offline: one set of flags, and every request
outside the allowed URL prefixes aborted and recorded, so a test can assert that none was
attempted."""

from __future__ import annotations

import contextlib
import os

from conftest import require

CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync"]
#: pages served by a loopback server (Voilà on 127.0.0.1)
LOOPBACK = ("http://127.0.0.1", "ws://127.0.0.1", "data:", "blob:", "about:")
#: a self-contained file: itself and its inline data
LOCAL_FILE = ("file://", "data:", "about:")


def playwright_api():
    """``playwright.sync_api`` once Chromium and Playwright are known to be there (skip
    locally, fail under CI=true, see :func:`conftest.require`)."""
    require(os.path.exists(CHROMIUM), f"{CHROMIUM} is missing (Debian package chromium)")
    return require("playwright.sync_api", "the browser tests need Playwright (pip install -e .[test])")


@contextlib.contextmanager
def offline_context(profile_dir, allowed: tuple[str, ...], viewport: dict):
    """A persistent Chromium context whose requests outside ``allowed`` are aborted.

    Yields ``(context, blocked)``: ``blocked`` lists every URL that was attempted and
    refused (HTTP(S) requests through the context's route, WebSockets by their URL).
    """
    api = playwright_api()
    blocked: list[str] = []

    def route(r):
        if r.request.url.startswith(allowed):
            r.continue_()
        else:
            blocked.append(r.request.url)
            r.abort()

    def watch_sockets(page):
        page.on("websocket", lambda ws: None if ws.url.startswith(allowed) else blocked.append(ws.url))

    with api.sync_playwright() as p:
        ctx = p.chromium.launch_persistent_context(
            str(profile_dir), executable_path=CHROMIUM, headless=True, args=CHROMIUM_ARGS, viewport=viewport)
        try:
            ctx.route("**/*", route)
            ctx.on("page", watch_sockets)
            for page in ctx.pages:
                watch_sockets(page)
            yield ctx, blocked
        finally:
            ctx.close()
