"""The Mapper graph and its builder.

Given rows ``X``, a filter function ``f``, a cover of ``f(X)`` and a clusterer, the
Mapper graph (Singh, Mémoli and Carlsson, 2007) has one node per cluster found inside
each cover element, and an edge between two nodes that share at least one row: the
1-skeleton of the nerve of the cover of ``X`` by those clusters.

Node ids are stable: nodes are numbered in the lexicographic order of their cover
element, and within an element in the order of each cluster's first row (noise
singletons, if any, after the clusters, by row). The same data and settings always give
the same ids.
"""

from __future__ import annotations

import json
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from topoaudit._validation import NONE, Choice, Interval, Kind, check_params
from topoaudit.errors import DataError, LimitError, TopoauditError, unknown_name
from topoaudit.limits import MAX_GRAPH_NODES
from topoaudit.mapper._input import as_matrix
from topoaudit.mapper.auto import DEFAULT_GAIN, AutoChoice, choose_settings
from topoaudit.mapper.clustering import Clusterer, SingleLinkage, make_clusterer, relabel
from topoaudit.mapper.cover import COVERS
from topoaudit.mapper.executor import ProcessExecutor, make_executor
from topoaudit.mapper.filters import make_filter

__all__ = ["AUTO", "ClusteringError", "MapperBuilder", "MapperGraph", "nerve"]

AUTO = "auto"
"""The value of ``n_intervals``, ``overlap`` and ``clusterer`` that asks for the settings
chosen from the data (:mod:`topoaudit.mapper.auto`)."""


class ClusteringError(TopoauditError, RuntimeError):
    """The clusterer failed on one cover element."""


def nerve(
    members: list[np.ndarray] | tuple[np.ndarray, ...], n_rows: int
) -> tuple[np.ndarray, np.ndarray]:
    """Edges between nodes that share rows, and how many rows each pair shares.

    Built from the sparse incidence matrix ``A`` (nodes x rows, one entry per
    membership): ``A Aᵀ`` holds, for every pair of nodes, the rows they share. The
    product walks the inverted index row -> nodes, so its cost is O(M + n_rows + P) for
    M memberships and P (pair, shared row) incidences; node pairs that share no row are
    never looked at.

    Parameters
    ----------
    members : sequence of ndarray
        Row positions of each node, each row at most once per node.
    n_rows : int
        Rows of the data; every position is below it.

    Returns
    -------
    edges : ndarray of shape (n_edges, 2), pairs ``i < j`` in lexicographic order
    shared : ndarray of shape (n_edges,), rows shared by each pair

    Examples
    --------
    >>> e, s = nerve([np.array([0, 1, 2]), np.array([2, 3]), np.array([1, 2, 4])], n_rows=5)
    >>> e.tolist(), s.tolist()
    ([[0, 1], [0, 2], [1, 2]], [1, 2, 1])
    """
    from scipy import sparse

    none = (np.zeros((0, 2), dtype=np.int64), np.zeros(0, dtype=np.int64))
    n_nodes = len(members)
    if n_nodes == 0:
        return none
    sizes = np.fromiter((np.size(m) for m in members), dtype=np.int64, count=n_nodes)
    n_members = int(sizes.sum())
    if n_members == 0:
        return none
    rows = np.concatenate([np.asarray(m, dtype=np.int64).ravel() for m in members])
    n_cols = max(int(n_rows), int(rows.max()) + 1)
    small = max(n_members, n_cols, n_nodes) < 2**31 - 1
    index = np.int32 if small else np.int64
    indptr = np.zeros(n_nodes + 1, dtype=index)
    np.cumsum(sizes, out=indptr[1:])
    incidence = sparse.csr_array(
        (np.ones(n_members, dtype=np.int64), rows.astype(index, copy=False), indptr),
        shape=(n_nodes, n_cols),
    )
    product = (incidence @ incidence.T.tocsr()).tocsr()
    product.sort_indices()
    first = np.repeat(np.arange(n_nodes, dtype=np.int64), np.diff(product.indptr))
    second = product.indices.astype(np.int64)
    upper = second > first
    edges = np.column_stack([first[upper], second[upper]])
    return edges, product.data[upper].astype(np.int64)


