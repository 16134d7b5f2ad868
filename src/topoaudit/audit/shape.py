"""The features of the shown graph in the user's terms, and where each weak region lies.

The graph engine (:mod:`topoaudit.mapper.features`) lists the components, loops and
flares of the graph with their bootstrap confidence; this module adds what a reviewer
needs to read them: the rows each feature holds, the filter range it spans, the columns
that set it apart, and for each weak region the feature it lies on.

* a **separate group** (a component other than the one with most rows) is described by
  the columns whose standardised mean difference between its rows and all other rows is
  largest (as in :mod:`topoaudit.audit.describe`);
* a **flare** by the columns whose standardised mean difference between the rows of its
  tip node and those of the node where it joins the rest is largest: what changes along
  it;
* a **loop** is described by the columns that change most from node to node round it:
  the share of each column's variance over the loop's rows that lies between its nodes
  (a one-way analysis of variance, eta squared).
"""

from __future__ import annotations

import numpy as np

from topoaudit.audit.describe import _smd
from topoaudit.bundle.records import OnFeature, ShapeColumn, ShapeFeatureRecord
from topoaudit.mapper.features import ShapeSummary
from topoaudit.mapper.graph import MapperGraph

__all__ = ["describe_shape", "place_on_features"]

_TOP_COLUMNS = 3
_ON_FEATURE_SHARE = 0.5


def _contrast_columns(
    X: np.ndarray, names: list[str], rows: np.ndarray, against: np.ndarray | None = None
) -> list[ShapeColumn]:
    """The columns that set ``rows`` apart from ``against`` (default: all other rows)."""
    inside = np.zeros(X.shape[0], dtype=bool)
    inside[rows] = True
    if against is None:
        other = ~inside
    else:
        other = np.zeros(X.shape[0], dtype=bool)
        other[against] = True
        other &= ~inside
    if not other.any() or not inside.any():
        return []
    smds = [_smd(X[inside, j], X[other, j]) for j in range(X.shape[1])]
    order = sorted(range(X.shape[1]), key=lambda j: (-abs(smds[j]), j))[:_TOP_COLUMNS]
    return [
        ShapeColumn(names[j], smd=smds[j], direction="higher" if smds[j] > 0 else "lower")
        for j in order
    ]


def _loop_columns(
    X: np.ndarray, names: list[str], members: tuple[np.ndarray, ...], nodes: tuple[int, ...]
) -> list[ShapeColumn]:
    parts = [members[v] for v in nodes]
    rows = np.concatenate(parts)
    total = X[rows].var(axis=0) * rows.size
    between = np.zeros(X.shape[1])
    grand = X[rows].mean(axis=0)
    for m in parts:
        between += m.size * (X[m].mean(axis=0) - grand) ** 2
    eta = np.divide(between, total, out=np.zeros_like(between), where=total > 0)
    order = sorted(range(X.shape[1]), key=lambda j: (-eta[j], j))[:_TOP_COLUMNS]
    return [ShapeColumn(names[j], eta_squared=float(eta[j])) for j in order]


def describe_shape(
    summary: ShapeSummary,
    graph: MapperGraph,
    X: np.ndarray,
    names: list[str],
) -> list[ShapeFeatureRecord]:
    """Name and describe each feature of ``summary``, the features of ``graph`` (``X``:
    the feature matrix in the user's units).

    Features are numbered within their kind by extent, largest first: "loop 1",
    "flare 2"; the component with most rows is "the main component", the others are
    "separate group 1", "separate group 2"... Components of a single node (no extent in
    the filter) are left out.
    """
    out: list[ShapeFeatureRecord] = []
    components = [f for f in summary.of_kind("component")]
    members = graph.members
    main = max(components, key=lambda f: (graph.rows_of(f.nodes).size, -min(f.nodes)))
    counters = {"component": 0, "loop": 0, "flare": 0}
    label = {"component": "separate group", "loop": "loop", "flare": "flare"}
    for kind in ("component", "loop", "flare"):
        ranked = sorted(summary.of_kind(kind), key=lambda f: (-f.extent, f.nodes))
        for f in ranked:
            is_main = f is main
            if kind == "component" and not is_main and len(f.nodes) < 2:
                continue
            rows = graph.rows_of(f.nodes)
            if kind == "loop":
                columns = _loop_columns(X, names, members, f.nodes)
            elif kind == "flare" and f.tip is not None and f.root is not None:
                columns = _contrast_columns(X, names, members[f.tip], members[f.root])
            else:
                columns = _contrast_columns(X, names, rows)
            if is_main:
                name = "the main component"
            else:
                counters[kind] += 1
                name = f"{label[kind]} {counters[kind]}"
            out.append(
                ShapeFeatureRecord(
                    name=name,
                    kind=kind,
                    confidence=f.confidence,
                    extent=f.extent,
                    filter_low=min(f.birth, f.death),
                    filter_high=max(f.birth, f.death),
                    nodes=f.nodes,
                    rows=int(rows.size),
                    tip_node=f.tip,
                    columns=tuple(columns),
                    main=is_main,
                )
            )
    return out


def place_on_features(
    rows: np.ndarray, features: list[ShapeFeatureRecord], graph: MapperGraph
) -> OnFeature | None:
    """The most specific feature (fewest rows) holding at least half of ``rows``, with
    that share, and whether it is the feature's tip (at least half of the tip node's rows
    are in ``rows``); None when no feature other than the main component holds half."""
    rows = np.asarray(rows)
    best = None
    for f in features:
        if f.main:
            continue
        share = float(np.isin(rows, graph.rows_of(f.nodes)).mean()) if rows.size else 0.0
        if share >= _ON_FEATURE_SHARE and (best is None or f.rows < best[0].rows):
            best = (f, share)
    if best is None:
        return None
    f, share = best
    at_tip = False
    if f.tip_node is not None:
        tip_rows = graph.members[f.tip_node]
        at_tip = bool(np.isin(tip_rows, rows).mean() >= _ON_FEATURE_SHARE)
    return OnFeature(feature=f.name, kind=f.kind, share=share, at_tip=at_tip)
