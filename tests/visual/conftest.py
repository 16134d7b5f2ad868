"""Fixtures of the visual suite: the committed fixture analyses and their pages."""

from __future__ import annotations

import functools
import http.server
import json
import os
import threading
from pathlib import Path

import pytest

from topoaudit.report.page import build_page

FIXTURE = Path(__file__).parent / "fixture"
RELEASES = ("2026.1", "2026.2")
#: the browser ``make test`` found or installed (.ci/browser.py); Debian's by default
CHROMIUM = os.environ.get("TOPOAUDIT_CHROMIUM", "/usr/bin/chromium")
#: without the background-networking flags Chromium keeps trying hosts this network
#: refuses; the font and colour flags keep screenshots the same from run to run
CHROMIUM_ARGS = [
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--no-first-run",
    "--font-render-hinting=none",
    "--force-color-profile=srgb",
]


class _Quiet(http.server.SimpleHTTPRequestHandler):
    def log_message(self, *args):
        pass


class _QuietServer(http.server.ThreadingHTTPServer):
    def handle_error(self, request, client_address):
        pass  # a browser closing a connection early is not a test failure


def serve(root: Path) -> http.server.ThreadingHTTPServer:
    """Serve ``root`` on a free port of 127.0.0.1 from a background thread."""
    handler = functools.partial(_Quiet, directory=str(root))
    server = _QuietServer(("127.0.0.1", 0), handler)
    threading.Thread(target=server.serve_forever, daemon=True).start()
    return server


@pytest.fixture(scope="module")
def browser():
    """Chromium through Playwright: the one ``make test`` found or installed."""
    if not Path(CHROMIUM).exists():
        pytest.fail(
            f"{CHROMIUM} is missing: run make test, which finds or installs Chromium, or set "
            "TOPOAUDIT_CHROMIUM to a Chromium binary"
        )
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        yield b
        b.close()


@pytest.fixture(scope="session")
def fixture_pages():
    """release -> Page built from the committed fixture bundle."""
    out = {}
    for release in RELEASES:
        a = json.loads((FIXTURE / release / "analysis.json").read_text(encoding="utf-8"))
        g = json.loads((FIXTURE / release / "graph.json").read_text(encoding="utf-8"))
        out[release] = build_page(a, g)
    return out
