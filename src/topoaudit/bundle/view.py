"""The public view of an audit: its aggregates, with small-cell suppression applied once.

Every output that leaves a bundle (the release page, the pull-request diff, the site)
reads this view, not ``analysis.json`` itself. A *cell* is any group of rows behind a
statistic: a graph node, a region, a weak region and each of its halves, a calibration
bin, a region of the release comparison, a candidate region, a feature of the shape, a
level of a declared segment column.
A cell of fewer than :data:`~topoaudit.limits.MIN_CELL_ROWS` rows keeps its size and
its name and loses every statistic: each becomes ``None``, which the pages print as
"not shown". Its rows could otherwise be read back from a rate, a mean or a difference
of means (the small-cell rule of statistical disclosure control; common practice, no
source).

The view is a new :class:`~topoaudit.bundle.records.Analysis` (and
:class:`~topoaudit.bundle.records.GraphDocument`); the inputs are not changed. It can be
made from a record or from the parsed JSON of a bundle file.
"""

from __future__ import annotations

import copy
from typing import Any

from topoaudit.bundle.records import Analysis, GraphDocument, to_dict
from topoaudit.limits import MIN_CELL_ROWS

__all__ = ["MIN_CELL_ROWS", "is_small", "public_graph", "public_view", "suppressed_cells"]

#: the keys of a cell that are its size, its name or its place, kept when its statistics go
_KEPT = frozenset(
    {
        "id",
        "rows",
        "region",
        "nodes",
        "kind",
        "graph",
        "name",
        "main",
        "weak_regions",
        "also_found",
        "tested",
        "confirmed",
        "verdict",
        "tip_node",
        "share_of_rows",
        "on_feature",
    }
)
#: sizes, names and settings, kept at every depth of a small cell
_SIZES = frozenset(
    {"id", "rows", "region", "region_rows", "name", "folds", "depth", "model", "column"}
)


def is_small(rows: Any) -> bool:
    """True when a cell of ``rows`` rows is too small to show a statistic of."""
    return rows is None or rows < MIN_CELL_ROWS


def _blank(value: Any, keep: frozenset[str] = _KEPT) -> Any:
    """``value`` with every number that is not a size, a name or a place set to None."""
    if isinstance(value, dict):
        return {k: v if k in keep else _blank(v, _SIZES) for k, v in value.items()}
    if isinstance(value, list):
        return [_blank(v, _SIZES) for v in value]
    if isinstance(value, bool | str) or value is None:
        return value
    return None


def _suppress(cells: list[dict[str, Any]] | None) -> None:
    for i, cell in enumerate(cells or []):
        if is_small(cell.get("rows")):
            cells[i] = _blank(cell)  # type: ignore[index]


def _halves(w: dict[str, Any]) -> None:
    for half in ("discovery", "confirmation"):
        if isinstance(w.get(half), dict) and is_small(w[half].get("rows")):
            w[half] = _blank(w[half], _SIZES)
    if isinstance(w.get("confirmation"), dict) and is_small(w["confirmation"].get("rows")):
        w["effect"] = None
        if w.get("confirmation_error_rate") is not None:
            w["confirmation_error_rate"] = _blank(w["confirmation_error_rate"], _SIZES)
        if "confirmation_interval_points" in w:
            w["confirmation_interval_points"] = None


def _thresholds(outcomes: dict[str, Any] | None) -> None:
    """A threshold at which fewer than MIN_CELL_ROWS rows are flagged keeps its counts and
    loses its precision (the outcome rate of those few rows)."""
    for row in (outcomes or {}).get("thresholds") or []:
        if is_small(row.get("flagged")):
            row["precision"] = None


def _segment_levels(segments: list[dict[str, Any]] | None) -> None:
    """A level of a declared segment column with fewer than MIN_CELL_ROWS rows, or fewer
    other rows, keeps its name and both row counts and loses every statistic and its
    verdict (a level beside few other rows would give those rows away, with the rate of
    all rows)."""
    for segment in segments or []:
        for i, level in enumerate(segment.get("levels") or []):
            small, rest_small = is_small(level.get("rows")), is_small(level.get("rest_rows"))
            if small or rest_small:
                blank = _blank(level, frozenset({"level", "rows", "rest_rows"}))
                which = "rows" if small else "other rows"
                note = f"fewer than {MIN_CELL_ROWS} {which}"
                segment["levels"][i] = {**blank, "verdict": "not shown", "note": note}


def public_view(analysis: Analysis | dict[str, Any]) -> Analysis:
    """``analysis`` (a record, or the parsed analysis.json) with small cells suppressed."""
    return Analysis.from_dict(_suppressed(analysis), "analysis.json (public view):")


def suppressed_cells(analysis: dict[str, Any]) -> dict[str, Any]:
    """The suppression of :func:`public_view` on plain data, for any part of an analysis.

    Examples
    --------
    >>> a = {"regions": [{"id": 1, "rows": 4, "metrics": {"error_rate": {"value": 0.5}}}]}
    >>> suppressed_cells(a)["regions"][0]
    {'id': 1, 'rows': 4, 'metrics': {'error_rate': {'value': None}}}
    """
    return _suppressed(analysis)


def _suppressed(analysis: Analysis | dict[str, Any]) -> dict[str, Any]:
    out = to_dict(analysis) if isinstance(analysis, Analysis) else copy.deepcopy(analysis)
    _suppress(out.get("regions"))
    for r in out.get("regions") or []:
        if isinstance(r.get("calibration"), list):
            _suppress(r["calibration"])
    weak = out.get("weak_regions") or []
    for i, w in enumerate(weak):
        if is_small(w.get("rows")):
            weak[i] = {**_blank(w), "description": None}
        else:
            _halves(w)
    for c in out.get("candidates") or []:
        _halves(c)
    if out.get("comparison"):
        _suppress(out["comparison"].get("regions"))
    _thresholds(out.get("outcomes"))
    _segment_levels(out.get("segments"))
    shape = (out.get("graph") or {}).get("shape") or {}
    for f in shape.get("features") or []:
        if is_small(f.get("rows")):
            f["columns"] = []
    return out


def public_graph(graph: GraphDocument | dict[str, Any]) -> GraphDocument:
    """``graph`` (a record, or the parsed graph.json) whose small nodes carry no statistic."""
    out = to_dict(graph) if isinstance(graph, GraphDocument) else copy.deepcopy(graph)
    _suppress(out.get("nodes"))
    return GraphDocument.from_dict(out, "graph.json (public view):")
