"""A site built from data with hostile column names and category values, in a browser.

The invented meter data (1,500 rows) gets column names, a category value, score and
target column names and a site name made of script, HTML, Markdown and template syntax.
A real audit of two releases is published and built into a site, and every page is
opened in Debian's Chromium through Playwright from a server on 127.0.0.1. Every graph
node and chart mark is hovered so that its tooltip opens, every option of the colour
selector is picked, and the site's search is run for a word of the hostile strings. No
dialog may open, no console error appear and no request leave 127.0.0.1; every chart must
render; and the hostile strings must show literally in the text of the pages.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from tests.conftest import audit_and_publish, fixed_build_date
from tests.visual.conftest import serve
from topoaudit.demo import make_meters
from topoaudit.report.site import build_site

SCRIPT = "<script>alert(1)</script>"
IMG = '"><img src=x onerror=alert(1)>'
LINK = "[click](javascript:alert(1))"
#: demo column -> hostile name
RENAMED = {
    "soil_temp_c": SCRIPT,
    "daily_flow_l": IMG,
    "meter_age_years": LINK,
    "battery_v": "**bold** `tick` a|b",
    "hardness_mg_l": "{{ jinja }} {: onclick=alert(1) }",
    "pressure_bar": "pressure's <!-- & <b>bar</b>",
    "score_2026_1": "score <svg onload=alert(1)> 2026.1",
    "score_2026_2": "score `2026.2` | [x](javascript:alert(1))",
    "failed_90d": "failed {% raw %} <i>90d</i>",
    "meter_id": "meter </script> id",
}
#: hostile values of the categorical column "district"
HARD_WATER, HIGH_PRESSURE = SCRIPT, IMG
SITE_NAME = f"Audits {SCRIPT} {IMG} {{{{ jinja }}}}"
#: strings that must show literally on the release pages
SHOWN = [SCRIPT, IMG, LINK, "**bold** `tick` a|b", "{{ jinja }} {: onclick=alert(1) }"]


def _q(text: str) -> str:
    return json.dumps(text)  # a JSON string is a TOML basic string


def _project(folder: Path) -> Path:
    frame = make_meters(1500, random_state=7)
    frame["district"] = np.where(
        frame["hardness_mg_l"] > 175,
        HARD_WATER,
        np.where(frame["pressure_bar"] > 6, HIGH_PRESSURE, "north"),
    )
    frame = frame.rename(columns=RENAMED)
    folder.mkdir(parents=True)
    frame.to_csv(folder / "meters.csv", index=False)
    config = f"""model = "meter-failure"
seed = 7

[data]
path = "meters.csv"
id = {_q(RENAMED["meter_id"])}
target = {_q(RENAMED["failed_90d"])}
exclude = ["mechanism", "material"]

[data.categorical]
district = "onehot"

[[release]]
name = "2026.1"
score = {_q(RENAMED["score_2026_1"])}

[[release]]
name = "2026.2"
score = {_q(RENAMED["score_2026_2"])}

[graph]
filter = "eccentricity"
n_intervals = 12
overlap = 0.3
resamples = 8

