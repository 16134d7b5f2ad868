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

:func:`wrap_prose` lays a finished page's prose out a sentence to a line, so that a diff
of two pages shows the sentences that changed.

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
    "wrap_prose",
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


#: the longest line of prose :func:`wrap_prose` writes where it can break (a sentence is
#: rarely longer: most lines are one sentence)
PROSE_WIDTH = 240
# a word that could open a block (list, heading, quote, table, HTML, code, rule) at the
# start of a line, or an empty one (two spaces in a row): no line of prose starts with it
_OPENS_BLOCK = re.compile(r"[-+*#>=|<`~_]|\d+[.)]$|$")
# (not ";": an HTML entity such as "&gt;" ends with one)
_SENTENCE_END = re.compile(r"[.!?:][)\"'’”]*$")
_LIST_ITEM = re.compile(r"(?:[-*+]|\d+[.)]) ")
_FENCE = re.compile(r"(`{3,}|~{3,})")


def _may_start_line(word: str, in_code: bool) -> bool:
    return not in_code and _OPENS_BLOCK.match(word) is None


def _wrapped(text: str, indent: str, width: int) -> list[str]:
    """``text`` broken at spaces: after the end of each sentence, and where a sentence
    would run past ``width``; continuation lines start with ``indent``."""
    lines: list[str] = []
    current = ""
    in_code = False  # inside an inline code span, where a break would change the code
    for word in text.split(" "):
        ends_sentence = bool(current) and _SENTENCE_END.search(current) is not None
        too_long = len(current) + 1 + len(word) > width
        if current.strip() and (ends_sentence or too_long) and _may_start_line(word, in_code):
            lines.append(current)
            current = indent + word
        else:
            current = f"{current} {word}" if current else word
        in_code ^= word.count("`") % 2 == 1
    return [*lines, current]


def wrap_prose(markdown: str, width: int = PROSE_WIDTH) -> str:
    """``markdown`` with each paragraph and list item written a sentence to a line, and a
    sentence longer than ``width`` characters wrapped at spaces; the rendered page is the
    same (a line break inside a paragraph reads as a space).

    Headings, table rows, HTML blocks, ``<pre>`` blocks and fenced code are left as they
    are, and no line is made to start with what would open a block (``- ``, ``1.``,
    ``#``, ``|``, ``<``...), so nothing is read as markup that was text.

    Examples
    --------
    >>> print(wrap_prose("One sentence. Another - with a dash.\\n\\n| a | b |"))
    One sentence.
    Another - with a dash.
    <BLANKLINE>
    | a | b |
    """
    out: list[str] = []
    fence = ""
    in_pre = False
    for line in markdown.split("\n"):
        if fence or in_pre:
            out.append(line)
            fence = "" if fence and line.strip() == fence else fence
            in_pre = in_pre and "</pre>" not in line
            continue
        opened = _FENCE.match(line)
        if opened or not line.strip() or line[0] in "#|< " or line.startswith("\t"):
            fence = opened.group(1) if opened else ""
            in_pre = line.startswith("<pre") and "</pre>" not in line
            out.append(line)
            continue
        item = _LIST_ITEM.match(line)
        indent = " " * item.end() if item else ""
        out.extend(_wrapped(line, indent, width))
    return "\n".join(out)
