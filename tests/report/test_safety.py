"""Hostile strings from the user's data show literally on a page and never run.

Column names, category values, score and target column names, paths and rules are put
into the committed fixture analysis as markup, script, Markdown syntax and template
syntax; the page is rendered by Python-Markdown with the extensions mkdocs uses (toc,
tables, fenced_code, and attr_list from the site's mkdocs.yml) and the HTML is checked
element by element. The browser-level check on a real audit and a real site is
tests/visual/test_hostile_in_browser.py.
"""

from __future__ import annotations

import copy
import json
import re
from html.parser import HTMLParser
from pathlib import Path

import markdown
import pytest

from topoaudit.bundle.files import canonical_json
from topoaudit.report import views
from topoaudit.report.diff import diff_markdown
from topoaudit.report.figures import inline_specs
from topoaudit.report.page import build_page
from topoaudit.report.text import code_fence, escape, script_json

FIXTURE = Path(__file__).parent.parent / "visual" / "fixture" / "2026.2"

HOSTILE = [
    "<script>alert(1)</script>",
    '"><img src=x onerror=alert(1)>',
    "[click](javascript:alert(1))",
    "**bold** _it_",
    "`tick` ```fence",
    "a|b|c",
    "{{ jinja }} {% if 1 %}x{% endif %}",
    "{: onclick=alert(1) }",
    "<!-- open comment",
    "&lt;entity&gt; it's",
    "back\\slash # hash",
    "</script><script>alert(2)</script>",
]
#: a name with line breaks must not end a table row or start a heading or an HTML block
NEWLINE_NAME = "line\n# heading\n<script>alert(3)</script>"


def _hostile_analysis() -> tuple[dict, dict]:
    a = json.loads((FIXTURE / "analysis.json").read_text(encoding="utf-8"))
    g = json.loads((FIXTURE / "graph.json").read_text(encoding="utf-8"))
    a = copy.deepcopy(a)
    names = [*HOSTILE, NEWLINE_NAME]
    for w in a["weak_regions"]:
        desc = w["description"]
        for i, fc in enumerate(desc["contrasts"]):
            fc["feature"] = names[(i - 1) % len(names)]  # the first one has line breaks
        desc["categories"] = [
            {"feature": h, "category": names[-1 - i], "region_share": 0.5, "rest_share": 0.25}
            for i, h in enumerate(HOSTILE)
        ]
        desc["rule"]["text"] = " OR ".join(f"({h} > 1.5)" for h in names)
        w["also_found"] = [HOSTILE[0], HOSTILE[1]]
    prov = a["provenance"]
    prov["score_column"] = HOSTILE[1]
    prov["data_file"] = HOSTILE[2]
    prov["command"] = "topoaudit audit '" + "' '".join(names) + "' --release 2026.2"
    prov["features"] = names
    data = a["config"]["data"]
    data.update(id=HOSTILE[3], target=HOSTILE[4], exclude=HOSTILE, features=names)
    data["categorical"] = {h: "onehot" for h in HOSTILE}
    for s in a["search"]:
        s["features_used"] = names
        s["settings"]["filter"] = f"Values({HOSTILE[0]})"
    a["graph"]["settings"]["filter"] = HOSTILE[5]
    a["graph"]["settings"]["cover"] = HOSTILE[6]
    a["config"]["audit"]["segments"] = names[:2]
    for i, segment in enumerate(a.get("segments") or []):
        segment["column"] = names[i]
        for j, level in enumerate(segment["levels"]):
            level["level"] = names[-1 - j]
            level["note"] = HOSTILE[j] if level["note"] else ""
    return a, g