[audit]
segments = ["district"]
stability_intervals = [0, 2]
stability_overlaps = [0.0]
bootstrap_resamples = 1
"""
    (folder / "audit.toml").write_text(config, encoding="utf-8")
    return folder / "audit.toml"


@pytest.fixture(scope="module")
def hostile_site(tmp_path_factory):
    with fixed_build_date():
        root = tmp_path_factory.mktemp("hostile")
        _, archive = audit_and_publish(_project(root / "project"), root)
        yield build_site(archive, root / "site", site_name=SITE_NAME)


@pytest.fixture(scope="module")
def served(hostile_site):
    server = serve(hostile_site)
    yield f"http://127.0.0.1:{server.server_address[1]}/"
    server.shutdown()
    server.server_close()


MARKS = (
    "figure.ta-chart .ta-view svg g.mark-symbol path, figure.ta-chart .ta-view svg g.mark-rect path"
)
TOOLTIP = "#vg-tooltip-element"


def _hover_marks(page, limit: int = 40) -> list[str]:
    """Hover over up to ``limit`` marks (spread over all of them); the tooltips seen."""
    seen = []
    marks = page.locator(MARKS)
    n = marks.count()
    for i in sorted({round(k * (n - 1) / max(1, limit - 1)) for k in range(min(n, limit))}):
        mark = marks.nth(i)
        mark.scroll_into_view_if_needed()
        box = mark.bounding_box()
        if not box or box["width"] == 0:
            continue
        x, y = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
        page.mouse.move(x - 1, y)
        page.mouse.move(x, y)
        tip = page.locator(TOOLTIP)
        if tip.count() and tip.is_visible():
            html = tip.inner_html()
            assert "<script" not in html and "<img" not in html and "onerror" not in html
            seen.append(tip.inner_text())
    return seen


def _open(browser, url: str):
    page = browser.new_page(viewport={"width": 1280, "height": 900})
    log = {"dialogs": [], "errors": [], "foreign": []}

    def on_dialog(dialog):
        log["dialogs"].append(f"{dialog.type}: {dialog.message}")
        dialog.dismiss()

    page.on("dialog", on_dialog)
    page.on("console", lambda m: log["errors"].append(m.text) if m.type == "error" else None)
    page.on("pageerror", lambda e: log["errors"].append(str(e)))
    page.on(
        "request",
        lambda r: None if r.url.startswith("http://127.0.0.1:") else log["foreign"].append(r.url),
    )
    page.goto(url, wait_until="load")
    if page.locator("figure.ta-chart").count():
        page.wait_for_function(
            "() => [...document.querySelectorAll('figure.ta-chart')]"
            ".every(f => f.getAttribute('data-rendered'))",
            timeout=20_000,
        )
    return page, log


def _pages(site: Path) -> list[str]:
    out = []
    for path in sorted(site.rglob("*.html")):
        rel = path.relative_to(site).as_posix()
        out.append(rel.removesuffix("index.html"))
    return out


def _assert_no_injected_elements(page) -> None:
    injected = page.evaluate(
        """() => ({
            events: [...document.querySelectorAll('*')].filter(e =>
                [...e.attributes].some(a => a.name.toLowerCase().startsWith('on'))).length,
            images: [...document.querySelectorAll('img')].filter(i =>
                !/charts\\/\\w+\\.svg$/.test(i.getAttribute('src') || '')).length,
            scripts: [...document.querySelectorAll('script')].filter(s =>
                !s.src && s.type !== 'application/json' &&
                /alert/.test(s.textContent)).length,
            links: document.querySelectorAll('a[href^="javascript:" i]').length,
            svgs: document.querySelectorAll('svg[onload]').length,
        })"""
    )
    assert injected == {"events": 0, "images": 0, "scripts": 0, "links": 0, "svgs": 0}, injected


def test_every_page_shows_hostile_strings_literally_and_runs_none(hostile_site, served, browser):
    pages = _pages(hostile_site)
    assert len(pages) >= 5
    tooltips = []
    release_texts = []
    for path in pages:
        page, log = _open(browser, served + path)
        try:
            states = page.eval_on_selector_all(
                "figure.ta-chart", "els => els.map(e => e.getAttribute('data-rendered'))"
            )
            assert all(s == "yes" for s in states), f"{path}: charts not rendered: {states}"
            _assert_no_injected_elements(page)
            tooltips += _hover_marks(page)
            select = page.locator("figure.ta-chart .vega-bind select")
            for k in range(select.count()):
                for value in select.nth(k).evaluate("s => [...s.options].map(o => o.value)"):
                    select.nth(k).select_option(value)
                    tooltips += _hover_marks(page, limit=8)
            body = page.inner_text("body")
            assert SITE_NAME in body, f"{path}: the site name does not show literally"
            assert SITE_NAME in page.title()
            if path.count("/") == 2 and "compare" not in path:
                release_texts.append(body)
            _assert_no_injected_elements(page)
        finally:
            page.close()
        assert log["dialogs"] == [], f"{path}: dialogs opened: {log['dialogs']}"
        assert log["errors"] == [], f"{path}: console errors: {log['errors']}"
        assert log["foreign"] == [], f"{path}: requests to other hosts: {log['foreign']}"
    assert len(release_texts) == 2
    for text in release_texts:
        for s in SHOWN:
            assert s in text, f"{s!r} does not show literally on a release page"
        assert RENAMED["score_2026_1"] in text or RENAMED["score_2026_2"] in text
    assert any("rows" in t for t in tooltips), "no graph-node tooltip opened"


def test_search_results_show_hostile_text_without_running_it(served, browser):
    # the "At a glance" sections open with the score column, whose name holds markup
    page, log = _open(browser, served + "?q=glance")
    try:
        page.wait_for_selector("#mkdocs-search-results article", state="attached", timeout=15_000)
        results = page.locator("#mkdocs-search-results")
        assert RENAMED["score_2026_1"] in results.evaluate("e => e.textContent")
        _assert_no_injected_elements(page)
    finally:
        page.close()
    assert log["dialogs"] == [] and log["errors"] == [] and log["foreign"] == [], log
