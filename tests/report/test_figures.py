"""A chart on a page: the bundle's page.md names each chart's spec file; the site build
inlines the spec for the chart loader, and only in the blocks the page wrote."""

from __future__ import annotations

import json
import re

import pytest

from topoaudit.bundle.files import canonical_json
from topoaudit.errors import BundleError
from topoaudit.report.figures import chart_block, inline_specs, spec_file
from topoaudit.report.site import build_site

SPEC = {"mark": "point", "title": "</script><!-- a & b"}


@pytest.fixture
def charts(tmp_path):
    folder = tmp_path / "charts"
    folder.mkdir()
    (folder / "regions.vl.json").write_text(canonical_json(SPEC), encoding="utf-8")
    return folder


def _inlined(text: str) -> dict[str, str]:
    return dict(
        re.findall(
            r'<figure class="ta-chart" data-chart="(\w+)">\n<img [^\n]*>\n'
            r'<script type="application/json" class="ta-spec">(.*?)</script>\n</figure>',
            text,
        )
    )


def test_a_block_is_filled_with_its_spec_escaped_for_a_script_element(charts):
    page = "Before.\n\n" + chart_block("regions", 'rate "by" region') + "\nAfter.\n"
    out = inline_specs(page, charts)
    spec = _inlined(out)["regions"]
    assert not re.search(r"[<>&]", spec)
    assert json.loads(spec) == SPEC
    assert 'alt="rate &quot;by&quot; region"' in out
    # everything else of the page is as it was
    assert out.replace(spec, "") == page.replace(' data-src="charts/regions.vl.json"', "")


def test_only_the_blocks_the_page_wrote_are_filled(charts):
    # a user's string reaches a page on one line (escaped, or in a one-line code fence):
    # the block's text on one line, or a block naming another image, is not filled
    block = chart_block("regions", "x")
    one_line = block.replace("\n", " ")
    other_svg = block.replace("charts/regions.svg", "charts/graph.svg")
    page = f"{one_line}\n\n{other_svg}\n{block}"
    out = inline_specs(page, charts)
    assert out.count('class="ta-spec">{') == 1
    assert out.startswith(f"{one_line}\n\n{other_svg}\n")


def test_a_missing_spec_file_is_named(charts):
    page = chart_block("graph", "the graph")
    with pytest.raises(BundleError, match=re.escape(f"{charts / 'graph.vl.json'}: missing;")):
        inline_specs(page, charts)


def test_a_spec_file_that_is_not_json_is_named(charts):
    (charts / "regions.vl.json").write_text("{not json", encoding="utf-8")
    with pytest.raises(BundleError, match=re.escape(f"{charts / 'regions.vl.json'}: cannot be")):
        inline_specs(chart_block("regions", "x"), charts)


@pytest.mark.parametrize("name", ["../x", "a b", "", "x.svg"], ids=repr)
def test_a_chart_name_is_a_plain_word(name):
    with pytest.raises(ValueError, match="A chart's name is letters, digits and '_'"):
        spec_file(name)


def test_the_site_page_holds_each_spec_of_the_bundle_and_the_bundle_page_none(
    fixture_archive, tmp_path
):
    _, bundles, archive = fixture_archive
    site = build_site(archive, tmp_path / "site")
    for release, bundle in bundles.items():
        page = (bundle / "page.md").read_text(encoding="utf-8")
        assert _inlined(page) == {}
        html = (site / "meter-failure" / release / "index.html").read_text(encoding="utf-8")
        inlined = _inlined(html)
        names = re.findall(r'data-chart="(\w+)"', page)
        assert sorted(inlined) == sorted(names) and len(names) >= 5
        for name, text in inlined.items():
            spec = json.loads((bundle / "charts" / f"{name}.vl.json").read_text())
            assert json.loads(text) == spec
        assert "data-src=" not in html
