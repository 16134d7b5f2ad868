"""The exception family of topoaudit.

Every mistake a user can make (a bad parameter, a malformed file, a value outside what a
stage accepts) is reported as a subclass of :class:`TopoauditError`, with one factual
sentence that says what was wrong, where, and what is accepted. Subclasses also derive
from the built-in class that fits, so ``except ValueError`` keeps working for callers
that do not know this package.
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable

__all__ = [
    "ArchiveError",
    "BundleError",
    "ClusterError",
    "ConfigError",
    "DataError",
    "FilterError",
    "LimitError",
    "LimitParameterError",
    "ParameterError",
    "TopoauditError",
    "UnknownNameError",
    "closest_names",
    "describe_rows",
]


class TopoauditError(Exception):
    """Base class of every error topoaudit raises on purpose."""


class ParameterError(TopoauditError, ValueError):
    """A parameter of a public class or function has a value it does not accept."""


class UnknownNameError(ParameterError):
    """A name (of a filter, clusterer, cover, key...) is not one of the known names."""


class DataError(TopoauditError, ValueError):
    """The input data cannot be used: empty, non-numeric, not finite, malformed."""


class FilterError(TopoauditError, ValueError):
    """A filter function returned values of the wrong shape or non-finite values."""


class ConfigError(TopoauditError, ValueError):
    """A configuration file is missing, malformed or names an unknown key."""


class LimitError(TopoauditError, ValueError):
    """A request exceeds one of the documented size limits."""


class LimitParameterError(LimitError, ParameterError):
    """A parameter asks for more than a documented limit allows (both kinds of error)."""


class ArchiveError(TopoauditError, OSError):
    """The archive refused an operation (a name, an existing release, a broken bundle)."""


class ClusterError(TopoauditError, OSError):
    """A compute cluster cannot be reached, or lost every worker or its scheduler while
    tasks ran (the message names the scheduler's address)."""


class BundleError(TopoauditError, ValueError):
    """A bundle file does not hold the record its schema describes (the message names the
    file and the key)."""


def closest_names(name: str, choices: Iterable[str], n: int = 3) -> list[str]:
    """Return up to ``n`` entries of ``choices`` that look most like ``name``.

    Examples
    --------
    >>> closest_names("dbscna", ["dbscan", "hdbscan", "kmedoids"])
    ['dbscan', 'hdbscan']
    """
    choices = sorted(set(choices))
    found = difflib.get_close_matches(name, choices, n=n, cutoff=0.6)
    if not found:
        lowered = name.lower()
        found = [c for c in choices if lowered and (lowered in c or c in lowered)][:n]
    return found


def unknown_name(kind: str, name: str, choices: Iterable[str]) -> UnknownNameError:
    """Build the error for an unknown ``kind`` name, suggesting the closest valid names."""
    choices = sorted(set(choices))
    near = closest_names(name, choices)
    hint = f" Did you mean {' or '.join(repr(c) for c in near)}?" if near else ""
    msg = f"Unknown {kind} {name!r}; the known {kind}s are {', '.join(map(repr, choices))}.{hint}"
    return UnknownNameError(msg)


def describe_rows(rows: Iterable[int], limit: int = 5) -> str:
    """``"rows 3, 17 and 2 more"``: row positions for an error message.

    Examples
    --------
    >>> describe_rows([3, 17, 20, 21, 30, 31, 40])
    'rows 3, 17, 20, 21, 30 and 2 more'
    >>> describe_rows([4])
    'row 4'
    """
    rows = [int(r) for r in rows]
    shown = ", ".join(str(r) for r in rows[:limit])
    more = f" and {len(rows) - limit} more" if len(rows) > limit else ""
    return f"row{'s' if len(rows) > 1 else ''} {shown}{more}"