class _Html(HTMLParser):
    """Elements, attributes and visible text of an HTML fragment."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.text: list[str] = []
        self.scripts: list[str] = []
        self._in: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))
        self._in.append(tag)

    def handle_endtag(self, tag):
        if tag in self._in:
            while self._in and self._in.pop() != tag:
                pass

    def handle_data(self, data):
        if self._in and self._in[-1] == "script":
            self.scripts.append(data)
        else:
            self.text.append(data)


def _render(md_text: str) -> _Html:
    html = markdown.markdown(md_text, extensions=["toc", "tables", "fenced_code", "attr_list"])
    parser = _Html()
    parser.feed(html)
    parser.close()
    parser.raw = html
    return parser


def _assert_inert(doc: _Html) -> None:
    for tag, attrs in doc.tags:
        events = [k for k in attrs if k.lower().startswith("on")]
        assert events == [], f"<{tag}> has event attributes {events}"
        for key in ("href", "src"):
            value = (attrs.get(key) or "").strip().lower()
            assert not value.startswith("javascript:"), f"<{tag} {key}={value!r}>"
        if tag == "script":
            assert attrs.get("type") == "application/json", f"a script element runs: {attrs}"
        if tag == "img":
            assert re.fullmatch(r"charts/\w+\.svg", attrs.get("src") or ""), attrs
    assert "<strong>bold" not in doc.raw and "<em>it" not in doc.raw
    assert "<code>tick" not in doc.raw
    assert 'href="javascript' not in doc.raw.lower()


def _text(doc: _Html) -> str:
    return re.sub(r"\s+", " ", "".join(doc.text))


@pytest.fixture(scope="module")
def hostile_page():
    a, g = _hostile_analysis()
    return build_page(a, g)


def test_markdown_text_of_the_page_carries_no_raw_markup(hostile_page):
    md = hostile_page.markdown
    # outside the raw HTML blocks (charts, the config) and the command's code fence, whose
    # text Markdown escapes itself, no user string is raw Markdown or HTML
    prose = re.sub(r"<figure.*?</figure>", " ", md, flags=re.S)
    prose = re.sub(r'<pre class="ta-config">.*?</pre>', " ", prose, flags=re.S)
    prose = re.sub(r"^(`{3,})\n.*?\n\1$", " ", prose, flags=re.S | re.M)
    assert "<" not in prose.replace("<=", "")
    for h in HOSTILE:
        assert h not in prose, h
    # Markdown syntax shows only with its punctuation backslash-escaped
    for raw in (r"\]\(javascript:", r"\*\*bold\*\*", r"`tick`", r"a\|b", r"(?<!\\)\{:", "<!--"):
        assert not re.search(raw, prose), raw


def test_rendered_page_shows_every_hostile_string_literally_and_runs_nothing(hostile_page):
    doc = _render(hostile_page.markdown)
    _assert_inert(doc)
    text = _text(doc)
    for h in HOSTILE:
        assert h in text, f"{h!r} does not show literally"
    assert "line # heading <script>alert(3)</script>" in text
    # no heading was started by a user string
    assert [t for t, _ in doc.tags].count("h1") == 1


def test_tables_keep_their_columns_whatever_the_cell_text(hostile_page):
    html = markdown.markdown(hostile_page.markdown, extensions=["tables", "fenced_code"])
    for table in re.findall(r"<table>.*?</table>", html, flags=re.S):
        widths = {
            len(re.findall(r"<t[hd][ >]", row))
            for row in re.findall(r"<tr>.*?</tr>", table, flags=re.S)
        }
        assert len(widths) == 1, f"a table's rows differ in width: {widths}\n{table[:800]}"


def test_inlined_specs_cannot_close_their_script_element_and_read_back_equal(
    hostile_page, tmp_path
):
    # the bundle's page names each spec file; the site build inlines the specs
    assert 'class="ta-spec">{' not in hostile_page.markdown
    charts = tmp_path / "charts"
    charts.mkdir()
    for name, spec in hostile_page.charts.items():
        (charts / f"{name}.vl.json").write_text(canonical_json(spec), encoding="utf-8")
    blocks = re.findall(
        r'<figure class="ta-chart" data-chart="(\w+)">.*?<script type="application/json" '
        r'class="ta-spec">(.*?)</script>',
        inline_specs(hostile_page.markdown, charts),
        flags=re.S,
    )
    assert {name for name, _ in blocks} == set(hostile_page.charts)
    for name, text in blocks:
        assert not re.search(r"[<>&]", text), f"{name}: raw < > & in the inlined spec"
        assert json.loads(text) == hostile_page.charts[name]


def test_strings_in_chart_specs_are_escaped_where_they_are_inlined():
    import pandas as pd

    frame = pd.DataFrame(
        {"region": HOSTILE[:3], "value": [0.1, 0.2, 0.3], "low": [0.0] * 3, "high": [0.4] * 3}
    )
    spec = views.comparison_view(frame, baseline=HOSTILE[0], candidate=HOSTILE[1]).to_dict()
    text = script_json(spec)
    assert "</script" not in text.lower() and "<!--" not in text and "<img" not in text
    assert json.loads(text) == json.loads(json.dumps(spec))


def test_the_configuration_block_is_escaped_html(hostile_page):
    block = re.search(
        r'<pre class="ta-config"><code>(.*?)</code></pre>', hostile_page.markdown, re.S
    )
    assert block is not None
    assert "<" not in block.group(1) and ">" not in block.group(1)
    doc = _render(hostile_page.markdown)
    assert HOSTILE[0] in "".join(doc.text)


def test_the_command_fence_cannot_be_closed_by_the_command(hostile_page):
    doc = _render(hostile_page.markdown)
    code = re.findall(r"<pre><code>(.*?)</code></pre>", doc.raw, flags=re.S)
    commands = [c for c in code if re.match(r"SOURCE_DATE_EPOCH=\d+ topoaudit audit", c)]
    assert len(commands) == 1 and "\n" not in commands[0].rstrip("\n")
    assert code_fence("```").startswith("````\n")


def test_diff_summary_escapes_names_and_ids():
    d = {
        "model": HOSTILE[0],
        "task": "binary",
        "before": HOSTILE[1],
        "after": HOSTILE[2],
        "same_rows": True,
        "metrics": [{"metric": HOSTILE[3], "before": 0.1, "after": 0.2, "change": 0.1}],
        "kept": [{"before": HOSTILE[4], "after": HOSTILE[5], "jaccard": 0.7}],
        "gained": [
            {"id": HOSTILE[6], "rows": 40, "kind": HOSTILE[7], "ratio": 2.0, "p_adjusted": 0.01}
        ],
        "lost": [],
    }
    doc = _render(diff_markdown(d))
    _assert_inert(doc)
    text = _text(doc)
    for h in HOSTILE[:7]:
        assert h in text, h


@pytest.mark.parametrize("value", [*HOSTILE, NEWLINE_NAME])
def test_escape_leaves_no_markup_and_reads_back(value):
    out = escape(value)
    assert not re.search(r"[<>\n\r\t]", out)
    doc = _render(f"| a | b |\n|---|---|\n| {out} | x |\n")
    assert len(re.findall(r"<td", doc.raw)) == 2
    assert re.sub(r"\s+", " ", value) in _text(doc)
