"""The page: every number it shows comes from analysis.json; cautions are always there."""

from __future__ import annotations

import difflib
import json
import re

import markdown

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
    # prose is written a sentence to a line, so a string may be broken across lines
    text = " ".join(text.split())
    for s in sorted(strings, key=len, reverse=True):
        if len(s) >= 2:
            text = text.replace(" ".join(escape(s).split()), " ").replace(s, " ")
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
        words = " ".join(page.split())  # prose is written a sentence to a line
        for caution in STANDING_CAUTIONS:
            assert caution in words


def test_each_chart_is_shown_as_svg_and_names_its_spec_file_beside_the_page(fixture_archive):
    _, bundles, _ = fixture_archive
    bundle = bundles["2026.2"]
    page = (bundle / "page.md").read_text()
    figures = re.findall(r'<figure class="ta-chart" data-chart="(\w+)">', page)
    assert {"graph", "regions", "comparison"} <= set(figures)
    for name in figures:
        assert (bundle / "charts" / f"{name}.svg").read_text().startswith("<svg")
        assert f'class="ta-spec" data-src="charts/{name}.vl.json"></script>' in page
        spec = json.loads((bundle / "charts" / f"{name}.vl.json").read_text())
        assert spec["$schema"].startswith("https://vega.github.io/schema/vega-lite/")
    assert '"$schema"' not in page  # no spec is inlined in the bundle's page


def test_rendered_markdown_shows_every_chart_as_its_svg_image(fixture_archive):
    # Python-Markdown with the extensions mkdocs uses: what a Markdown viewer shows
    _, bundles, _ = fixture_archive
    bundle = bundles["2026.2"]
    page = (bundle / "page.md").read_text()
    html = markdown.markdown(page, extensions=["tables", "fenced_code", "attr_list"])
    figures = re.findall(r'<figure class="ta-chart" data-chart="(\w+)">', page)
    images = re.findall(r'<img src="charts/(\w+)\.svg" alt="[^"]+">', html)
    assert images == figures and len(images) >= 5
    assert all((bundle / "charts" / f"{name}.svg").is_file() for name in images)


def test_the_demo_pages_and_their_diff_have_no_line_over_300_characters(fixture_archive):
    # a pull-request diff of page.md between two releases is read line by line; 300
    # characters is our bound for a line a reviewer can take in (common practice, no source)
    _, bundles, _ = fixture_archive
    pages = {r: (b / "page.md").read_text(encoding="utf-8") for r, b in bundles.items()}
    for release, text in pages.items():
        long = [(i, len(line)) for i, line in enumerate(text.splitlines(), 1) if len(line) > 300]
        assert long == [], f"page.md of {release}: lines over 300 characters {long}"
    diff = list(
        difflib.unified_diff(
            pages["2026.1"].splitlines(), pages["2026.2"].splitlines(), lineterm=""
        )
    )
    assert len(diff) > 100  # the two releases differ: the diff has something to read
    assert [line[:80] for line in diff if len(line) > 300] == []


def test_prose_written_a_sentence_to_a_line_renders_as_it_did_on_one_line(monkeypatch):
    # Python-Markdown (the site's renderer) gives the same HTML, up to white space, for
    # the page before and after its prose is broken into lines; hostile names included
    from tests.report.test_safety import _hostile_analysis
    from topoaudit.report import page as page_module

    a, g = _hostile_analysis()
    wrapped = build_page(a, g).markdown
    monkeypatch.setattr(page_module, "wrap_prose", lambda text: text)
    flat = build_page(a, g).markdown
    assert wrapped != flat and max(map(len, flat.splitlines())) > 300  # the control

    def html(text: str) -> str:
        out = markdown.markdown(text, extensions=["toc", "tables", "fenced_code", "attr_list"])
        return re.sub(r"\s+", " ", out)

    assert html(wrapped) == html(flat)
    # no line the breaking made starts what would open a block
    opens_block = re.compile(r"\s*(?:[-+*] |\d+[.)] |#|>|\||<|```|~~~|=+$)")
    lines = flat.splitlines()
    made = [line for line in wrapped.splitlines() if not any(f.startswith(line) for f in lines)]
    assert len(made) > 20 and not any(opens_block.match(line) for line in made)


def test_the_shape_section_names_each_feature_in_words(fixture_archive):
    _, bundles, _ = fixture_archive
    page = (bundles["2026.2"] / "page.md").read_text()
    section = page.split("### Features of the shape")[1].split("## Regions")[0]
    for name in ("the main component", "separate group 1", "loop 1", "flare 1", "flare 2"):
        assert f"| {name} |" in section
    assert "chosen from the data" in section
    assert "(s)" not in page.split("## The shape of the data")[1].split("## Regions")[0]


def test_settings_sentence_says_which_rule_gave_the_interval_count():
    # UCI Wine (scikit-learn's copy, standardised): too sparse for the scale rule of
    # Carrière, Michel and Oudot (2018), so the count is the Freedman-Diaconis one.
    from sklearn.datasets import load_wine
    from sklearn.preprocessing import StandardScaler

    from topoaudit.bundle.records import ShapeRecord
    from topoaudit.mapper.graph import MapperBuilder
    from topoaudit.report.page import _settings_sentence

    X = StandardScaler().fit_transform(load_wine().data)
    builder = MapperBuilder(filter="pca").fit(X)
    shape = ShapeRecord(
        chosen=builder.auto_.as_dict(),
        n_intervals=builder.n_intervals_,
        overlap=builder.overlap_,
        resamples=0,
        resample_rows=0,
        features=(),
    )
    config = {"graph": {"n_intervals": "auto", "clusterer": "auto"}}
    text = _settings_sentence(shape, config, X.shape[0])
    assert "too sparse for the rule to resolve any shape" in text
    assert "Freedman and Diaconis (1981) bin count" in text
    assert "which gives 6 intervals overlapping by 40%" in text
    assert "interval length of" not in text
