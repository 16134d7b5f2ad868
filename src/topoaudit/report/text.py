"""Formatting and escaping of what goes onto a page.

Every string that comes from the user's data or config (column names, category values,
model and release names, rules) passes through :func:`escape` before it reaches Markdown
or HTML, so it shows literally and never runs as markup or script.
"""

from __future__ import annotations

import html
import math
import re
from typing import Any

__all__ = ["count", "escape", "pvalue", "rate", "signed"]

_MD_SPECIAL = re.compile(r"([\\`*_{}\[\]()#+!|~>-])")


def escape(value: Any) -> str:
    """HTML-escape, then backslash-escape Markdown punctuation.

    Examples
    --------
    >>> escape("<b>x</b> [y](z)")
    '&lt;b&gt;x&lt;/b&gt; \\\\[y\\\\]\\\\(z\\\\)'
    """
    text = html.escape(str(value), quote=True)
    return _MD_SPECIAL.sub(r"\\\1", text)


def _missing(value: Any) -> bool:
    return value is None or (isinstance(value, float) and not math.isfinite(value))


def rate(value: Any, digits: int = 3) -> str:
    """A proportion or loss with ``digits`` decimals; "n/a" when undefined."""
    return "n/a" if _missing(value) else f"{float(value):.{digits}f}"


def signed(value: Any, digits: int = 3) -> str:
    return "n/a" if _missing(value) else f"{float(value):+.{digits}f}"


def count(value: Any) -> str:
    return "n/a" if _missing(value) else f"{round(float(value)):,}"


def pvalue(value: Any) -> str:
    """p-values in scientific notation with 2 significant digits."""
    return "n/a" if _missing(value) else f"{float(value):.1e}"
