"""The features of a Mapper graph's shape, and how sure each one is.

A 1-D Mapper graph with the mean filter value of each node is a graph with a function on
its nodes; its extended persistence diagram (Cohen-Steiner, Edelsbrunner and Harer,
"Extending persistence using Poincaré and Lefschetz duality", Found. Comput. Math. 9,
2009) lists its features, each with a birth and a death value of the function:

* **components** (``ext0``): each connected component, from its lowest to its highest
  filter value;
* **loops** (``ext1``): each independent cycle, from the highest to the lowest filter
  value it spans (its birth is the value where it closes going up, its death where it
  closes going down);
* branches that end at a local minimum (going down, ``ord0``) or a local maximum (going
  up, ``rel1``) of the filter, from their tip to where they join the rest.

The features listed are the components, the loops and the **flares**: a flare is a
branch to a leaf, the path from a node of degree 1 to the first node of degree 3 or more
(a path component with two leaves has none). A flare's extent is the filter difference
between its tip and that junction. Its tip is a local extreme of the filter, so its two
ends are coordinates of the diagram (an ``ord0`` or ``rel1`` point, or the ends of a
component and the loop or branch it joins).

Carrière, Michel and Oudot ("Statistical analysis and parameter selection for Mapper",
JMLR 19, 2018, section on confidence regions) give each feature a confidence by the
bootstrap: rebuild the graph on rows drawn with replacement, take the bottleneck distance
between the diagram of each rebuilt graph and the diagram of the graph shown, and call a
feature whose distance to the diagonal (half its extent, ``|death - birth| / 2``) exceeds
a share ``c`` of those distances a feature of confidence ``c``: a diagram within
bottleneck distance ``d`` moves each end of each feature by at most ``d``, so a feature
of extent more than ``2d`` is still there. The extended diagram is four diagrams (the
parts above) and its bottleneck distance is the largest of theirs; a component's
confidence uses the distances of the component part, a loop's those of the loop part,
and a flare's, whose ends may lie in several parts, the largest over all parts.

Here each resample keeps the filter values of its rows and the gain; settings that were
chosen from the data (the scale, the interval count) are chosen again from the resample,
as in the authors' reference implementation, since a resample holds repeated rows; given
settings are kept. On more rows than the builder's ``auto_rows``, a resample draws that
many rows (an m-out-of-n bootstrap, comparable with the graph shown because that graph's
clusters are formed on the same share of rows; it can only widen the distances, so it
errs towards lower confidence). Resamples are independent tasks handed to an executor.

Diagram values are computed by union-find (components and flares) and by reducing the
boundary matrix of the coned graph over Z/2 (loops), as in the paper above; the test
suite checks them against the GUDHI library's extended persistence.
"""

from __future__ import annotations

import dataclasses
from collections import deque
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from topoaudit._validation import random_generator

if TYPE_CHECKING:
    from topoaudit.mapper.graph import MapperBuilder, MapperGraph

__all__ = [
    "KINDS",
    "ShapeFeature",
    "ShapeSummary",
    "bottleneck_distance",
    "feature_confidence",
    "persistence_diagram",
    "shape_features",
]

KINDS = ("component", "loop", "flare")
_DIAGRAM_PARTS = ("ext0", "ext1", "ord0", "rel1")


@dataclass(frozen=True)
class ShapeFeature:
    """One feature of a graph's shape.

    Attributes
    ----------
    kind : {"component", "loop", "flare"}
    part : {"ext0", "ext1", "ord0", "rel1"}
        Where the feature sits in the extended persistence diagram.
    birth, death : float
        Its point in the diagram (filter values).
    nodes : tuple of int
        The nodes it holds: a component's nodes, a loop's cycle, a flare's branch.
    tip : int or None
        A flare's extreme node (the tip of the branch), else None.
    root : int or None
        The node of degree 3 or more where a flare joins the rest, else None.
    confidence : float or None
        The bootstrap confidence, when computed.
    """

    kind: str
    part: str
    birth: float
    death: float
    nodes: tuple[int, ...]
    tip: int | None = None
    confidence: float | None = None
    root: int | None = None

    @property
    def extent(self) -> float:
        """``|death - birth|``: how far along the filter the feature reaches."""
        return abs(self.death - self.birth)


@dataclass(frozen=True)
class ShapeSummary:
    """The features of a graph with the bootstrap behind their confidence."""

    features: tuple[ShapeFeature, ...]
    distances: tuple[float, ...] = field(default=())
    n_resamples: int = 0
    resample_rows: int = 0
    seconds_per_resample: float = 0.0

    def of_kind(self, kind: str) -> list[ShapeFeature]:
        return [f for f in self.features if f.kind == kind]