@dataclass(frozen=True, eq=False)
class MapperGraph:
    """A Mapper graph: nodes with their member rows, and the edges of the nerve.

    Attributes
    ----------
    n_rows : int
        Rows of the data the graph was built from.
    members : tuple of ndarray
        Sorted row positions of each node.
    node_element : ndarray of shape (n_nodes, d)
        Interval index (per filter dimension) of the cover element each node came from.
    node_filter : ndarray of shape (n_nodes, d)
        Mean filter value of each node's rows.
    edges, edge_shared, edge_jaccard : ndarray
        Node pairs ``i < j``, rows they share, and ``shared / |union|``.
    """

    n_rows: int
    members: tuple[np.ndarray, ...]
    node_element: np.ndarray
    node_filter: np.ndarray
    edges: np.ndarray
    edge_shared: np.ndarray
    edge_jaccard: np.ndarray
    settings: dict[str, Any] = field(default_factory=dict)

    @classmethod
    def from_members(
        cls,
        members: list[np.ndarray],
        n_rows: int,
        *,
        node_element: np.ndarray | None = None,
        node_filter: np.ndarray | None = None,
        settings: dict[str, Any] | None = None,
    ) -> MapperGraph:
        """Build a graph from node memberships, computing the nerve."""
        members_t = tuple(np.sort(np.asarray(m, dtype=np.int64)) for m in members)
        edges, shared = nerve(members_t, n_rows)
        sizes = np.fromiter((m.size for m in members_t), dtype=np.int64, count=len(members_t))
        if edges.size:
            union = sizes[edges[:, 0]] + sizes[edges[:, 1]] - shared
            jaccard = shared / union
        else:
            jaccard = np.zeros(0)
        n = len(members_t)
        return cls(
            n_rows=int(n_rows),
            members=members_t,
            node_element=np.zeros((n, 1), np.int64) if node_element is None else node_element,
            node_filter=np.zeros((n, 1)) if node_filter is None else node_filter,
            edges=edges,
            edge_shared=shared,
            edge_jaccard=jaccard,
            settings=dict(settings or {}),
        )

    @property
    def n_nodes(self) -> int:
        return len(self.members)

    @property
    def n_edges(self) -> int:
        return int(self.edges.shape[0])

    @property
    def node_sizes(self) -> np.ndarray:
        return np.fromiter((m.size for m in self.members), dtype=np.int64, count=self.n_nodes)

    def row_nodes(self) -> tuple[np.ndarray, np.ndarray]:
        """The inverted index as CSR arrays: nodes of row ``r`` are
        ``indices[indptr[r]:indptr[r + 1]]``."""
        sizes = self.node_sizes
        rows = np.concatenate(self.members) if self.n_nodes else np.zeros(0, np.int64)
        nodes = np.repeat(np.arange(self.n_nodes, dtype=np.int64), sizes)
        order = np.lexsort((nodes, rows))
        indptr = np.zeros(self.n_rows + 1, dtype=np.int64)
        np.cumsum(np.bincount(rows, minlength=self.n_rows), out=indptr[1:])
        return indptr, nodes[order]

    def home_nodes(self) -> np.ndarray:
        """Each row's home node: the largest node holding it, the lowest id on ties; -1 for
        a row in no node."""
        sizes = self.node_sizes
        home = np.full(self.n_rows, -1, dtype=np.int64)
        for v in sorted(range(self.n_nodes), key=lambda v: (sizes[v], -v)):
            home[self.members[v]] = v  # larger nodes are written last and win
        return home

    def rows_of(self, nodes: Any) -> np.ndarray:
        """The sorted positions of the rows held by any of ``nodes``."""
        nodes = list(nodes)
        if not nodes:
            return np.zeros(0, dtype=np.int64)
        return np.unique(np.concatenate([self.members[v] for v in nodes]))

    def covered_rows(self) -> np.ndarray:
        """Boolean mask of rows that lie in at least one node."""
        mask = np.zeros(self.n_rows, dtype=bool)
        for m in self.members:
            mask[m] = True
        return mask

    def to_networkx(self) -> Any:
        """A ``networkx.Graph`` with node attributes ``size``, ``element`` and edge
        attributes ``shared`` and ``jaccard``."""
        import networkx as nx

        g = nx.Graph()
        for i, m in enumerate(self.members):
            g.add_node(i, size=int(m.size), element=tuple(int(v) for v in self.node_element[i]))
        for (a, b), s, j in zip(self.edges, self.edge_shared, self.edge_jaccard, strict=True):
            g.add_edge(int(a), int(b), shared=int(s), jaccard=float(j))
        return g

    def node_link(self, *, include_members: bool = False) -> dict[str, Any]:
        """A JSON-ready node-link description (no row ids unless asked for)."""
        nodes = []
        for i, m in enumerate(self.members):
            node: dict[str, Any] = {
                "id": i,
                "size": int(m.size),
                "element": [int(v) for v in self.node_element[i]],
                "filter_mean": [_round(v) for v in self.node_filter[i]],
            }
            if include_members:
                node["members"] = [int(r) for r in m]
            nodes.append(node)
        links = [
            {"source": int(a), "target": int(b), "shared": int(s), "jaccard": _round(j)}
            for (a, b), s, j in zip(self.edges, self.edge_shared, self.edge_jaccard, strict=True)
        ]
        return {"n_rows": self.n_rows, "settings": self.settings, "nodes": nodes, "links": links}

    def write_node_link(self, path: str | Path, *, include_members: bool = False) -> Path:
        """Write :meth:`node_link` as sorted, indented JSON to ``path``."""
        path = Path(path)
        text = json.dumps(self.node_link(include_members=include_members), sort_keys=True, indent=1)
        path.write_text(text + "\n", encoding="utf-8")
        return path


