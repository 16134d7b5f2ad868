"""Counts in words: "1 loop", "2 loops", "1,200 rows".

Used by everything that speaks to a person (pages, progress lines, messages), so that a
count and its noun always agree.
"""

from __future__ import annotations

import math
from typing import Any

__all__ = ["count", "is_missing", "join_words", "plural"]


def is_missing(value: Any) -> bool:
    """True for None, NaN and infinities: a value with nothing to show."""
    return value is None or (isinstance(value, float) and not math.isfinite(value))


def count(value: Any) -> str:
    """A whole number with thousands separators; "n/a" when undefined."""
    return "n/a" if is_missing(value) else f"{round(float(value)):,}"


def plural(n: Any, word: str, words: str | None = None) -> str:
    """``"1 loop"``, ``"2 loops"``, ``"1,200 rows"``: the count and the word that fits it.

    Examples
    --------
    >>> plural(1, "branch point"), plural(3, "branch point"), plural(2, "leaf", "leaves")
    ('1 branch point', '3 branch points', '2 leaves')
    """
    many = words if words is not None else word + "s"
    return f"{count(n)} {word if n == 1 else many}"


def join_words(parts: list[str]) -> str:
    """``"a"``, ``"a and b"``, ``"a, b and c"``.

    Examples
    --------
    >>> join_words(["a"]), join_words(["a", "b", "c"])
    ('a', 'a, b and c')
    """
    return parts[0] if len(parts) == 1 else ", ".join(parts[:-1]) + " and " + parts[-1]