def _adjacency(n_nodes: int, edges: np.ndarray) -> list[list[int]]:
    adj: list[list[int]] = [[] for _ in range(n_nodes)]
    for a, b in np.asarray(edges, dtype=np.int64).reshape(-1, 2):
        adj[int(a)].append(int(b))
        adj[int(b)].append(int(a))
    return adj


def _flares(values: np.ndarray, adj: list[list[int]], *, upward: bool) -> list[ShapeFeature]:
    """Branches from union-find on sublevel (or superlevel) sets, by the elder rule."""
    n = values.size
    sign = -1.0 if upward else 1.0
    order = np.lexsort((np.arange(n), sign * values))
    parent = np.full(n, -1, dtype=np.int64)
    members: dict[int, list[int]] = {}

    def find(x: int) -> int:
        root = x
        while parent[root] != root:
            root = int(parent[root])
        while parent[x] != root:
            parent[x], x = root, int(parent[x])
        return root

    out = []
    for v in (int(i) for i in order):
        parent[v] = v
        members[v] = [v]
        for u in adj[v]:
            if parent[u] < 0:
                continue
            ru, rv = find(u), find(v)
            if ru == rv:
                continue
            # the root is the extreme node of its set; the elder is the more extreme one
            key_u, key_v = (sign * values[ru], ru), (sign * values[rv], rv)
            elder, young = (ru, rv) if key_u < key_v else (rv, ru)
            if values[young] != values[v]:
                out.append(
                    ShapeFeature(
                        kind="flare",
                        part="rel1" if upward else "ord0",
                        birth=float(values[young]),
                        death=float(values[v]),
                        nodes=tuple(sorted(members[young])),
                        tip=young,
                    )
                )
            parent[young] = elder
            members[elder].extend(members.pop(young))
    return out


def _components(graph: MapperGraph, values: np.ndarray) -> list[ShapeFeature]:
    """One ext0 feature per connected component: from its lowest to its highest value."""
    from topoaudit.mapper.topology import component_labels

    count, labels = component_labels(graph)
    out = []
    for c in range(count):
        nodes = np.flatnonzero(labels == c)
        out.append(
            ShapeFeature(
                kind="component",
                part="ext0",
                birth=float(values[nodes].min()),
                death=float(values[nodes].max()),
                nodes=tuple(int(v) for v in nodes),
            )
        )
    return out


def _loop_pairs(values: np.ndarray, edges: np.ndarray) -> list[tuple[int, float, float]]:
    """Ext1 points ``(edge, birth, death)`` by reducing the coned graph's boundary matrix.

    The filtration: vertices and edges going up (an edge at its higher end), then the
    cone point, then the cone on each vertex and edge going down (an edge at its lower
    end). A column pairing an ascending edge with a cone triangle is a loop born at the
    edge's value going up and dying at the triangle's value going down.
    """
    n, m = values.size, edges.shape[0]
    if m == 0:
        return []
    hi = np.maximum(values[edges[:, 0]], values[edges[:, 1]])
    lo = np.minimum(values[edges[:, 0]], values[edges[:, 1]])
    up_v = np.lexsort((np.arange(n), values))
    up_e = np.lexsort((np.arange(m), hi))
    # merge vertices and edges going up: at equal values, vertices first
    keys = [(float(values[v]), 0, int(v)) for v in up_v] + [(float(hi[e]), 1, int(e)) for e in up_e]
    keys.sort()
    pos_v, pos_e = np.empty(n, np.int64), np.empty(m, np.int64)
    columns: list[set[int]] = []
    column_value: list[float] = []
    for value, dim, idx in keys:
        if dim == 0:
            pos_v[idx] = len(columns)
            columns.append(set())
        else:
            pos_e[idx] = len(columns)
            a, b = edges[idx]
            columns.append({int(pos_v[a]), int(pos_v[b])})
        column_value.append(value)
    apex = len(columns)
    columns.append(set())
    column_value.append(np.inf)
    down = [(-float(values[v]), 0, int(v)) for v in range(n)] + [
        (-float(lo[e]), 1, int(e)) for e in range(m)
    ]
    down.sort()
    cone_v = np.empty(n, np.int64)
    triangle_edge: dict[int, int] = {}
    for value, dim, idx in down:
        if dim == 0:
            cone_v[idx] = len(columns)
            columns.append({apex, int(pos_v[idx])})
        else:
            a, b = edges[idx]
            triangle_edge[len(columns)] = idx
            columns.append({int(pos_e[idx]), int(cone_v[a]), int(cone_v[b])})
        column_value.append(-value)
    ascending_edge = {int(pos_e[e]): e for e in range(m)}
    pivot: dict[int, int] = {}
    reduced: list[set[int]] = []
    pairs = []
    for j, col in enumerate(columns):
        col = set(col)
        while col:
            low = max(col)
            k = pivot.get(low)
            if k is None:
                break
            col ^= reduced[k]
        reduced.append(col)
        if col:
            low = max(col)
            pivot[low] = j
            if j in triangle_edge and low in ascending_edge:
                pairs.append((ascending_edge[low], column_value[low], column_value[j]))
    return pairs