def _round(value: float, digits: int = 10) -> float:
    """Round to ``digits`` significant digits, for stable JSON."""
    v = float(value)
    return 0.0 if v == 0 else float(f"{v:.{digits}g}")


def _cluster_task(X_sub: np.ndarray, clusterer: Clusterer) -> tuple[np.ndarray, float]:
    """Cluster one cover element: a pure function of its data and the clusterer."""
    if X_sub.shape[0] < clusterer.min_rows:
        return np.zeros(X_sub.shape[0], dtype=np.int64), 0.0
    labels = clusterer.fit_predict(X_sub)
    return _relabel(np.asarray(labels)), float(clusterer.fit_seconds_)


_FEW_LABELS = 64


def _relabel(labels: np.ndarray) -> np.ndarray:
    """:func:`~topoaudit.mapper.clustering.relabel`, without sorting when labels are few.

    With integer labels below ``_FEW_LABELS`` the first row of each label is found by one
    pass per label instead of a sort of all rows; the result is the same.
    """
    if labels.dtype.kind not in "iu" or labels.size == 0:
        return relabel(labels)
    lab = labels.astype(np.int64, copy=False)
    hi = int(lab.max())
    if not 0 <= hi < _FEW_LABELS:
        return relabel(labels)
    keep = lab >= 0
    present = np.flatnonzero(np.bincount(lab[keep], minlength=hi + 1))
    firsts = np.fromiter((np.argmax(lab == c) for c in present), np.int64, present.size)
    new = np.full(hi + 1, -1, dtype=np.int64)
    new[present[np.argsort(firsts, kind="stable")]] = np.arange(present.size)
    return np.where(keep, new[np.where(keep, lab, 0)], -1)


def _cluster_rows(
    X: np.ndarray, rows: np.ndarray, clusterer: Clusterer
) -> tuple[np.ndarray, float]:
    """Cluster the rows ``rows`` of ``X`` (for executors that share ``X`` between tasks).

    The labels come back in the smallest integer type that holds them, so that less
    travels back from a worker process; the builder widens them again.
    """
    labels, seconds = _cluster_task(np.asarray(np.take(X, rows, axis=0)), clusterer)
    if labels.size:
        lo, hi = int(labels.min()), int(labels.max())
        narrow = np.promote_types(np.min_scalar_type(lo), np.min_scalar_type(hi))
        labels = labels.astype(narrow, copy=False)
    return labels, seconds


_CLUSTERER_SPEC = Kind(
    lambda v: isinstance(v, str | Clusterer) or hasattr(v, "fit_predict"),
    "'auto', a clusterer name or an object with fit_predict",
)


