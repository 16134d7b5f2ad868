"""Pages of the fixture site in a real browser (Debian's Chromium through Playwright).

Each page type (home, model history, release, comparison) is opened from a server on
127.0.0.1; the test waits until every chart has rendered, fails on any console error and
on any request to another host, and compares the full-page screenshot with its baseline.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from tests.conftest import fixed_build_date
from tests.visual.compare import check_image
from tests.visual.conftest import FIXTURE, RELEASES, serve
from topoaudit.report.site import build_site, publish

PAGES = {
    "home": "",
    "history": "meter-failure/",
    "release": "meter-failure/2026.2/",
    "comparison": "meter-failure/compare/2026.1-to-2026.2/",
}


def _build(tmp: Path) -> Path:
    archive = tmp / "archive"
    for release in RELEASES:
        staged = tmp / "bundles" / release
        shutil.copytree(FIXTURE / release, staged)
        publish(staged, archive)
    return build_site(archive, tmp / "site", site_name="Fixture audits")


@pytest.fixture(scope="module")
def site(tmp_path_factory):
    with fixed_build_date():  # restored after the build, whichever test runs next
        return _build(tmp_path_factory.mktemp("browser"))


def _visit(browser, root: Path, path: str) -> tuple[bytes, list[str], list[str], list[str]]:
    server = serve(root)
    base = f"http://127.0.0.1:{server.server_address[1]}/"
    try:
        page = browser.new_page(viewport={"width": 1280, "height": 900})
        errors, foreign = [], []
        page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
        page.on("pageerror", lambda e: errors.append(str(e)))
        page.on("request", lambda r: None if r.url.startswith(base) else foreign.append(r.url))
        page.goto(base + path, wait_until="load")
        figures = page.locator("figure.ta-chart").count()
        if figures:
            page.wait_for_function(
                "() => [...document.querySelectorAll('figure.ta-chart')]"
                ".every(f => f.getAttribute('data-rendered'))",
                timeout=20_000,
            )
        states = page.eval_on_selector_all(
            "figure.ta-chart", "els => els.map(e => e.getAttribute('data-rendered'))"
        )
        page.wait_for_timeout(300)
        shot = page.screenshot(full_page=True, animations="disabled")
        page.close()
        return shot, errors, foreign, states
    finally:
        server.shutdown()
        server.server_close()


@pytest.mark.parametrize("kind", list(PAGES))
def test_page_renders_offline_without_errors_and_matches_its_baseline(site, browser, kind):
    shot, errors, foreign, states = _visit(browser, site, PAGES[kind])
    assert errors == [], f"console errors on the {kind} page: {errors}"
    assert foreign == [], f"requests to other hosts from the {kind} page: {foreign}"
    assert all(s == "yes" for s in states), f"charts not rendered on the {kind} page: {states}"
    if kind == "release":
        assert len(states) >= 5
    check_image("pages", kind, shot)


def test_a_broken_chart_loader_fails_the_page_check(site, browser, tmp_path, monkeypatch):
    monkeypatch.setattr("tests.visual.compare.FAILURES", tmp_path / "failures")
    broken = tmp_path / "site"
    shutil.copytree(site, broken)
    loader = broken / "assets" / "charts.js"
    loader.write_text(
        loader.read_text().replace("window.vegaEmbed(holder", "window.vegaEmbd("), encoding="utf-8"
    )
    from playwright.sync_api import TimeoutError as PageTimeout

    # The charts never render: waiting for them times out (or, were the wait to pass,
    # the console errors and the screenshot comparison fail).
    with pytest.raises((PageTimeout, AssertionError)):
        shot, errors, _, states = _visit(browser, broken, PAGES["release"])
        assert errors == [], errors
        assert all(s == "yes" for s in states), states
        check_image("pages", "release", shot)


def test_pages_work_when_opened_from_disk(site, browser):
    page = browser.new_page(viewport={"width": 1280, "height": 900})
    errors = []
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
    page.goto((site / "meter-failure" / "2026.2" / "index.html").as_uri())
    page.wait_for_function(
        "() => [...document.querySelectorAll('figure.ta-chart')]"
        ".every(f => f.getAttribute('data-rendered') === 'yes')",
        timeout=20_000,
    )
    page.close()
    # mkdocs' search runs in a web worker, which browsers do not start on file:// pages;
    # search is then unavailable, and that is the only error allowed from disk.
    assert [e for e in errors if "search/worker.js" not in e] == []