def _loop_nodes(edge: tuple[int, int], lo: float, hi: float, values, adj) -> tuple[int, ...]:
    """A cycle through ``edge`` within the filter range ``[lo, hi]``: the edge and a
    shortest path between its ends that avoids it."""
    a, b = edge
    inside = (values >= lo - 1e-12) & (values <= hi + 1e-12)
    previous = {a: -1}
    queue = deque([a])
    while queue and b not in previous:
        x = queue.popleft()
        for y in adj[x]:
            if y in previous or not inside[y] or (x == a and y == b):
                continue
            previous[y] = x
            queue.append(y)
    if b not in previous:
        return tuple(sorted({a, b}))
    path, x = [], b
    while x != -1:
        path.append(x)
        x = previous[x]
    return tuple(sorted(path))


def _leaf_flares(values: np.ndarray, adj: list[list[int]]) -> list[ShapeFeature]:
    """Branches from each leaf to the first node of degree 3 or more."""
    out = []
    for leaf in range(values.size):
        if len(adj[leaf]) != 1:
            continue
        path, previous, current = [leaf], leaf, adj[leaf][0]
        while len(adj[current]) == 2:
            path.append(current)
            previous, current = current, next(u for u in adj[current] if u != previous)
        if len(adj[current]) < 3:  # reached another leaf: a path, not a flare
            continue
        out.append(
            ShapeFeature(
                kind="flare",
                part="branch",
                birth=float(values[leaf]),
                death=float(values[current]),
                nodes=tuple(sorted(path)),
                tip=leaf,
                root=current,
            )
        )
    return out


def _loops(values: np.ndarray, edges: np.ndarray, adj: list[list[int]]) -> list[ShapeFeature]:
    out = []
    for edge_index, birth, death in _loop_pairs(values, edges):
        a, b = (int(x) for x in edges[edge_index])
        nodes = _loop_nodes((a, b), death, birth, values, adj)
        out.append(ShapeFeature("loop", "ext1", float(birth), float(death), nodes))
    return out


def _node_values(graph: MapperGraph, values: Any) -> np.ndarray:
    return np.asarray(graph.node_filter[:, 0] if values is None else values, dtype=np.float64)


def persistence_diagram(graph: MapperGraph, values: Any = None) -> dict[str, np.ndarray]:
    """The extended persistence diagram of ``graph``: ``{part: array of (birth, death)}``.

    Parts: ``ext0`` (components), ``ext1`` (loops), ``ord0`` and ``rel1`` (branches going
    down and up); points of zero extent are left out. ``values`` is the function on
    nodes, by default each node's mean value of the first filter dimension.

    Notes
    -----
    Components and branches cost O(E α(V)) by union-find; loops cost the reduction of a
    matrix of ``2(V + E) + 1`` columns, at worst cubic in that, in practice near linear
    on Mapper graphs.
    """
    f = _node_values(graph, values)
    adj = _adjacency(graph.n_nodes, graph.edges)
    parts = _components(graph, f) + _loops(f, np.asarray(graph.edges, dtype=np.int64), adj)
    parts += _flares(f, adj, upward=False) + _flares(f, adj, upward=True)
    out = {p: np.zeros((0, 2)) for p in _DIAGRAM_PARTS}
    for p in _DIAGRAM_PARTS:
        points = [(x.birth, x.death) for x in parts if x.part == p and x.extent > 0]
        if points:
            out[p] = np.asarray(points, dtype=np.float64)
    return out


