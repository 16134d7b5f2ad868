"""The page: every number it shows comes from analysis.json; cautions are always there."""

from __future__ import annotations

import json
import re

from topoaudit.report.page import STANDING_CAUTIONS, build_page
from topoaudit.report.text import escape

NUMBER = re.compile(r"(?<![\w.])[-+]?\d[\d,]*(?:\.\d+)?(?:e[-+]?\d+)?(?![\w])")
DATE = re.compile(r"\d{4}-\d{2}-\d{2}")
#: the year of a cited publication, "Oudot (2018)" or "Oudot, 2018)": not a result
CITED_YEAR = re.compile(r"(?<=[a-z] )\((?:19|20)\d{2}\)|(?<=[a-z], )(?:19|20)\d{2}(?=\))")


def _leaves(value, numbers, strings):
    if isinstance(value, dict):
        for v in value.values():
            _leaves(v, numbers, strings)
        # a change is shown as the difference of the two numbers as shown, so that the
        # numbers on a page add up (the page's one rounding rule)
        before, after = value.get("before"), value.get("after")
        if isinstance(before, float) and isinstance(after, float):
            numbers.append(round(round(after, 3) - round(before, 3), 3))
    elif isinstance(value, list):
        for v in value:
            _leaves(v, numbers, strings)
    elif isinstance(value, bool) or value is None:
        return
    elif isinstance(value, int | float):
        numbers.append(value)
    elif isinstance(value, str):
        strings.append(value)


def _formats(v):
    out = {str(v), f"{v}"}
    if float(v).is_integer():
        out |= {str(int(v)), f"{int(v):,}"}
    for d in (1, 2, 3):
        out |= {f"{v:.{d}f}", f"{v:+.{d}f}", f"{100 * v:.{d - 1}f}"}
    out |= {f"{v:.1e}", f"{100 * v:.0f}", f"{v:.0f}"}
    return out


def _page_numbers(markdown: str, strings: list[str]) -> list[str]:
    text = re.sub(r"<figure.*?</figure>", " ", markdown, flags=re.S)
    text = text.split("## How to reproduce")[0]
    for s in sorted(strings, key=len, reverse=True):
        if len(s) >= 2:
            text = text.replace(escape(s), " ").replace(s, " ")
    text = DATE.sub(" ", text)
    text = CITED_YEAR.sub(" ", text)
    text = re.sub(r"\bW\d+\b", " ", text)  # weak-region ids are strings in the analysis
    return [n.rstrip(",") for n in NUMBER.findall(text)]


def test_every_number_on_the_page_is_in_analysis_json(fixture_archive):
    _, bundles, _ = fixture_archive
    for bundle in bundles.values():
        analysis = json.loads((bundle / "analysis.json").read_text())
        graph = json.loads((bundle / "graph.json").read_text())
        numbers, strings = [], []
        _leaves(analysis, numbers, strings)
        allowed = set().union(*(_formats(v) for v in numbers))
        page = build_page(analysis, graph).markdown
        shown = _page_numbers(page, strings)
        assert len(shown) > 50
        missing = sorted({n for n in shown if n.lstrip("+") not in allowed and n not in allowed})
        assert missing == [], f"numbers on the page not found in analysis.json: {missing}"


def test_page_written_in_the_bundle_equals_a_fresh_build(fixture_archive):
    _, bundles, _ = fixture_archive
    bundle = bundles["2026.2"]
    analysis = json.loads((bundle / "analysis.json").read_text())
    graph = json.loads((bundle / "graph.json").read_text())
    assert (bundle / "page.md").read_text() == build_page(analysis, graph).markdown


def test_every_page_carries_the_standing_cautions(fixture_archive):
    _, bundles, _ = fixture_archive
    for bundle in bundles.values():
        page = (bundle / "page.md").read_text()
        assert "## Cautions" in page
        for caution in STANDING_CAUTIONS:
            assert caution in page


def test_each_chart_is_embedded_as_svg_and_as_an_inline_spec(fixture_archive):
    _, bundles, _ = fixture_archive
    bundle = bundles["2026.2"]
    page = (bundle / "page.md").read_text()
    figures = re.findall(r'<figure class="ta-chart" data-chart="(\w+)">', page)
    assert {"graph", "regions", "comparison"} <= set(figures)
    for name in figures:
        assert (bundle / "charts" / f"{name}.svg").read_text().startswith("<svg")
        spec = json.loads((bundle / "charts" / f"{name}.vl.json").read_text())
        assert spec["$schema"].startswith("https://vega.github.io/schema/vega-lite/")


def test_the_shape_section_names_each_feature_in_words(fixture_archive):
    _, bundles, _ = fixture_archive
    page = (bundles["2026.2"] / "page.md").read_text()
    section = page.split("### Features of the shape")[1].split("## Regions")[0]
    for name in ("the main component", "separate group 1", "loop 1", "flare 1", "flare 2"):
        assert f"| {name} |" in section
    assert "chosen from the data" in section
    assert "(s)" not in page.split("## The shape of the data")[1].split("## Regions")[0]
