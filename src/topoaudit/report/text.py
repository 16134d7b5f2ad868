"""Formatting and escaping of what goes onto a page.

Every string that comes from the user's data or config (column names, category values,
model and release names, rules) passes through one of these before it lands on a page,
so it shows literally and never runs as markup or script:

* :func:`escape` for Markdown text (paragraphs, table cells, list items);
* :func:`html_text` inside raw HTML blocks (attributes, ``<pre>``), where Markdown is
  not read;
* :func:`script_json` for JSON inlined in a ``<script type="application/json">``
  element, where no ``</script>``, ``<!--`` or ``<script`` may appear;
* :func:`code_fence` for a fenced code block (the fence is longer than any run of
  backticks in the text, and the text is kept on one line).

Strings inside chart specs stay as they are: Vega draws titles, labels and legends as
SVG text and the chart loader escapes tooltips, so they show literally there too.
"""

from __future__ import annotations

import html
import json
import re
from typing import Any

from topoaudit.wording import count, is_missing, plural

__all__ = [
    "change",
    "code_fence",
    "count",
    "escape",
    "html_text",
    "plural",
    "pvalue",
    "rate",
    "script_json",
    "signed",
]

# Markdown punctuation that is backslash-escaped; < > & " ' become HTML entities instead.
_MD_SPECIAL = re.compile(r"([\\`*_{}\[\]()#+!|~-])")
# Line breaks, tabs and other control characters would end a table row or start a block.
_CONTROL = re.compile(r"[\x00-\x1f\x7f\u2028\u2029]")
_SCRIPT_UNSAFE = {
    "<": "\\u003c",
    ">": "\\u003e",
    "&": "\\u0026",
    "\u2028": "\\u2028",
    "\u2029": "\\u2029",
}


def escape(value: Any) -> str:
    """Text for Markdown: control characters become spaces, Markdown punctuation is
    backslash-escaped, then ``& < > " '`` become HTML entities.

    Examples
    --------
    >>> escape("<b>x</b> [y](z)")
    '&lt;b&gt;x&lt;/b&gt; \\\\[y\\\\]\\\\(z\\\\)'
    >>> escape("a|b's\\nc")
    'a\\\\|b&#x27;s c'
    """
    text = _CONTROL.sub(" ", str(value))
    return html.escape(_MD_SPECIAL.sub(r"\\\1", text), quote=True)


def html_text(value: Any) -> str:
    """Text for raw HTML (an attribute value or element content), where Markdown is not
    read.

    >>> html_text('"><img src=x>')
    '&quot;&gt;&lt;img src=x&gt;'
    """
    return html.escape(str(value), quote=True)


def script_json(value: Any) -> str:
    """Compact, key-sorted JSON that is safe inside ``<script type="application/json">``:
    ``<``, ``>`` and ``&`` are written as ``\\u`` escapes, which JSON.parse reads back.

    >>> script_json({"a": "</script><!--"})
    '{"a":"\\\\u003c/script\\\\u003e\\\\u003c!--"}'
    """
    text = json.dumps(value, sort_keys=True, separators=(",", ":"))
    return re.sub("[<>&\u2028\u2029]", lambda m: _SCRIPT_UNSAFE[m.group()], text)


def code_fence(text: str) -> str:
    """A fenced code block of ``text`` on one line, with a fence no line can close.

    >>> print(code_fence("a ``` b"))
    ````
    a ``` b
    ````
    """
    line = _CONTROL.sub(" ", text)
    longest = max((len(run) for run in re.findall(r"`+", line)), default=0)
    fence = "`" * max(3, longest + 1)
    return f"{fence}\n{line}\n{fence}"


def rate(value: Any, digits: int = 3) -> str:
    """A proportion or loss with ``digits`` decimals; "n/a" when undefined."""
    return "n/a" if is_missing(value) else f"{float(value):.{digits}f}"


def change(before: Any, after: Any, digits: int = 3) -> str:
    """The change from ``before`` to ``after`` as the page shows them: the difference of
    the two rounded values, so that the numbers on a page add up (the one rounding rule
    of every page)."""
    if is_missing(before) or is_missing(after):
        return "n/a"
    return signed(round(float(after), digits) - round(float(before), digits), digits)


def signed(value: Any, digits: int = 3) -> str:
    return "n/a" if is_missing(value) else f"{float(value):+.{digits}f}"


def pvalue(value: Any) -> str:
    """p-values in scientific notation with 2 significant digits."""
    return "n/a" if is_missing(value) else f"{float(value):.1e}"