def shape_features(graph: MapperGraph, values: Any = None) -> list[ShapeFeature]:
    """The components, loops and flares of ``graph`` for the node function ``values``.

    Parameters
    ----------
    graph : MapperGraph
    values : array of shape (n_nodes,) or None, default=None
        The function on nodes; by default each node's mean value of the first filter
        dimension.

    Returns
    -------
    list of ShapeFeature
        Components, then loops, then flares (branches to a leaf).

    Examples
    --------
    >>> import numpy as np
    >>> from topoaudit.mapper.graph import MapperGraph
    >>> ring = MapperGraph.from_members(
    ...     [np.array([0, 1]), np.array([1, 2]), np.array([2, 3]), np.array([3, 0])], n_rows=4,
    ...     node_filter=np.array([[0.0], [1.0], [2.0], [1.0]]))
    >>> [(f.kind, f.birth, f.death) for f in shape_features(ring)]
    [('component', 0.0, 2.0), ('loop', 2.0, 0.0)]
    """
    f = _node_values(graph, values)
    adj = _adjacency(graph.n_nodes, graph.edges)
    loops = _loops(f, np.asarray(graph.edges, dtype=np.int64), adj)
    return _components(graph, f) + loops + _leaf_flares(f, adj)


def _perfect_matching(a: np.ndarray, b: np.ndarray, t: float) -> bool:
    from scipy.sparse import csr_array
    from scipy.sparse.csgraph import maximum_bipartite_matching

    ka, kb = a.shape[0], b.shape[0]
    size = ka + kb
    allowed = np.zeros((size, size), dtype=bool)
    if ka and kb:
        allowed[:ka, :kb] = np.abs(a[:, None, :] - b[None, :, :]).max(axis=2) <= t
    half_a = np.abs(a[:, 1] - a[:, 0]) / 2
    half_b = np.abs(b[:, 1] - b[:, 0]) / 2
    allowed[np.arange(ka), kb + np.arange(ka)] = half_a <= t
    allowed[ka + np.arange(kb), np.arange(kb)] = half_b <= t
    allowed[ka:, kb:] = True
    match = maximum_bipartite_matching(csr_array(allowed.astype(np.int8)), perm_type="column")
    return bool(np.all(match >= 0))


def _bottleneck_part(a: np.ndarray, b: np.ndarray) -> float:
    if a.shape[0] == 0 and b.shape[0] == 0:
        return 0.0
    candidates = [np.abs(a[:, 1] - a[:, 0]) / 2, np.abs(b[:, 1] - b[:, 0]) / 2]
    if a.shape[0] and b.shape[0]:
        candidates.append(np.abs(a[:, None, :] - b[None, :, :]).max(axis=2).ravel())
    values = np.unique(np.concatenate(candidates))
    lo, hi = 0, values.size - 1
    while lo < hi:
        mid = (lo + hi) // 2
        if _perfect_matching(a, b, float(values[mid])):
            hi = mid
        else:
            lo = mid + 1
    return float(values[lo])


def part_distances(first: dict[str, np.ndarray], second: dict[str, np.ndarray]) -> dict[str, float]:
    """The bottleneck distance between the same part of two extended diagrams, per part."""
    empty = np.zeros((0, 2))
    return {
        p: _bottleneck_part(
            np.asarray(first.get(p, empty), float).reshape(-1, 2),
            np.asarray(second.get(p, empty), float).reshape(-1, 2),
        )
        for p in _DIAGRAM_PARTS
    }


def bottleneck_distance(first: dict[str, np.ndarray], second: dict[str, np.ndarray]) -> float:
    """The bottleneck distance between two extended diagrams: the largest over their four
    parts of the bottleneck distance (L-infinity, points may go to the diagonal).

    Examples
    --------
    >>> one = {"ext1": np.array([[2.0, 0.0]])}
    >>> bottleneck_distance(one, {"ext1": np.array([[2.5, 0.0]])})
    0.5
    >>> bottleneck_distance(one, {})  # the point goes to the diagonal: half its extent
    1.0
    """
    return max(part_distances(first, second).values())


def _resample_distance(
    shared: np.ndarray,
    seed: int,
    size: int,
    n_features: int,
    settings: dict[str, Any],
    reference: dict[str, np.ndarray],
) -> tuple[float, ...]:
    """Rebuild the graph on ``size`` rows drawn without replacement; the bottleneck
    distance of each part of its diagram to ``reference``. A pure function of its
    arguments (one task), on one native thread wherever it runs, so that its sums are
    added in the same order serially, in a local process or on a cluster."""
    from threadpoolctl import threadpool_limits

    from topoaudit.mapper.graph import MapperBuilder

    rng = np.random.default_rng(seed)
    rows = np.sort(rng.choice(shared.shape[0], size=size, replace=False))
    X = np.asarray(shared[rows, :n_features])
    values = np.asarray(shared[rows, n_features:])
    with threadpool_limits(limits=1):
        builder = MapperBuilder(values, **settings).fit(X)
    parts = part_distances(reference, persistence_diagram(builder.graph_))
    return tuple(parts[p] for p in _DIAGRAM_PARTS)