class MapperBuilder:
    """Build the Mapper graph of a data set.

    Parameters
    ----------
    filter : str, Filter, transformer, callable or array, default="pca"
        The filter function (see :func:`topoaudit.mapper.filters.make_filter`).
    filter_params : dict or None, default=None
        Parameters for a filter given by name.
    cover : {"uniform", "balanced"} or cover object, default="uniform"
    n_intervals : "auto", int or (int, int), default="auto"
        ``"auto"``: the most intervals whose length is at least the interval length chosen
        from the data (:func:`topoaudit.mapper.auto.choose_settings`: the filter's largest
        change between rows within the neighbourhood scale, divided by the gain).
    overlap : "auto", float or (float, float), default="auto"
        The gain: the share of an interval's length it shares with its neighbour;
        ``"auto"`` is 0.4, inside the range (1/3, 1/2) of Carrière, Michel and Oudot (2018).
    clusterer : "auto", str or object with fit_predict, default="auto"
        ``"auto"``: single linkage cut at the neighbourhood scale chosen from the data.
    clusterer_params : dict or None, default=None
    auto_rows : int, default=5000
        Above this many rows, the settings are chosen on a seeded sample of this size and
        the automatic clusterer clusters the same share of each element.
    noise : {"singleton", "drop"}, default="singleton"
        What becomes of rows a clusterer labels noise: a node of one row each, or no node
        (the row then lies in no node of that element; :attr:`n_noise_` counts them).
    n_jobs : int, None or executor, default=None
        ``None``/1: serial; ``n > 1``: ``n`` local processes; or an executor object.
        Parallel runs give the same graph as serial. Local worker processes are kept for
        the next build (:meth:`~topoaudit.mapper.executor.ProcessExecutor.shutdown` stops
        them), so only the first parallel build pays for starting them.

    Attributes
    ----------
    graph_ : MapperGraph
    auto_ : AutoChoice or None
        What was chosen from the data, when any setting was ``"auto"``.
    n_intervals_, overlap_ : tuple
        The interval counts and overlaps used, per filter dimension.
    clusterer_ : the clusterer used
    filter_values_ : ndarray of shape (n_rows, d)
    cover_ : the fitted cover
    n_elements_ : int
        Non-empty cover elements.
    n_noise_ : int
        Row memberships labelled noise by the clusterer.
    timings_ : dict
        Seconds spent in each step; ``cluster_fit_sum`` is the sum of the clusterer's own
        fit times over the cover elements.

    Examples
    --------
    >>> angle = np.linspace(0, 2 * np.pi, 400, endpoint=False)
    >>> circle = np.column_stack([np.cos(angle), np.sin(angle)])
    >>> builder = MapperBuilder("coordinate", filter_params={"columns": 1}, n_intervals=4,
    ...                         overlap=0.3, clusterer="single_linkage")
    >>> builder.fit(circle).graph_.n_nodes
    6
    >>> from topoaudit.mapper.topology import invariants
    >>> auto = MapperBuilder("coordinate", filter_params={"columns": 1}).fit(circle)
    >>> invariants(auto.graph_).cycle_rank, auto.n_intervals_, auto.overlap_
    (1, (7,), (0.4,))
    """

    _parameter_constraints = {
        "cover": [Choice(tuple(COVERS)), Kind(lambda v: hasattr(v, "fit_transform"), "a cover")],
        "noise": [Choice(("singleton", "drop"))],
        "clusterer": [_CLUSTERER_SPEC],
        "filter_params": [Kind(lambda v: v is None or isinstance(v, dict), "a dict or None")],
        "clusterer_params": [Kind(lambda v: v is None or isinstance(v, dict), "a dict or None")],
        "random_state": [Interval(int, 0, None), NONE],
        "auto_rows": [Interval(int, 10, None)],
    }

    def __init__(
        self,
        filter: Any = "pca",
        *,
        filter_params: dict[str, Any] | None = None,
        cover: Any = "uniform",
        n_intervals: int | tuple[int, int] | str = AUTO,
        overlap: float | tuple[float, float] | str = AUTO,
        clusterer: Any = AUTO,
        clusterer_params: dict[str, Any] | None = None,
        noise: str = "singleton",
        n_jobs: Any = None,
        random_state: int | None = 0,
        auto_rows: int = 5000,
    ) -> None:
        self.filter = filter
        self.filter_params = filter_params
        self.cover = cover
        self.n_intervals = n_intervals
        self.overlap = overlap
        self.clusterer = clusterer
        self.clusterer_params = clusterer_params
        self.noise = noise
        self.n_jobs = n_jobs
        self.random_state = random_state
        self.auto_rows = auto_rows

    def _make_cover(self, n_intervals: Any, overlap: Any) -> Any:
        if isinstance(self.cover, str):
            if self.cover not in COVERS:
                raise unknown_name("cover", self.cover, COVERS)
            return COVERS[self.cover](n_intervals, overlap=overlap)
        return self.cover

    def _wants_auto(self) -> bool:
        return AUTO in (self.n_intervals, self.overlap) or (
            isinstance(self.clusterer, str) and self.clusterer == AUTO
        )

    def _choose(self, X: np.ndarray, values: np.ndarray) -> AutoChoice:
        """The settings chosen from the data (given numbers are kept)."""
        return choose_settings(
            X,
            values,
            gain=None if self.overlap == AUTO else self.overlap,
            n_intervals=None if self.n_intervals == AUTO else self.n_intervals,
            max_rows=self.auto_rows,
            random_state=self.random_state,
        )

    def _auto_clusterer(self, auto: AutoChoice, n_rows: int) -> SingleLinkage:
        share = min(1.0, auto.sample_rows / max(n_rows, 1))
        return SingleLinkage(
            cut=max(auto.scale, 1e-12),
            sample_share=None if share >= 1.0 else share,
            random_state=self.random_state,
        )

    def _settings(self, clusterer: Clusterer, cover: Any) -> dict[str, Any]:
        settings = {
            "filter": repr(self._filter_obj),
            "cover": repr(cover),
            "clusterer": repr(clusterer),
            "noise": self.noise,
        }
        if self.auto_ is not None:
            settings["auto"] = self.auto_.as_dict()
        return settings

    def fit(self, X: Any, y: Any = None) -> MapperBuilder:
        """Build the graph of the rows of ``X``; sets :attr:`graph_` and returns self."""
        if isinstance(self.cover, str) and self.cover not in COVERS:
            raise unknown_name("cover", self.cover, COVERS)
        check_params("MapperBuilder", self._parameter_constraints, vars(self))
        t0 = time.perf_counter()
        auto_clusterer = isinstance(self.clusterer, str) and self.clusterer == AUTO
        clusterer = (
            SingleLinkage()
            if auto_clusterer
            else make_clusterer(self.clusterer, **(self.clusterer_params or {}))
        )
        if (
            isinstance(clusterer, Clusterer)
            and hasattr(clusterer, "random_state")
            and (self.clusterer_params is None or "random_state" not in self.clusterer_params)
            and isinstance(self.clusterer, str)
        ):
            clusterer.random_state = self.random_state
            clusterer.check()  # here, not in a worker, if the seed does not suit it
        executor = make_executor(self.n_jobs)
        if isinstance(self.cover, str):  # a named cover's errors for given numbers, early
            probe = self._make_cover(
                1 if self.n_intervals == AUTO else self.n_intervals,
                DEFAULT_GAIN if self.overlap == AUTO else self.overlap,
            )
            probe._check_limit()
            check_params(type(probe).__name__, probe._parameter_constraints, vars(probe))
        X = as_matrix(X, min_rows=1)
        if X.shape[0] < clusterer.min_rows:
            msg = (
                f"X has {X.shape[0]} row{'s' if X.shape[0] != 1 else ''}; the clusterer "
                f"{type(clusterer).__name__} needs at least {clusterer.min_rows}."
            )
            raise DataError(msg)

        if isinstance(executor, ProcessExecutor):
            # the workers start and import the engine while the filter and cover run here
            executor.start(preload=(__name__,))

        params = dict(self.filter_params or {})
        if isinstance(self.filter, str) and "random_state" in _init_args(self.filter):
            params.setdefault("random_state", self.random_state)
        self._filter_obj = make_filter(self.filter, **params)
        values = self._filter_obj.fit_transform(X)
        self.auto_ = self._choose(X, values) if self._wants_auto() else None
        n_intervals, overlap = self.n_intervals, self.overlap
        if self.auto_ is not None:
            d = values.shape[1]
            n_intervals = self.auto_.n_intervals[0] if d == 1 else self.auto_.n_intervals
            overlap = self.auto_.gain[0] if d == 1 else self.auto_.gain
            if auto_clusterer:
                clusterer = self._auto_clusterer(self.auto_, X.shape[0])
        cover = self._make_cover(n_intervals, overlap)
        t1 = time.perf_counter()
        elements = cover.fit_transform(values)
        if len(elements) > MAX_GRAPH_NODES:  # each element gives one node or more
            raise _too_many_nodes(len(elements), "at least", cover)
        t2 = time.perf_counter()

        weights = [float(e.size) for e in elements]
        try:
            if hasattr(executor, "map_shared"):
                # one copy of X for all tasks; each task gathers its own rows
                index = np.int32 if X.shape[0] < 2**31 else np.int64
                tasks = [(e.rows.astype(index), clusterer) for e in elements]
                results = executor.map_shared(_cluster_rows, X, tasks, weights=weights)
            else:
                tasks = [(X[e.rows], clusterer) for e in elements]
                results = executor.map(_cluster_task, tasks)
        except TopoauditError:
            raise
        except Exception as exc:
            msg = f"The clusterer {clusterer!r} failed on a cover element: {exc}"
            raise ClusteringError(msg) from exc
        t3 = time.perf_counter()

        n_nodes = 0
        for labels, _ in results:
            labels = np.asarray(labels)
            if labels.size:
                n_nodes += max(int(labels.max()) + 1, 0)
                if self.noise == "singleton":
                    n_nodes += int(np.count_nonzero(labels < 0))
        if n_nodes > MAX_GRAPH_NODES:  # counted from the labels, before any node is formed
            raise _too_many_nodes(n_nodes, "", clusterer)

        d = values.shape[1]
        members: list[np.ndarray] = []
        node_element: list[tuple[int, ...]] = []
        filter_parts: list[np.ndarray] = []
        n_noise = 0
        fit_sum = 0.0
        for element, (labels, fit_seconds) in zip(elements, results, strict=True):
            fit_sum += fit_seconds
            labels = np.asarray(labels)  # any integer type: the order of a stable sort is the same
            if labels.shape != element.rows.shape:
                msg = (
                    f"The clusterer {clusterer!r} returned {labels.shape[0]} labels for a cover "
                    f"element of {element.size} rows; one label per row is needed."
                )
                raise ClusteringError(msg)
            k = int(labels.max()) + 1 if labels.size else 0
            if k:
                order = np.argsort(labels, kind="stable")
                starts = np.searchsorted(labels[order], np.arange(k + 1))
                for c in range(k):
                    rows = element.rows[order[starts[c] : starts[c + 1]]]
                    members.append(rows)
                    filter_parts.append(values[rows].mean(axis=0)[None, :])
                node_element.extend([element.index] * k)
            noise_rows = element.rows[labels < 0]
            n_noise += int(noise_rows.size)
            if self.noise == "singleton" and noise_rows.size:
                members.extend(noise_rows.reshape(-1, 1))
                filter_parts.append(values[noise_rows])  # the mean of one row is that row
                node_element.extend([element.index] * int(noise_rows.size))

        node_filter = (
            np.concatenate(filter_parts).astype(np.float64, copy=False)
            if filter_parts
            else np.zeros((0, d), dtype=np.float64)
        )
        self.graph_ = MapperGraph.from_members(
            members,
            X.shape[0],
            node_element=np.array(node_element, dtype=np.int64).reshape(-1, d),
            node_filter=node_filter,
            settings=self._settings(clusterer, cover),
        )
        t4 = time.perf_counter()
        self.filter_values_ = values
        self.cover_ = cover
        self.clusterer_ = clusterer
        self.n_intervals_ = tuple(getattr(cover, "n_intervals_", ()))
        self.overlap_ = tuple(getattr(cover, "overlaps_", ()))
        self.n_elements_ = len(elements)
        self.n_noise_ = n_noise
        self.timings_ = {
            "filter": t1 - t0,
            "cover": t2 - t1,
            "clustering": t3 - t2,
            "cluster_fit_sum": fit_sum,
            "nodes_and_nerve": t4 - t3,
            "total": t4 - t0,
        }
        return self

    def __repr__(self) -> str:
        return (
            f"MapperBuilder(filter={self.filter!r}, cover={self.cover!r}, "
            f"n_intervals={self.n_intervals!r}, overlap={self.overlap!r}, "
            f"clusterer={self.clusterer!r})"
        )


def _too_many_nodes(n: int, qualifier: str, cause: Any) -> LimitError:
    asked = f"{qualifier} {n}".strip()
    return LimitError(
        f"This graph would have {asked} nodes (from {cause!r}); a graph has at most "
        f"{MAX_GRAPH_NODES} nodes (MAX_GRAPH_NODES): use fewer intervals, a smaller overlap "
        "or a clusterer that makes fewer clusters."
    )


def _init_args(filter_name: str) -> tuple[str, ...]:
    from topoaudit.mapper.filters import FILTERS

    cls = FILTERS.get(filter_name)
    return cls.__init__.__code__.co_varnames if cls else ()
