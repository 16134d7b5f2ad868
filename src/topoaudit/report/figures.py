"""The block of a chart on a page, and its Vega-Lite spec inlined when the site is built.

A bundle's ``page.md`` shows each chart as a ``<figure>`` of four short lines: the SVG
image that any Markdown renderer shows, and an empty ``<script type="application/json"
class="ta-spec">`` that names the chart's spec file, ``charts/<name>.vl.json``, beside
the page. Kept out of the page, the spec (thousands of characters on one line) no longer
hides what changed in a diff of two releases' pages.

The site build puts each spec back in (:func:`inline_specs`): browsers refuse to fetch
JSON from ``file://`` pages, so the chart loader of the site (``site_template/assets/
charts.js``) reads the spec from the page itself and turns the figure into the
interactive chart. Only the exact block :func:`chart_block` writes is filled, so no text
of the page (a code block, a user's string) can ask for a spec.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

from topoaudit.errors import BundleError
from topoaudit.report.text import html_text, script_json

__all__ = ["chart_block", "inline_specs", "spec_file", "stable_svg_ids", "write_charts"]

_NAME = re.compile(r"[A-Za-z0-9_]+")
_BLOCK = re.compile(
    r'^(<figure class="ta-chart" data-chart="(?P<name>[A-Za-z0-9_]+)">\n'
    r'<img src="charts/(?P=name)\.svg" alt="[^"\n]*">\n)'
    r'<script type="application/json" class="ta-spec" '
    r'data-src="charts/(?P=name)\.vl\.json"></script>\n'
    r"(?=</figure>$)",
    flags=re.M,
)


def spec_file(name: str) -> str:
    """The path of chart ``name``'s spec, relative to the page: ``charts/<name>.vl.json``."""
    if not _NAME.fullmatch(name):
        msg = f"A chart's name is letters, digits and '_'; got {name!r}."
        raise ValueError(msg)
    return f"charts/{name}.vl.json"


def chart_block(name: str, alt_text: str) -> str:
    """The figure of chart ``name`` on a page: its SVG, and an empty spec block that names
    its spec file.

    Examples
    --------
    >>> print(chart_block("regions", "error rate by region"), end="")
    <figure class="ta-chart" data-chart="regions">
    <img src="charts/regions.svg" alt="error rate by region">
    <script type="application/json" class="ta-spec" data-src="charts/regions.vl.json"></script>
    </figure>
    """
    src = spec_file(name)
    return (
        f'<figure class="ta-chart" data-chart="{name}">\n'
        f'<img src="charts/{name}.svg" alt="{html_text(alt_text)}">\n'
        f'<script type="application/json" class="ta-spec" data-src="{src}"></script>\n'
        "</figure>\n"
    )


def inline_specs(markdown: str, charts: Path) -> str:
    """``markdown`` with the spec of every chart block read from the folder ``charts`` and
    inlined, escaped for a ``<script>`` element (:func:`~topoaudit.report.text.script_json`).

    Raises
    ------
    BundleError
        When a chart's spec file is missing or is not JSON (the message names the file).
    """

    def inlined(m: re.Match[str]) -> str:
        path = charts / f"{m.group('name')}.vl.json"
        try:
            spec = json.loads(path.read_text(encoding="utf-8"))
        except FileNotFoundError:
            msg = f"{path}: missing; the page shows this chart, so the bundle must hold its spec."
            raise BundleError(msg) from None
        except (OSError, ValueError) as exc:
            raise BundleError(f"{path}: cannot be read as a chart spec ({exc}).") from exc
        script = f'<script type="application/json" class="ta-spec">{script_json(spec)}</script>'
        return f"{m.group(1)}{script}\n"

    return _BLOCK.sub(inlined, markdown)


_SVG_ID = re.compile(r'id="([A-Za-z_][\w.-]*?)_(\d+)"')


def stable_svg_ids(svg: str, name: str) -> str:
    """``svg`` with the ids the converter numbers per process (``gradient_3``) renamed by
    the chart's name and their order in the file (``graph-gradient-0``), so that the same
    chart gives the same file whatever was drawn before it in the process."""
    ids: dict[str, str] = {}
    for m in _SVG_ID.finditer(svg):
        old = f"{m.group(1)}_{m.group(2)}"
        ids.setdefault(old, f"{name}-{m.group(1)}-{len(ids)}")
    for old, new in ids.items():
        svg = re.sub(rf'(?<=["#(]){re.escape(old)}(?=[")])', new, svg)
    return svg


def write_charts(folder: Path, specs: dict) -> None:
    """Write each chart's spec (``<name>.vl.json``) and its SVG into ``folder`` (created
    if needed), the SVG's ids made stable (:func:`stable_svg_ids`)."""
    import vl_convert as vlc

    from topoaudit.bundle.files import canonical_json

    folder.mkdir(parents=True, exist_ok=True)
    for name, spec in specs.items():
        (folder / f"{name}.vl.json").write_text(canonical_json(spec), encoding="utf-8")
        svg = stable_svg_ids(vlc.vegalite_to_svg(spec), name)
        (folder / f"{name}.svg").write_text(svg, encoding="utf-8")