def _resample_settings(builder: MapperBuilder, resample_rows: int) -> dict[str, Any]:
    """The builder's settings for a resample: what was chosen from the data is chosen
    again from the resample (a resample holds repeated rows, so its scale is coarser);
    what was given is kept."""
    from topoaudit.mapper.graph import AUTO

    d = len(builder.n_intervals_)
    auto_clusterer = isinstance(builder.clusterer, str) and builder.clusterer == AUTO
    return {
        "cover": builder.cover if isinstance(builder.cover, str) else "uniform",
        "n_intervals": AUTO
        if builder.n_intervals == AUTO
        else (builder.n_intervals_[0] if d == 1 else builder.n_intervals_),
        "overlap": builder.overlap_[0] if d == 1 else builder.overlap_,
        "clusterer": AUTO if auto_clusterer else builder.clusterer_,
        "noise": builder.noise,
        "random_state": builder.random_state,
        "auto_rows": max(int(resample_rows), 10),
    }


def feature_confidence(
    builder: MapperBuilder,
    X: Any,
    *,
    n_resamples: int = 100,
    executor: Any = None,
    random_state: int | None = 0,
    progress: Callable[[str], None] | None = None,
) -> ShapeSummary:
    """The features of ``builder.graph_`` with their bootstrap confidence.

    Parameters
    ----------
    builder : MapperBuilder
        Fitted on ``X``.
    X : array of shape (n_rows, n_features)
        The rows the builder was fitted on.
    n_resamples : int, default=100
        Bootstrap resamples (the paper's reference implementation uses 100).
    executor : executor or None, default=None
        Where the resamples run (see :mod:`topoaudit.mapper.executor`); serial if None.
    random_state : int or None, default=0
    progress : callable or None
        Called with ``"resample I of N"`` after each tenth of the resamples.

    Returns
    -------
    ShapeSummary
    """
    import time

    from topoaudit.errors import ParameterError
    from topoaudit.mapper._input import as_matrix
    from topoaudit.mapper.executor import make_executor, map_shared

    X = as_matrix(X, min_rows=1)
    if builder.filter_values_.shape[1] != 1:
        msg = (
            "feature_confidence needs a graph of a one-dimensional filter; this one has "
            f"{builder.filter_values_.shape[1]} filter dimensions, whose product cover draws "
            "loops of its own grid."
        )
        raise ParameterError(msg)
    graph = builder.graph_
    features = shape_features(graph)
    if n_resamples <= 0:
        return ShapeSummary(tuple(features))
    reference = persistence_diagram(graph)
    size = max(2, min(X.shape[0] // 2, int(builder.auto_rows)))
    shared = np.column_stack([X, builder.filter_values_]).astype(np.float64, copy=False)
    settings = _resample_settings(builder, size)
    rng = random_generator(random_state)
    seeds = rng.integers(0, 2**63 - 1, size=n_resamples)
    tasks = [(int(s), size, X.shape[1], settings, reference) for s in seeds]
    run = make_executor(executor)
    start = time.perf_counter()
    tenth = max(1, -(-n_resamples // 10))

    def done(k: int) -> None:  # says how far it is after each tenth of the resamples
        if progress is not None and (k % tenth == 0 or k == n_resamples):
            progress(f"resample {k} of {n_resamples}")

    distances = map_shared(run, _resample_distance, shared, tasks, progress=done)
    seconds = (time.perf_counter() - start) / n_resamples
    per_part = np.asarray(distances, dtype=np.float64).reshape(n_resamples, len(_DIAGRAM_PARTS))
    column = {"component": 0, "loop": 1}
    scored = []
    for f in features:
        d = per_part[:, column[f.kind]] if f.kind in column else per_part.max(axis=1)
        scored.append(dataclasses.replace(f, confidence=float(np.mean(d < f.extent / 2.0))))
    return ShapeSummary(
        features=tuple(scored),
        distances=tuple(float(d) for d in np.sort(per_part.max(axis=1))),
        n_resamples=int(n_resamples),
        resample_rows=int(size),
        seconds_per_resample=float(seconds),
    )
